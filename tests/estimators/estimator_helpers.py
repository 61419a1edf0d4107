"""Shared by the estimator tests: a synthetic rig with ideal SI channels, batches from columns, simulator runs."""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from drivers.line_parsing import parse_lines
from drivers.simulated import RigSimulator, source_format
from monitor.calibration import Calibrator, parse_channels
from monitor.config import load_rig, parse_rig
from monitor.estimators import Estimator
from monitor.estimators.estimator import _concat, _slice
from monitor.rigs import resolve_rig
from monitor.samples import Batch, Quality
from monitor.signals import Signals

CHANNELS = """
[[channels]]
name = "p_tank"
role = "tank_pressure"
field = "p_tank"
unit = "Pa abs"
calibration = { kind = "identity" }
accuracy = { percent_of_full_scale = 0.25, full_scale = "300 bar" }
stale_after = "0.5 s"
[[channels]]
name = "t_tank"
role = "tank_temperature"
field = "t_tank"
unit = "K"
calibration = { kind = "identity" }
accuracy = { absolute = "1 K" }
stale_after = "0.5 s"
[[channels]]
name = "p_feed"
role = "feed_pressure"
field = "p_feed"
unit = "Pa abs"
calibration = { kind = "identity" }
accuracy = { percent_of_full_scale = 0.5, full_scale = "10 bar" }
stale_after = "0.5 s"
[[channels]]
name = "t_feed"
role = "feed_temperature"
field = "t_feed"
unit = "K"
calibration = { kind = "identity" }
accuracy = { absolute = "1 K" }
stale_after = "0.5 s"
[[channels]]
name = "flow"
role = "mass_flow"
field = "flow"
unit = "kg/s"
calibration = { kind = "identity" }
accuracy = { percent_of_reading = 1.0 }
stale_after = "0.5 s"
[[channels]]
name = "load"
role = "thrust"
field = "load"
unit = "N"
calibration = { kind = "identity" }
accuracy = { percent_of_full_scale = 0.1, full_scale = "10 N" }
stale_after = "0.5 s"
[[channels]]
name = "valve"
role = "valve"
field = "valve"
unit = "1"
calibration = { kind = "identity" }
stale_after = "0.5 s"
"""

RIG = """
format = 1
[rig]
name = "synthetic"
kind = "{kind}"
gas = "nitrogen"
ambient_pressure = "101.325 kPa abs"
ambient_temperature = "20 C"
[tank]
volume = "1 L"
fill_pressure = "200 bar gauge"
fill_temperature = "20 C"
meop = "230 bar gauge"
expansion = "{expansion}"
[regulator]
set_pressure = "6 bar gauge"
min_inlet_pressure = "10 bar gauge"
[nozzle]
throat_diameter = "1.0 mm"
exit_diameter = "1.4 mm"
discharge_coefficient = 0.95
divergence_half_angle = "15 deg"
thrust_efficiency = 0.97
count = {count}
[vehicle]
dry_mass = "{dry_mass}"
[estimation]
sample_rate = "1 kHz"
temperature_lag = "0 s"
mass_flow_lag = "0 s"
{estimation}
"""
FIELDS = ("p_tank", "t_tank", "p_feed", "t_feed", "flow", "load", "valve")


def synthetic_rig(kind: str = "stand", expansion: str = "isothermal", estimation: str = "", count: int = 1,
                  dry_mass: str = "4 kg", channels: str = CHANNELS):
    """A rig whose channels carry SI values directly (identity calibration) and whose sensors have no lag."""
    text = RIG.format(kind=kind, expansion=expansion, estimation=estimation, count=count, dry_mass=dry_mass)
    rig = parse_rig(text + channels, "synthetic.toml")
    return rig, parse_channels(rig)


def batch(t_s, **columns) -> Batch:
    """A calibrated batch from columns of SI values (NaN marks a bad sample)."""
    t = np.asarray(t_s, dtype=float)
    values = {k: np.broadcast_to(np.asarray(v, dtype=float), t.shape).copy() for k, v in columns.items()}
    quality = {k: np.where(np.isfinite(v), 0, int(Quality.NON_FINITE)).astype(np.uint8) for k, v in values.items()}
    return Batch(t, values, quality)


def feed(estimator: Estimator, whole: Batch, size: int) -> Signals:
    """update() over whole in batches of `size` samples; the Signals of all of them joined."""
    out = None
    for a in range(0, len(whole), size):
        part = estimator.update(_slice(whole, a, min(a + size, len(whole))))
        out = part if out is None else _concat(out, part)
    return out


@lru_cache(maxsize=8)
def simulated(rig_name: str, scenario: str | None = None, duration_s: float | None = None):
    """(rig, channels, the run as one calibrated batch, the simulator at its end) for a bundled rig."""
    rig = load_rig(resolve_rig(rig_name))
    fmt = source_format(rig)
    specs = parse_channels(rig, fmt.fields)
    calibrator = Calibrator(specs, fmt.fields)
    sim = RigSimulator(rig, scenario)
    duration = sim.scenario.duration_s if duration_s is None else duration_s
    batches = [calibrator.apply(parse_lines(b.lines, b.t_s, fmt)) for b in sim.blocks(duration)]
    return rig, specs, Batch.concat(batches), sim
