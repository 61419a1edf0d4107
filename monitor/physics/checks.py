"""Argument checks shared by the physics modules: bad input raises PhysicsError naming it, never yields NaN."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from monitor.errors import PhysicsError


def checked(name: str, value: object, expectation: str, ok: Callable[[np.ndarray], np.ndarray] | None = None) -> np.ndarray:
    """Return value as a float array, or raise PhysicsError naming the argument and its first bad element.

    Args:
        name: the argument's name, for the message.
        value: a number or array-like.
        expectation: what a good value is, for the message ("a positive pressure, Pa").
        ok: elementwise test every finite element must pass; None accepts any finite value.
    """
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise PhysicsError(f"{name} = {value!r}: expected {expectation}") from exc
    with np.errstate(invalid="ignore"):
        bad = ~np.isfinite(arr) if ok is None else ~np.isfinite(arr) | ~ok(arr)
    if np.any(bad):
        raise PhysicsError(f"{name} = {float(arr[bad].flat[0])!r}: expected {expectation}")
    return arr
