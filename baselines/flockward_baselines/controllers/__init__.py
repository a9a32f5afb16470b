"""Reference controllers: a registry of built-in names and a factory that also loads user classes.

``make_controller("boundary-arc", push_fraction=0.4)`` builds a built-in controller;
``make_controller("mypackage.mymodule:MyController")`` loads any class that follows
``flockward.controller.Controller``.
"""

from __future__ import annotations

from typing import Any

from flockward.controller import Controller, load_controller_class
from flockward_baselines.controllers.boundary_arc import BoundaryArc
from flockward_baselines.controllers.collect_drive import CollectDrive
from flockward_baselines.controllers.collect_drive_roles import CollectDriveRoles
from flockward_baselines.controllers.direct_pursuit import DirectPursuit
from flockward_baselines.controllers.idle import Idle
from flockward_baselines.controllers.no_drone import NoDrone
from flockward_baselines.controllers.sector_arc import SectorArc

BUILTIN: dict[str, type[Controller]] = {
    "boundary-arc": BoundaryArc,
    "direct-pursuit": DirectPursuit,
    "collect-drive": CollectDrive,
    "idle": Idle,
    "no-drone": NoDrone,
    "sector-arc": SectorArc,
    "collect-drive-roles": CollectDriveRoles,
}

__all__ = [
    "BUILTIN",
    "BoundaryArc",
    "CollectDrive",
    "CollectDriveRoles",
    "DirectPursuit",
    "Idle",
    "NoDrone",
    "SectorArc",
    "make_controller",
]


def make_controller(name_or_import_path: str, **params: Any) -> Controller:
    """A controller from a built-in name or an import path ``package.module:Name``.

    ``params`` are passed to the class's constructor.
    """
    if name_or_import_path in BUILTIN:
        cls: type = BUILTIN[name_or_import_path]
    elif ":" in name_or_import_path:
        cls = load_controller_class(name_or_import_path)
    else:
        raise ValueError(
            f"unknown controller {name_or_import_path!r}; built-in names: "
            f"{', '.join(BUILTIN)}, or an import path 'package.module:Name'"
        )
    try:
        controller: Controller = cls(**params)  # an imported class follows Controller by its API
    except TypeError as error:
        raise ValueError(f"controller {name_or_import_path!r}: bad parameters ({error})") from None
    return controller
