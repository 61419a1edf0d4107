"""A memo on disk of the equation-of-state results a rig's setup needs, so that ejecta started again for the same
rig skips loading CoolProp's fluid library (about 2 s) and building its property tables (about 1 s).

The physics core stays free of I/O: it marks the calls that belong to a rig's setup
(monitor.physics.gas.cacheable(): the engine's construction, the standard densities of flow units) and hands
them to an injected store. This module is that store; monitor.cli installs it for every command
(install_from_environment).

A result is stored under a hash of everything it depends on: the call and its exact input bytes, this memo's
format, the ejecta and CoolProp versions, and the source of monitor/physics/gas.py. A stored result is
therefore exactly what the same call computes now, or it is not found. Failures of the equation of state are
stored as their message and raised again by the caller. The memo is best effort: a folder that cannot be
written, or a damaged file, only means computing again.

Where: $EJECTA_CACHE_DIR, else $XDG_CACHE_HOME/ejecta/gas, else ~/.cache/ejecta/gas. EJECTA_CACHE_DIR=off
turns the memo off. Deleting the folder is always safe.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import threading
import zipfile
from functools import lru_cache
from pathlib import Path
from typing import Callable

import numpy as np

from monitor.physics import gas

MEMO_ENV = "EJECTA_CACHE_DIR"
MEMO_FORMAT = 1


def memo_dir() -> Path | None:
    """The memo's folder, or None when EJECTA_CACHE_DIR turns it off ("off", "none" or empty)."""
    value = os.environ.get(MEMO_ENV)
    if value is not None:
        return None if value.strip().lower() in ("", "off", "none") else Path(value)
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "ejecta" / "gas"


def install_from_environment() -> DiskStore | None:
    """Give the physics core a DiskStore in memo_dir() (none when the memo is off); returns it."""
    folder = memo_dir()
    store = None if folder is None else DiskStore(folder)
    gas.install_store(store)
    return store


@lru_cache(maxsize=1)
def _salt() -> bytes:
    """What a stored result depends on besides its call: this format, the versions, the code computing it."""
    from importlib.metadata import PackageNotFoundError, version

    import monitor

    try:
        coolprop = version("CoolProp")
    except PackageNotFoundError:
        coolprop = "unknown"
    code = hashlib.sha256(Path(gas.__file__).read_bytes()).hexdigest()
    return repr((MEMO_FORMAT, monitor.__version__, coolprop, code)).encode()


def key(kind: str, parts: tuple) -> str:
    """The hash naming a stored result: kind, then each part (arrays by dtype, shape and bytes; others by repr)."""
    h = hashlib.sha256(_salt())
    h.update(kind.encode())
    for part in parts:
        if isinstance(part, np.ndarray):
            h.update(b"|a" + part.dtype.str.encode() + repr(part.shape).encode())
            h.update(np.ascontiguousarray(part).tobytes())
        else:
            h.update(b"|r" + repr(part).encode())
    return h.hexdigest()


class DiskStore:
    """Results kept as .npz files in one folder, each named by key()."""

    def __init__(self, folder: Path):
        self.folder = Path(folder)

    def recall(self, kind: str, parts: tuple, compute: Callable[[], dict[str, np.ndarray]]) -> dict[str, np.ndarray]:
        """compute()'s arrays: read back if an earlier run stored them for the same kind and parts, otherwise
        computed and stored."""
        path = self.folder / f"{key(kind, parts)}.npz"
        try:
            with np.load(path, allow_pickle=False) as stored:
                return {name: stored[name] for name in stored.files}
        except (OSError, ValueError, EOFError, KeyError, zipfile.BadZipFile):
            pass  # not stored yet, or damaged: compute it again
        result = compute()
        temporary = path.with_name(f"{path.stem}.{os.getpid()}.{threading.get_ident()}.tmp")
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            with open(temporary, "wb") as f:
                np.savez(f, **result)
            os.replace(temporary, path)  # readers see the whole file or none
        except OSError:
            with contextlib.suppress(OSError):
                temporary.unlink()
        return result
