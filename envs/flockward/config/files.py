"""Config files: the one-line ``ConfigError``, reading TOML, the shipped configs directory and how
paths are shown in messages. Shared by scenarios, suites and training configs."""

from __future__ import annotations

import tomllib
from pathlib import Path

__all__ = [
    "ConfigError",
    "config_dir",
    "label",
    "list_flocks",
    "list_pursuers",
    "list_scenarios",
    "looks_like_path",
    "read_toml",
    "resolve",
    "shipped_names",
]


class ConfigError(ValueError):
    """A config file or override is invalid; the message is one line: FILE: key ... : allowed.

    ``file`` and ``key`` (dotted, as in the message) say where, when the error is about one key
    of one file, so a checker can carry on past it (``flockward.config.checking``).
    """

    def __init__(self, message: str, *, file: str | None = None, key: str | None = None):
        super().__init__(message)
        self.file = file
        self.key = key


def _config_roots() -> list[Path]:
    """Candidate configs directories: inside the installed package first, then the repository."""
    package = Path(__file__).resolve().parent.parent  # flockward/
    return [package / "_configs", package.parent.parent / "configs"]


def config_dir() -> Path:
    """The shipped configs directory (holding flocks/, pursuers/, scenarios/, suites/, train/)."""
    for root in _config_roots():
        if (root / "scenarios").is_dir():
            return root
    tried = ", ".join(str(r) for r in _config_roots())
    raise ConfigError(f"shipped configs not found; looked in: {tried}")


def shipped_names(sub: str) -> list[str]:
    """File stems of the shipped configs under configs/SUB, sorted."""
    return sorted(p.stem for p in (config_dir() / sub).glob("*.toml"))


def list_scenarios() -> list[str]:
    """Names of the shipped scenarios (file stems under configs/scenarios/)."""
    return shipped_names("scenarios")


def list_flocks() -> list[str]:
    """Names of the shipped flocks (file stems under configs/flocks/)."""
    return shipped_names("flocks")


def list_pursuers() -> list[str]:
    """Names of the shipped drone presets (file stems under configs/pursuers/)."""
    return shipped_names("pursuers")


def label(path: Path) -> str:
    """A path as shown in messages: relative to the working directory when it lies below it."""
    try:
        return str(path.resolve().relative_to(Path.cwd().resolve()))
    except ValueError:
        return str(path)


def read_toml(path: Path) -> dict[str, object]:
    """The parsed file; a missing, unreadable or malformed file is a one-line ConfigError."""
    shown = label(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise ConfigError(f"{shown}: file not found") from None
    except OSError as exc:
        raise ConfigError(f"{shown}: cannot read file: {exc.strerror or exc}") from None
    try:
        return tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError:
        raise ConfigError(f"{shown}: not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{shown}: invalid TOML: {exc}") from None


def looks_like_path(name: str | Path) -> bool:
    """A Path, or text naming a .toml file or holding a directory separator (else a config name)."""
    text = str(name)
    return isinstance(name, Path) or text.endswith(".toml") or "/" in text or "\\" in text


def resolve(name_or_path: str | Path, sub: str, base: Path | None = None) -> Path:
    """A shipped config name (file stem under configs/SUB) or a path (relative to ``base``)."""
    if looks_like_path(name_or_path):
        path = Path(name_or_path)
        return path if base is None or path.is_absolute() else base / path
    return config_dir() / sub / f"{name_or_path}.toml"
