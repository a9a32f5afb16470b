"""The controller a result file was run with, rebuilt from its header (for audits and replays)."""

from __future__ import annotations

import functools
from collections.abc import Callable
from pathlib import Path
from typing import Any

from flockward.controller import Controller
from flockward_baselines.controllers import make_controller
from flockward_baselines.policy import DEFAULT_ALGORITHM, PolicyController


def factory_from_results(
    data: dict[str, Any], models_dir: str | Path = "results/models"
) -> Callable[[], Controller]:
    """A picklable zero-argument factory of the controller named in a result file's header.

    A saved model is looked up by file name in ``models_dir`` (its content hash is checked when
    the header is compared); other controllers are built with the recorded constructor arguments
    (``--param`` values), or else with the recorded parameters.
    """
    params = data["controller_parameters"]
    if "model_sha256" in params:
        model = Path(models_dir) / Path(params["model"]).name
        return functools.partial(
            PolicyController, model, params.get("algorithm", DEFAULT_ALGORITHM)
        )
    arguments = data.get("controller_arguments", params)
    return functools.partial(make_controller, data["controller"], **arguments)
