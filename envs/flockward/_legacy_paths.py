"""Old flat module paths (``flockward.types``, ``flockward.env``, ...) kept for one release.

The core was grouped into layer subpackages; importing a module by its old path still works and
returns the module at its new path, with a DeprecationWarning naming it.
"""

from __future__ import annotations

import importlib
import importlib.abc
import importlib.machinery
import importlib.util
import sys
import warnings
from types import ModuleType

# Old path -> new path. Remove after the release that follows the move.
MOVED: dict[str, str] = {
    "flockward.types": "flockward.sim.types",
    "flockward.dynamics": "flockward.sim.dynamics",
    "flockward.world": "flockward.sim.world",
    "flockward.geometry": "flockward.sim.geometry",
    "flockward.formations": "flockward.sim.formations",
    "flockward.metrics": "flockward.sim.metrics",
    "flockward.scenarios": "flockward.config.scenarios",
    "flockward.observation": "flockward.task.observation",
    "flockward.reward": "flockward.task.reward",
    "flockward.env": "flockward.task.env",
    "flockward.vector_env": "flockward.task.vector_env",
    "flockward.registration": "flockward.task.registration",
    "flockward.suites": "flockward.bench.suites",
    "flockward.episode": "flockward.bench.episode",
    "flockward.evaluation": "flockward.bench.evaluation",
    "flockward.leaderboard": "flockward.bench.leaderboard",
    "flockward.ray_backend": "flockward.bench.ray_backend",
}


class _MovedModuleFinder(importlib.abc.MetaPathFinder, importlib.abc.Loader):
    """Resolves an old module path to the module at its new path."""

    def find_spec(
        self, fullname: str, path: object = None, target: ModuleType | None = None
    ) -> importlib.machinery.ModuleSpec | None:
        if fullname not in MOVED:
            return None
        return importlib.util.spec_from_loader(fullname, self)

    def create_module(self, spec: importlib.machinery.ModuleSpec) -> ModuleType:
        new = MOVED[spec.name]
        warnings.warn(
            f"{spec.name} moved to {new}; the old path will be removed in the next release",
            DeprecationWarning,
            stacklevel=2,
        )
        return importlib.import_module(new)

    def exec_module(self, module: ModuleType) -> None:
        """Nothing to run: the module at the new path is already executed."""


def install() -> None:
    """Put the finder on ``sys.meta_path`` once."""
    if not any(isinstance(f, _MovedModuleFinder) for f in sys.meta_path):
        sys.meta_path.append(_MovedModuleFinder())
