"""The Estimator on the simulated rigs (fed through calibration as live), on odd batches, and on bad samples."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from estimator_helpers import batch, feed, simulated, synthetic_rig

from monitor.estimators import ESTIMATES, WITH_STD, EstimateState, Estimator
from monitor.estimators.estimator import _slice


@pytest.mark.parametrize("rig_name", ["bench_nitrogen_1l", "hover_air_3l"])
def test_demo_run_matches_the_simulators_ground_truth(rig_name):
    rig, specs, whole, sim = simulated(rig_name)
    estimator = Estimator(rig, specs)
    feed(estimator, whole, 1000)
    s = estimator.state()
    truth = sim.truth  # drivers.sim_model: thrust and nozzle flow integrated sample by sample
    assert abs(s.total_impulse_n_s - truth.total_impulse_n_s) <= 2.0 * s.total_impulse_n_s_std
    assert abs(s.total_impulse_estimated_n_s - truth.total_impulse_n_s) <= 2.0 * s.total_impulse_estimated_n_s_std
    assert abs(s.propellant_used_kg - truth.nozzle_mass_kg) <= 2.0 * s.propellant_used_kg_std
    assert abs(s.propellant_pvt_gauge_kg - truth.mass_kg) <= 2.0 * s.propellant_pvt_gauge_kg_std
    assert abs(s.propellant_flow_gauge_kg - truth.mass_kg) <= 2.0 * s.propellant_flow_gauge_kg_std
    assert abs(s.initial_propellant_kg - truth.initial_mass_kg) <= 2.0 * s.initial_propellant_kg_std
    # The scenario's pulses and burn: the valve opened this often and for this long (drivers.sim_scenario).
    opened = sim.scenario.open_intervals_s
    assert s.pulse_count == len(opened)
    assert s.burn_time_s == pytest.approx(sum(b - a for a, b in opened), abs=0.01)
    assert not s.leak_suspected


@pytest.mark.parametrize("rig_name", ["bench_nitrogen_1l", "hover_air_3l"])
def test_injected_leak_is_found_and_its_rate_recovered(rig_name):
    rig, specs, whole, sim = simulated(rig_name, "leak_and_dropout")
    estimator = Estimator(rig, specs)
    signals = feed(estimator, whole, 1000)
    s = estimator.state()
    leak_kg_s = [f.rate for f in sim.scenario.faults_of("leak")][0]
    assert abs(s.leak_rate_kg_s - leak_kg_s) <= 2.0 * s.leak_rate_kg_s_std
    assert np.any(signals.values["leak_suspected"] == 1.0)
    # The gauges part by the mass that leaked (PVT gauge minus flow gauge = -leaked).
    assert abs(s.gauge_difference_kg + sim.truth.leaked_kg) <= 2.0 * s.gauge_difference_kg_std
    # The same rig without the leak is never suspected.
    rig, specs, quiet, _ = simulated(rig_name)
    assert not np.any(Estimator(rig, specs).update(quiet).values["leak_suspected"] == 1.0)


def _close(a: float, b: float, rel: float) -> bool:
    return (math.isnan(a) and math.isnan(b)) or a == b or abs(a - b) <= rel * max(abs(a), abs(b))


def test_batch_size_does_not_change_the_result():
    rig, specs, whole, _ = simulated("bench_nitrogen_1l", None, 2.6)  # the first pulse opens at 2 s
    states = {}
    for size in (1000, 7, 1):
        estimator = Estimator(rig, specs)  # the sample rate is measured: the filter is designed mid-stream
        feed(estimator, whole, size)
        states[size] = dataclasses.asdict(estimator.state())
    assert states[1000]["burn_time_s"] > 0.5 and states[1000]["pulse_count"] == 1
    for size in (7, 1):
        for name, value in states[size].items():
            # Values agree to float rounding; uncertainties that propagate() finds by finite differences
            # agree to the rounding those amplify.
            rel = 1e-6 if name.endswith("_std") else 1e-9
            assert _close(value, states[1000][name], rel), (size, name, value, states[1000][name])


def _without(whole, names, mask):
    """A copy of the batch with the named channels bad (NaN) where mask is true."""
    out = dataclasses.replace(whole, values={k: v.copy() for k, v in whole.values.items()})
    for name in names:
        out.values[name][mask] = np.nan
    return out


def test_bad_samples_are_held_or_replaced_and_never_poison_integrals():
    rig, specs, whole, _ = simulated("bench_nitrogen_1l", None, 30.0)  # a steady burn from 18 s to 28 s
    names = [next(c.name for c in specs if c.role == role) for role in ("mass_flow", "thrust")]
    clean = Estimator(rig, specs).update(whole)
    t = whole.t_s
    # A 0.3 s dropout of flow meter and load cell in the burn, shorter than their stale_after: held.
    gap = (t >= 21.0) & (t < 21.3)
    held = Estimator(rig, specs).update(_without(whole, names, gap))
    assert np.all(np.isfinite(held.values["thrust_measured_n"][gap]))
    for name in ("propellant_used_kg", "total_impulse_n_s", "total_impulse_estimated_n_s"):
        assert np.all(np.isfinite(held.values[name][t > 1.0]))
        # Holding a steady reading for 0.3 s changes a 15 s firing's integral by well under 0.5 %.
        assert held.values[name][-1] == pytest.approx(clean.values[name][-1], rel=0.005)
    # A 2 s dropout, longer than stale_after: the flow integral takes the nozzle's flow (scaled by the last
    # apparent discharge coefficient), the thrust integral adds nothing.
    long_gap = (t >= 21.0) & (t < 23.0)
    lost = Estimator(rig, specs).update(_without(whole, names, long_gap))
    stale = long_gap & (t > 21.5)
    assert np.all(np.isnan(lost.values["thrust_measured_n"][stale]))
    assert np.all(np.isfinite(lost.values["propellant_used_kg"][t > 1.0]))
    assert lost.values["propellant_used_kg"][-1] == pytest.approx(clean.values["propellant_used_kg"][-1], rel=0.005)
    missing = clean.values["total_impulse_n_s"][-1] - lost.values["total_impulse_n_s"][-1]
    thrust_n = np.nanmean(clean.values["thrust_measured_n"][stale])
    assert missing == pytest.approx(thrust_n * 1.5, rel=0.02)  # 21.5 s to 23 s were not counted


def test_empty_batches_and_channels_that_never_report_are_harmless():
    rig, channels = synthetic_rig()
    estimator = Estimator(rig, channels)
    empty = estimator.update(batch([]))
    assert len(empty) == 0 and set(ESTIMATES) <= set(empty.values) and set(WITH_STD) <= set(empty.std)
    assert estimator.state() == EstimateState()
    t = np.arange(2000) / 1000.0
    nothing = batch(t, p_tank=np.nan, t_tank=np.nan, p_feed=np.nan, t_feed=np.nan, flow=np.nan, load=np.nan,
                    valve=np.nan)
    out = estimator.update(nothing)
    assert set(ESTIMATES) <= set(out.values) and set(WITH_STD) <= set(out.std)
    assert set(out.values) == set(empty.values) and set(out.std) == set(empty.std)
    assert all(len(v) == len(t) for v in out.values.values()) and all(len(v) == len(t) for v in out.std.values())
    assert out.values["propellant_used_kg"][-1] == 0.0 and out.values["total_impulse_n_s"][-1] == 0.0
    assert math.isnan(estimator.state().propellant_pvt_gauge_kg)
    estimator.update(batch([]))
    # Then good samples arrive and the estimates start.
    later = batch(t + 2.0, p_tank=150e5, t_tank=293.15, p_feed=1.01325e5, t_feed=293.15, flow=0.0, load=0.0, valve=0.0)
    estimator.update(later)
    s = estimator.state()
    assert math.isfinite(s.propellant_pvt_gauge_kg) and math.isfinite(s.usable_propellant_kg)
    assert s.propellant_used_kg == 0.0 and s.pulse_count == 0


def test_signals_carry_every_estimate_and_the_channels():
    rig, specs, whole, _ = simulated("bench_nitrogen_1l", None, 3.0)
    estimator = Estimator(rig, specs)
    first = estimator.update(_slice(whole, 0, 1500))
    for out in (first, estimator.update(_slice(whole, 1500, 3000))):
        assert set(ESTIMATES) <= set(out.values) and set(WITH_STD) <= set(out.std)
        for spec in specs:
            assert np.array_equal(out.values[spec.name], whole.values[spec.name][:1500] if out is first
                                  else whole.values[spec.name][1500:3000], equal_nan=True)
    assert estimator.filter_rate_hz == pytest.approx(1000.0, rel=1e-6)
    # 2nd-order Butterworth, fc = 10 Hz: low-frequency group delay sqrt(2)/(2 pi fc) = 22.5 ms (from memory).
    assert estimator.filter_delay_s == pytest.approx(math.sqrt(2) / (2 * math.pi * 10.0), rel=1e-12)
