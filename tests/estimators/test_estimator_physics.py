"""The Estimator on synthetic samples with closed-form answers, and against the physics core's own predictions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from estimator_helpers import batch, feed, synthetic_rig

from monitor.estimators import Estimator
from monitor.physics import rocket
from monitor.physics.gas import density_kg_m3, pressure_pa
from monitor.physics.tank import predict_blowdown
from monitor.predict import feed_system, tank_path
from monitor.units import G0_M_S2

RATE_HZ = 1000.0


def _steady_firing(seconds: float, flow_kg_s: float, thrust_n: float, leak_kg_s: float = 0.0, valve: float = 1.0):
    """An isothermal tank emptied at a constant rate; its pressure from CoolProp's inverse p(rho, T)."""
    t = np.arange(int(round(seconds * RATE_HZ)) + 1) / RATE_HZ
    volume, temperature = 1e-3, 293.15
    m0 = float(density_kg_m3("nitrogen", 150e5, temperature)) * volume
    mass = m0 - (flow_kg_s + leak_kg_s) * t
    tank_p = pressure_pa("nitrogen", mass / volume, np.full(t.shape, temperature))
    columns = dict(p_tank=tank_p, t_tank=temperature, p_feed=7.01e5, t_feed=260.0, flow=flow_kg_s, load=thrust_n,
                   valve=valve)
    return t, mass, batch(t, **columns)


def test_constant_flow_gives_linear_mass_and_exact_impulse():
    flow, thrust, seconds = 1.2e-3, 0.6, 10.0
    t, mass, whole = _steady_firing(seconds, flow, thrust)
    rig, channels = synthetic_rig()
    signals = Estimator(rig, channels).update(whole)
    v, sd = signals.values, signals.std
    # Trapezoidal integrals of constants are exact: impulse F t, propellant mdot t, burn time t (definitions,
    # Sutton & Biblarz ch. 2).
    assert v["total_impulse_n_s"][-1] == pytest.approx(thrust * seconds, rel=1e-12)
    assert v["propellant_used_kg"][-1] == pytest.approx(flow * seconds, rel=1e-12)
    assert v["burn_time_s"][-1] == pytest.approx(seconds, rel=1e-12)
    assert v["mean_isp_s"][-1] == pytest.approx(thrust / (flow * G0_M_S2), rel=1e-12)
    assert v["pulse_count"][-1] == 1
    # The flow gauge falls linearly at the flow rate: m(t2) - m(t1) = -mdot (t2 - t1).
    gauge = v["propellant_flow_gauge_kg"]
    known = np.flatnonzero(np.isfinite(gauge))
    a, b = known[0], known[-1]
    assert gauge[b] - gauge[a] == pytest.approx(-flow * (t[b] - t[a]), rel=1e-9)
    # Both gauges follow the true contents (CoolProp's density, Span et al. 2000 for N2) within 2 sigma.
    for name in ("propellant_flow_gauge_kg", "propellant_pvt_gauge_kg"):
        error = v[name][known] - mass[known]
        assert np.all(np.abs(error) <= 2.0 * sd[name][known]), name
        assert np.max(np.abs(error)) < 3e-4 * mass[0], name
    assert np.nanmax(np.abs(v["gauge_difference_kg"])) < 1e-4
    assert not np.any(v["leak_suspected"] == 1.0)
    # Delivered Isp is F / (mdot g0) at every firing sample.
    isp = v["isp_delivered_s"][known]
    assert np.allclose(isp, thrust / (flow * G0_M_S2), rtol=1e-9)


def test_isothermal_blowdown_matches_the_physics_core_prediction():
    rig, channels = synthetic_rig(expansion="isothermal")
    blow = predict_blowdown(tank_path(rig), feed_system(rig))
    t = np.arange(0.0, blow.flow_end_s, 1.0 / RATE_HZ)

    def at(series):
        return np.interp(t, blow.time_s, series)

    whole = batch(t, p_tank=at(blow.tank_pressure_pa), t_tank=at(blow.tank_temperature_k),
                  p_feed=at(blow.feed_pressure_pa), t_feed=at(blow.feed_temperature_k), flow=at(blow.mass_flow_kg_s),
                  load=at(blow.thrust_n), valve=1.0)
    estimator = Estimator(rig, channels)
    signals = feed(estimator, whole, 50_000)
    v, sd = signals.values, signals.std
    mass = at(blow.tank_mass_kg)
    known = np.isfinite(v["propellant_pvt_gauge_kg"])
    # PVT gauge along the whole blowdown: the tabulated real-gas density against the core's TankPath states.
    pvt_error = v["propellant_pvt_gauge_kg"][known] - mass[known]
    assert np.max(np.abs(pvt_error)) < 3e-4 * mass[0]
    assert np.all(np.abs(pvt_error) <= 2.0 * sd["propellant_pvt_gauge_kg"][known])
    # Flow gauge: the core's flow integrated by the estimator gives back the core's tank mass.
    flow_error = v["propellant_flow_gauge_kg"][known] - mass[known]
    assert np.max(np.abs(flow_error)) < 3e-4 * mass[0]
    state = estimator.state()
    assert state.total_impulse_n_s == pytest.approx(blow.total_impulse_n_s, rel=2e-3)
    assert state.propellant_used_kg == pytest.approx(blow.tank_mass_kg[0] - mass[-1], rel=1e-3)
    # Usable propellant at the start is the core's usable mass (expelled while regulated).
    first = int(np.argmax(np.isfinite(v["usable_propellant_kg"])))
    assert v["usable_propellant_kg"][first] == pytest.approx(blow.usable_mass_kg, rel=2e-3)
    # The regulator headroom runs out when the core's regulator drops out.
    headroom = v["regulator_headroom_pa"]
    crossing = t[np.flatnonzero(np.isfinite(headroom) & (headroom <= 0.0))[0]]
    assert crossing == pytest.approx(blow.regulator_dropout_s, abs=0.1)
    # While regulated, nozzle flow and estimated thrust agree with the core's nozzle at the same feed state.
    regulated = (t > 1.0) & (t < 0.95 * blow.regulator_dropout_s)
    np.testing.assert_allclose(v["mass_flow_nozzle_kg_s"][regulated], at(blow.mass_flow_kg_s)[regulated], rtol=2e-3)
    np.testing.assert_allclose(v["thrust_estimated_n"][regulated], at(blow.thrust_n)[regulated], rtol=2e-3)
    np.testing.assert_allclose(v["discharge_coefficient_apparent"][regulated], 0.95, rtol=2e-3)
    np.testing.assert_allclose(v["thrust_ratio"][regulated], 1.0, rtol=2e-3)


def test_known_leak_rate_is_recovered_within_its_uncertainty():
    leak = 1.0e-4  # kg/s from a tank whose valve stays shut
    t, mass, whole = _steady_firing(30.0, 0.0, 0.0, leak_kg_s=leak, valve=0.0)
    noise = np.random.default_rng(7).normal(0.0, 5e3, len(whole))  # 0.05 bar of pressure noise
    whole.values["p_tank"][:] += noise
    rig, channels = synthetic_rig()
    signals = Estimator(rig, channels).update(whole)
    v, sd = signals.values, signals.std
    rate, std = v["leak_rate_kg_s"][-1], sd["leak_rate_kg_s"][-1]
    assert abs(rate - leak) <= 2.0 * std
    assert std < 0.05 * leak
    assert v["leak_suspected"][-1] == 1.0
    # With no leak the same tank is never suspected.
    _, _, still = _steady_firing(30.0, 0.0, 0.0, valve=0.0)
    still.values["p_tank"][:] += noise
    quiet = Estimator(rig, channels).update(still)
    assert not np.any(quiet.values["leak_suspected"] == 1.0)


def test_configured_isp_gives_thrust_from_flow():
    rig, channels = synthetic_rig(estimation='isp = "55 s"\nisp_uncertainty = "1 s"')
    _, _, whole = _steady_firing(2.0, 1.0e-3, 0.5)
    v, sd = (lambda s: (s.values, s.std))(Estimator(rig, channels).update(whole))
    # F = mdot Isp g0 (Sutton & Biblarz ch. 2); u(F) = mdot g0 u(Isp) with an exact flow reading's 1 % added.
    assert np.allclose(v["thrust_estimated_n"], 1.0e-3 * 55.0 * G0_M_S2, rtol=1e-12)
    expected = math.hypot(1.0e-3 * G0_M_S2 * 1.0, 55.0 * G0_M_S2 * 1.0e-3 * 0.01 / math.sqrt(3.0))
    assert sd["thrust_estimated_n"][-1] == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize("kind", ["stand", "hover_platform"])
def test_projections_equal_the_rocket_equation(kind):
    # Eight nozzles (about 4.6 N at the set point) and a light vehicle (about 2.7 N full), so that the hover
    # platform can hover.
    rig, channels = synthetic_rig(kind=kind, count=8, dry_mass="0.1 kg")
    _, _, whole = _steady_firing(1.0, 0.0, 0.0, valve=0.0)
    estimator = Estimator(rig, channels)
    estimator.update(whole)
    s = estimator.state()
    m0 = rig.vehicle.dry_mass_kg + s.propellant_pvt_gauge_kg
    mf = m0 - s.usable_propellant_kg
    u = s.projection_exhaust_velocity_m_s
    # Tsiolkovsky (1903) through monitor.physics.rocket, for the same inputs.
    assert s.delta_v_left_m_s == pytest.approx(float(rocket.delta_v_m_s(u, m0, mf)), rel=1e-12)
    assert s.delta_v_left_conservative_m_s == pytest.approx(s.delta_v_left_m_s - 2 * s.delta_v_left_m_s_std, rel=1e-12)
    if kind == "hover_platform":
        assert s.hover_endurance_left_s == pytest.approx(float(rocket.hover_endurance_s(u, m0, mf)), rel=1e-12)
        assert s.hover_endurance_left_s > 0.0
        assert s.hover_endurance_left_conservative_s < s.hover_endurance_left_s
    else:
        assert math.isnan(s.hover_endurance_left_s)


def test_thermometer_noise_at_the_start_does_not_move_the_pvt_gauge():
    """A tank at rest whose thermocouple reads with 0.05 K of noise: the lag correction (2 s here) must not turn
    the first blocks' noise into a slope. The gauge stays on the true contents from the first block on."""
    from estimator_helpers import CHANNELS, RIG

    from monitor.calibration import parse_channels
    from monitor.config import parse_rig

    text = RIG.format(kind="stand", expansion="isothermal", estimation="", count=1, dry_mass="4 kg")
    rig = parse_rig(text.replace('temperature_lag = "0 s"', 'temperature_lag = "2 s"') + CHANNELS, "lag.toml")
    t = np.arange(3000) / RATE_HZ
    temperature, pressure, volume = 293.15, 150e5, 1e-3
    noisy = temperature + 0.05 * np.random.default_rng(11).standard_normal(t.size)  # invented noise level
    whole = batch(t, p_tank=pressure, t_tank=noisy, p_feed=1.0e5, t_feed=temperature, flow=0.0, load=0.0, valve=0.0)
    signals = feed(Estimator(rig, parse_channels(rig)), whole, 250)
    gauge, std = signals.values["propellant_pvt_gauge_kg"], signals.std["propellant_pvt_gauge_kg"]
    known = np.isfinite(gauge)
    # True contents: CoolProp's density of nitrogen (Span et al. 2000) at the tank state, times the volume.
    contents = float(density_kg_m3("nitrogen", pressure, temperature)) * volume
    assert known[:100].any()
    assert np.all(np.abs(gauge[known] - contents) <= 2.0 * std[known])
    # 0.05 K of noise on 293 K is 0.02 % of the contents; a slope from two blocks times 2 s made it percent-sized.
    assert np.max(np.abs(gauge[known] - contents)) < 1e-3 * contents
