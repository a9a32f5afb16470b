"""The core's layers: no module imports from a layer above its own; old module paths still work."""

from __future__ import annotations

import ast
import importlib
import sys
import warnings
from pathlib import Path

import pytest

CORE = Path(__file__).resolve().parents[1] / "envs" / "flockward"

# Layer of each top-level part of the core, lowest first. A module may import from its own layer
# and any lower one. render and controller sit beside the task layer: they need only the simulator.
LAYER = {"sim": 0, "config": 1, "render": 1, "controller": 1, "task": 2, "bench": 3}


def _part(module: str) -> str | None:
    parts = module.split(".")
    if parts[0] != "flockward" or len(parts) < 2:
        return None
    return parts[1]


def _imports(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            found.append(node.module)
            found += [f"{node.module}.{alias.name}" for alias in node.names]
    return found


def _core_modules() -> list[Path]:
    return [p for p in CORE.rglob("*.py") if p.parent != CORE or p.stem in LAYER]


@pytest.mark.parametrize("path", _core_modules(), ids=lambda p: str(p.relative_to(CORE)))
def test_no_import_runs_upward(path: Path) -> None:
    own = path.parent.name if path.parent != CORE else path.stem
    upward = [
        name
        for name in _imports(path)
        if (part := _part(name)) in LAYER and LAYER[part] > LAYER[own]
    ]
    assert upward == [], f"{path.relative_to(CORE)} ({own}) imports from a higher layer: {upward}"


def test_layer_table_covers_every_part() -> None:
    parts = {p.name for p in CORE.iterdir() if p.is_dir() and (p / "__init__.py").exists()}
    parts |= {p.stem for p in CORE.glob("*.py") if not p.stem.startswith("_")}
    assert parts == set(LAYER)


def test_old_module_path_warns_and_returns_the_new_module() -> None:
    import flockward  # noqa: F401  (installs the old-path finder)
    from flockward.sim import types

    sys.modules.pop("flockward.types", None)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        old = importlib.import_module("flockward.types")
    assert old is types
    assert any(
        issubclass(w.category, DeprecationWarning) and "flockward.sim.types" in str(w.message)
        for w in caught
    )


def test_public_names_import_from_the_package() -> None:
    import flockward
    from flockward.task.env import DivertEnv

    assert flockward.DivertEnv is DivertEnv
    for name in flockward.__all__:
        assert getattr(flockward, name) is not None
    with pytest.raises(AttributeError):
        _ = flockward.NoSuchName  # type: ignore[attr-defined]
