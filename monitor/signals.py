"""Named time series on one sample axis: what estimators produce and alert rules read."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Signals:
    """Values of named quantities at the samples of one batch, SI units, NaN where unknown.

    Attributes:
        t_s: sample times, seconds since the run started, increasing.
        values: signal name -> float64 array of len(t_s). Channel values use the channel's name
            (`tank_pressure`); estimates use their own SI-suffixed names (`usable_propellant_kg`).
        std: signal name -> combined standard uncertainty (k = 1) where known, same shape.
    """

    t_s: np.ndarray
    values: dict[str, np.ndarray]
    std: dict[str, np.ndarray] = field(default_factory=dict)

    def __len__(self) -> int:
        return int(self.t_s.size)
