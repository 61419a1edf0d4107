"""Small helpers shared by the alert tests: feeding signals in batches and reading transitions compactly."""

from __future__ import annotations

import numpy as np

from monitor.alerts import AlertEngine, AlertTransition
from monitor.signals import Signals


def signals(t, **values) -> Signals:
    """Signals from a time list and name=value lists (NaN allowed)."""
    return Signals(np.asarray(t, dtype=float), {k: np.asarray(v, dtype=float) for k, v in values.items()})


def feed(engine: AlertEngine, s: Signals, quality: dict | None = None, batch: int | None = None) -> list[AlertTransition]:
    """update() over s in batches of `batch` samples (all at once when None); the transitions of all batches."""
    n = len(s)
    size = n if batch is None else batch
    out: list[AlertTransition] = []
    for lo in range(0, n, size):
        part = Signals(s.t_s[lo:lo + size], {k: v[lo:lo + size] for k, v in s.values.items()})
        q = None if quality is None else {k: v[lo:lo + size] for k, v in quality.items()}
        out += engine.update(part, q)
    return out


def moves(transitions: list[AlertTransition], rule: str | None = None) -> list[tuple[float, str, str, str]]:
    """(t_s, from, to, cause) of each transition (of one rule, if given)."""
    return [(tr.t_s, tr.from_state.value, tr.to_state.value, tr.cause)
            for tr in transitions if rule is None or tr.rule == rule]


def as_logged(transitions: list[AlertTransition]) -> list[tuple[float, str]]:
    """(t_s, log text): compares NaN inputs as written, so two runs can be checked for equality."""
    return [(tr.t_s, tr.log_text()) for tr in transitions]


def activations(transitions: list[AlertTransition]) -> int:
    """How many times an alert went from not active to active and unacknowledged by its condition."""
    return sum(1 for tr in transitions if tr.cause == "condition_set" and tr.to_state.value == "active_unacknowledged"
               and tr.from_state != tr.to_state)
