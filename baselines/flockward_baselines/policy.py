"""A Controller that plays a saved Stable-Baselines3 model (the zip written by ``model.save``).

The model sees only the Gymnasium observation (information level "observation") and acts
deterministically, so a policy's score is reproducible: its network is evaluated by
``fixed_forward`` (float64, sums in index order), which gives the same action on every CPU where
torch's kernels do not; a network that module does not cover is played by ``model.predict``.
The zip is loaded on the first reset, not on construction: a factory building one controller
per episode stays cheap to pickle and to call, and each worker process loads the model once.
"""

from __future__ import annotations

import hashlib
import json
import zipfile
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from flockward.controller import Controller, StateView
from flockward.sim.types import Scenario
from flockward_baselines.fixed_forward import FixedForward, fixed_forward

if TYPE_CHECKING:  # Stable-Baselines3 is optional: imported on the first reset
    from stable_baselines3.common.base_class import BaseAlgorithm

ALGORITHMS = ("ppo", "a2c", "sac", "td3", "ddpg")
DEFAULT_ALGORITHM = "ppo"  # what --model plays without --param algorithm=...

# Loaded models by (resolved path, algorithm): one load per process, shared by the episodes, with
# their fixed-order networks (None where fixed_forward does not cover the policy).
_CACHE: dict[tuple[str, str], tuple[BaseAlgorithm, FixedForward | None]] = {}


def _sha256(path: Path) -> str:
    """Hex sha256 of a file, read in 1 MiB blocks."""
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def saved_algorithm(path: Path) -> str | None:
    """The algorithm that saved an SB3 zip, read from the module of its policy class in the
    zip's ``data`` entry (``stable_baselines3.sac.policies`` is SAC); None if it cannot tell."""
    try:
        with zipfile.ZipFile(path) as archive:
            data = json.loads(archive.read("data"))
        module = str(data["policy_class"]["__module__"])
    except (OSError, KeyError, TypeError, ValueError, zipfile.BadZipFile):
        return None
    parts = module.split(".")
    if len(parts) >= 2 and parts[0] == "stable_baselines3" and parts[1] in ALGORITHMS:
        return parts[1]
    return None


class PolicyController(Controller):
    """Deterministic ``model.predict`` of a saved SB3 model on the observation alone."""

    information_level = "observation"

    def __init__(self, model: str | Path, algorithm: str = DEFAULT_ALGORITHM) -> None:
        path = Path(model)
        if path.suffix != ".zip" or not path.is_file():
            raise ValueError(f"--model {model}: needs an existing .zip saved by model.save(...)")
        if algorithm not in ALGORITHMS:
            raise ValueError(
                f"--param algorithm={algorithm}: must be one of {', '.join(ALGORITHMS)}"
            )
        saved = saved_algorithm(path)
        if saved is not None and saved != algorithm:
            raise ValueError(
                f"--model {model}: saved by {saved.upper()}, played as {algorithm.upper()}: "
                f"add --param algorithm={saved}"
            )
        self.path = path.resolve()
        self.algorithm = algorithm
        self.name = f"model-{path.stem}"
        self._digest = _sha256(self.path)  # read once: it identifies the model in result files
        self._model: BaseAlgorithm | None = None
        self._forward: FixedForward | None = None

    def parameters(self) -> dict[str, Any]:
        """The model by file name and content hash (not path: the same model may move)."""
        return {"model": self.path.name, "model_sha256": self._digest, "algorithm": self.algorithm}

    def _load(self) -> tuple[BaseAlgorithm, FixedForward | None]:
        """The model from this process's cache, loaded on first use."""
        key = (str(self.path), self.algorithm)
        if key not in _CACHE:
            try:
                import stable_baselines3
            except ImportError:
                raise ImportError(
                    "playing a saved model needs Stable-Baselines3: pip install 'flockward[learn]'"
                ) from None
            cls = getattr(stable_baselines3, self.algorithm.upper())
            model = cls.load(str(self.path), device="cpu")
            _CACHE[key] = (model, fixed_forward(model))
        return _CACHE[key]

    def reset(self, scenario: Scenario, seed: int | None = None) -> None:
        """Load the model (once per process); a policy keeps no memory between steps."""
        if self._model is None:
            self._model, self._forward = self._load()

    def act(self, observation: Any, state: StateView | None) -> np.ndarray:
        """The model's deterministic action for this observation."""
        if self._model is None:
            raise RuntimeError(f"{self.name}: call reset(scenario) before act(...)")
        expected = self._model.observation_space.shape
        if expected is not None and tuple(np.shape(observation)[1:]) == tuple(expected):
            # A team scenario stacks one observation per drone (P, ...): a one-drone policy
            # flies drone 0 from drone 0's view, and the other drones hold still, as every
            # one-drone controller's do.
            observation = np.asarray(observation)[0]
        if expected is not None and tuple(np.shape(observation)) != tuple(expected):
            shape = np.shape(observation)
            raise ValueError(
                f"{self.path.name} expects observations of shape {tuple(expected)}, got "
                f"{tuple(shape)}: it was trained with other observation settings"
            )
        if self._forward is not None:
            return self._forward(observation)
        action, _ = self._model.predict(observation, deterministic=True)
        return np.asarray(action, dtype=np.float64).reshape(-1)
