"""The demo rig files bundled with ejecta, found by name or path."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from monitor.errors import ConfigError

DEFAULT_RIG = "bench_nitrogen_1l"


def bundled_rig_names() -> list[str]:
    """Names of the bundled demo rigs (file names without .toml)."""
    return sorted(p.name[:-5] for p in resources.files(__package__).iterdir() if p.name.endswith(".toml"))


def resolve_rig(name_or_path: str | None) -> Path:
    """A rig file path from a path, a bundled rig's name, or None for the default demo rig.

    Raises:
        ConfigError: neither an existing file nor a bundled rig name.
    """
    if name_or_path is None:
        name_or_path = DEFAULT_RIG
    path = Path(name_or_path)
    if path.is_file():
        return path
    candidate = resources.files(__package__) / f"{name_or_path}.toml"
    if candidate.is_file():
        return Path(str(candidate))
    raise ConfigError(
        "rig", name_or_path, "a rig file path or a bundled rig: " + ", ".join(bundled_rig_names())
    )
