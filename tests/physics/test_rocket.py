"""Tests of monitor.physics.rocket against textbook examples, algebraic identities and scipy integration."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.integrate import solve_ivp, trapezoid

from monitor.errors import PhysicsError
from monitor.physics import rocket
from monitor.units import G0_M_S2

velocities = st.floats(min_value=100.0, max_value=5000.0)
masses = st.floats(min_value=0.01, max_value=1e6)
fractions = st.floats(min_value=0.0, max_value=0.95)


def test_curtis_propellant_for_delta_v_example():
    # Curtis, Orbital Mechanics for Engineering Students, ch. 6, Example 6.1 (from memory, edition not
    # checked): dry mass 75,000 kg, effective exhaust velocity 3100 m/s, delta-v 700 m/s -> about 19,000 kg
    # of propellant.
    mp = rocket.propellant_for_delta_v_kg(3100.0, 75_000.0, 700.0)
    assert mp == pytest.approx(19_000.0, rel=1e-3)
    # The same burn seen forwards gives back the 700 m/s.
    assert rocket.delta_v_m_s(3100.0, 75_000.0 + mp, 75_000.0) == pytest.approx(700.0, rel=1e-12)


def test_mass_ratio_for_two_and_a_half_exhaust_velocities():
    # Wikipedia, "Mass ratio" (derivation section): a delta-v of 2.5 times the exhaust velocity needs a
    # mass ratio of approximately 12.2.
    assert rocket.mass_ratio_for_delta_v(3000.0, 7500.0) == pytest.approx(12.2, abs=0.05)
    # And a vehicle with that mass ratio gets back 2.5 u.
    ratio = float(rocket.mass_ratio_for_delta_v(3000.0, 7500.0))
    assert rocket.mass_ratio(ratio * 100.0, 100.0) == pytest.approx(ratio, rel=1e-15)
    assert rocket.delta_v_m_s(3000.0, ratio * 100.0, 100.0) == pytest.approx(7500.0, rel=1e-12)


@given(u=velocities, mf=masses)
def test_mass_ratio_e_gives_delta_v_equal_to_exhaust_velocity(u, mf):
    # Tsiolkovsky (1903): dv = u ln(m0/mf), so m0/mf = e gives dv = u exactly (algebra).
    assert rocket.delta_v_m_s(u, math.e * mf, mf) == pytest.approx(u, rel=1e-12)


@given(u=velocities, m0=masses)
def test_zero_propellant_gives_exactly_zero_delta_v(u, m0):
    # ln(1) = 0: no propellant burnt, no velocity gained, exactly (algebra).
    assert rocket.delta_v_m_s(u, m0, m0) == 0.0
    assert rocket.hover_endurance_s(u, m0, m0) == 0.0
    assert rocket.propellant_for_delta_v_kg(u, m0, 0.0) == 0.0


@given(u=velocities, mf=masses, dv=st.floats(min_value=0.0, max_value=15_000.0))
def test_propellant_for_delta_v_inverts_delta_v(u, mf, dv):
    # The rocket equation solved for m0 - mf, then put back (algebraic round trip).
    mp = rocket.propellant_for_delta_v_kg(u, mf, dv)
    assert rocket.delta_v_m_s(u, mf + mp, mf) == pytest.approx(dv, rel=1e-9, abs=1e-9)


@given(u=velocities, m0=masses, burnt=fractions, t=st.floats(0.0, 1000.0), g=st.floats(0.0, 30.0))
def test_vertical_burn_loses_exactly_g_t(u, m0, burnt, t, g):
    # Sutton & Biblarz ch. 4 (edition not checked): vertical burn, no drag, dv = u ln(m0/mf) - g t.
    mf = m0 * (1.0 - burnt)
    ideal = rocket.delta_v_m_s(u, m0, mf)
    vertical = rocket.vertical_delta_v_m_s(u, m0, mf, t, g)
    assert ideal - vertical == pytest.approx(g * t, rel=1e-12, abs=1e-9)


def test_vertical_burn_default_gravity_is_standard_gravity():
    # Standard gravity 9.80665 m/s^2 (3rd CGPM, 1901): 10 s of burn costs 98.0665 m/s.
    assert rocket.delta_v_m_s(2000.0, 2.0, 1.0) - rocket.vertical_delta_v_m_s(2000.0, 2.0, 1.0, 10.0) == (
        pytest.approx(98.0665, rel=1e-12)
    )


def test_hover_endurance_matches_numerical_integration_of_mass_loss():
    # Independent check: integrate dm/dt = -m g / u (thrust mdot u equal to weight m g) with scipy's
    # solve_ivp until the mass reaches mf, and compare the time with (u/g) ln(m0/mf).
    u, m0, mf, g = 700.0, 12.0, 9.0, G0_M_S2

    def empty(t, m):
        return m[0] - mf

    empty.terminal = True
    solution = solve_ivp(lambda t, m: -m * g / u, (0.0, 1e4), [m0], events=empty, rtol=1e-11, atol=1e-12)
    t_numeric = solution.t_events[0][0]
    assert rocket.hover_endurance_s(u, m0, mf) == pytest.approx(t_numeric, rel=1e-7)
    assert rocket.hover_endurance_s(u, m0, mf) == pytest.approx(u / g * math.log(m0 / mf), rel=1e-14)


@given(u=velocities, m0=masses, burnt=st.floats(0.01, 0.95), g=st.floats(1.0, 30.0))
def test_hover_spends_all_delta_v_on_gravity(u, m0, burnt, g):
    # A hover ends where it began: the vertical-burn delta-v over the hover time is zero (algebra).
    mf = m0 * (1.0 - burnt)
    t = rocket.hover_endurance_s(u, m0, mf, g)
    assert rocket.vertical_delta_v_m_s(u, m0, mf, t, g) == pytest.approx(0.0, abs=1e-9 * u)


def test_first_stage_thrust_rule_of_thumb():
    # Common practice, no source: a large first stage expelling about 15,000 kg/s at about 2.5 km/s
    # makes about 37.5 MN.
    assert rocket.thrust_from_mass_flow_n(15_000.0, 2500.0) == pytest.approx(37.5e6, rel=1e-12)


def test_rebounding_jet_pushes_twice_as_hard_as_a_stopped_one():
    # Common practice, no source: a stream that rebounds elastically pushes twice as hard as one that stops.
    stopped = rocket.jet_reaction_on_plate_n(0.02, 300.0, 0.0)
    rebound = rocket.jet_reaction_on_plate_n(0.02, 300.0, 1.0)
    assert stopped == pytest.approx(rocket.thrust_from_mass_flow_n(0.02, 300.0), rel=1e-15)
    assert rebound == pytest.approx(2.0 * stopped, rel=1e-15)
    half = rocket.jet_reaction_on_plate_n(0.02, 300.0, np.array([0.0, 0.5, 1.0]))
    assert np.all(np.diff(half) > 0.0)


@given(isp=st.floats(min_value=0.0, max_value=1e4))
def test_isp_and_exhaust_velocity_round_trip(isp):
    # Sutton & Biblarz ch. 2 (edition not checked): c = Isp g0, with g0 = 9.80665 m/s^2 exactly.
    c = rocket.effective_exhaust_velocity_m_s(isp)
    assert rocket.specific_impulse_s(c) == pytest.approx(isp, rel=1e-14)


def test_isp_of_cold_nitrogen_jet():
    # Definition c = Isp g0 with standard gravity (3rd CGPM, 1901): 70 s -> 686.4655 m/s.
    assert rocket.effective_exhaust_velocity_m_s(70.0) == pytest.approx(686.4655, rel=1e-12)


def test_total_impulse_of_constant_and_ramped_thrust():
    # Definition I = integral F dt (Sutton & Biblarz ch. 2, edition not checked): 5 N for 4 s is 20 N s;
    # a linear ramp 0 -> 10 N over 2 s is 10 N s, exact for the trapezoidal rule.
    t = np.linspace(0.0, 4.0, 9)
    assert rocket.total_impulse_n_s(np.full(9, 5.0), t) == pytest.approx(20.0, rel=1e-14)
    assert rocket.total_impulse_n_s([0.0, 5.0, 10.0], [0.0, 1.0, 2.0]) == pytest.approx(10.0, rel=1e-14)
    assert rocket.total_impulse_n_s([3.0], [0.0]) == 0.0


def test_total_impulse_matches_scipy_trapezoid_per_row():
    # Reference library: scipy.integrate.trapezoid on irregular times, several records at once.
    rng = np.random.default_rng(4)
    t = np.cumsum(rng.uniform(0.001, 0.02, 200))
    thrust = rng.uniform(0.0, 50.0, (3, 200))
    expected = trapezoid(thrust, t, axis=-1)
    np.testing.assert_allclose(rocket.total_impulse_n_s(thrust, t), expected, rtol=1e-12)


def test_burn_time_with_and_without_flow():
    # Definition t = mp / mdot; zero flow with propellant left never empties; no propellant is 0 s.
    times = rocket.burn_time_s([10.0, 10.0, 0.0, 0.0], [2.0, 0.0, 0.0, 3.0])
    np.testing.assert_array_equal(times, [5.0, np.inf, 0.0, 0.0])


def test_vectorised_delta_v_matches_scalar_calls():
    u = np.array([500.0, 700.0, 3000.0])
    m0 = np.array([[10.0], [20.0]])
    result = rocket.delta_v_m_s(u, m0, 8.0)
    assert result.shape == (2, 3)
    for i in range(2):
        for j in range(3):
            assert result[i, j] == rocket.delta_v_m_s(u[j], m0[i, 0], 8.0)


@pytest.mark.parametrize(
    "call",
    [
        lambda: rocket.delta_v_m_s(700.0, 1.0, 2.0),  # final above initial
        lambda: rocket.delta_v_m_s(700.0, 0.0, 0.0),  # non-positive masses
        lambda: rocket.delta_v_m_s(700.0, [2.0, -1.0], 1.0),
        lambda: rocket.delta_v_m_s(-700.0, 2.0, 1.0),
        lambda: rocket.delta_v_m_s(float("nan"), 2.0, 1.0),
        lambda: rocket.delta_v_m_s(700.0, [2.0, 3.0], [1.0, 1.0, 1.0]),  # shapes
        lambda: rocket.vertical_delta_v_m_s(700.0, 2.0, 1.0, -1.0),
        lambda: rocket.hover_endurance_s(700.0, 2.0, 1.0, 0.0),
        lambda: rocket.burn_time_s(1.0, -0.1),
        lambda: rocket.propellant_for_delta_v_kg(700.0, 1.0, -5.0),
        lambda: rocket.propellant_for_delta_v_kg(1.0, 1.0, 1e6),  # overflow
        lambda: rocket.jet_reaction_on_plate_n(1.0, 1.0, 1.5),
        lambda: rocket.jet_reaction_on_plate_n(1.0, 1.0, -0.1),
        lambda: rocket.total_impulse_n_s([1.0, 2.0], [1.0, 0.0]),  # time goes backwards
        lambda: rocket.total_impulse_n_s([1.0, 2.0], [0.0, 1.0, 2.0]),
        lambda: rocket.total_impulse_n_s([1.0, float("nan")], [0.0, 1.0]),
    ],
)
def test_bad_input_raises_physics_error(call):
    with pytest.raises(PhysicsError):
        call()


def test_error_message_names_argument_and_value():
    with pytest.raises(PhysicsError, match=r"final_mass_kg = 2\.0 is above initial_mass_kg = 1\.0"):
        rocket.delta_v_m_s(700.0, 1.0, 2.0)
