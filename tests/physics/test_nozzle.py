"""Tests of monitor.physics.nozzle against published isentropic tables, Sutton & Biblarz and invariants."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.errors import PhysicsError
from monitor.physics import nozzle
from monitor.units import G0_M_S2, R_J_PER_MOL_K, STANDARD_ATMOSPHERE_PA

pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")

GAMMA_AIR = 1.4
R_AIR_J_KG_K = 287.0
# Nitrogen: molar mass 28.0134 g/mol (twice the IUPAC standard atomic weight 14.0067).
R_N2_J_KG_K = R_J_PER_MOL_K / 0.0280134


def printed(value: str) -> object:
    """A table entry as printed: pytest.approx with half a unit in its last printed digit."""
    decimals = len(value.split(".")[1]) if "." in value else 0
    return pytest.approx(float(value), abs=0.5 * 10.0**-decimals + 1e-12)


# Isentropic table, gamma = 1.4: M, p/p0, rho/rho0, T/T0, A/A*.
# Rows M = 0.10, 0.50, 0.90, 1.00, 1.10 were seen printed (Aeronautical Engineer Data Book, App. 4,
# Tables A4.1/A4.2, gamma = 7/5; the same entries as NACA Report 1135, Table I).
# Rows M = 2, 3, 5 are NACA Report 1135, Table I, from memory.
TABLE_GAMMA_1_4 = [
    ("0.10", "0.9930", "0.9950", "0.9980", "5.8218"),
    ("0.50", "0.8430", "0.8852", "0.9524", "1.3398"),
    ("0.90", "0.5913", "0.6870", "0.8606", "1.0089"),
    ("1.00", "0.5283", "0.6339", "0.8333", "1.0000"),
    ("1.10", "0.4684", "0.5817", "0.8052", "1.0079"),
    ("2.00", "0.1278", "0.2300", "0.5556", "1.6875"),
    ("3.00", "0.02722", "0.07623", "0.3571", "4.2346"),
    ("5.00", "0.001890", "0.01134", "0.1667", "25.000"),
]


@pytest.mark.parametrize(("mach", "p", "rho", "t", "area"), TABLE_GAMMA_1_4)
def test_isentropic_ratios_match_table(mach, p, rho, t, area):
    m = float(mach)
    assert nozzle.pressure_ratio(m, GAMMA_AIR) == printed(p)
    assert nozzle.density_ratio(m, GAMMA_AIR) == printed(rho)
    assert nozzle.temperature_ratio(m, GAMMA_AIR) == printed(t)
    assert nozzle.area_ratio(m, GAMMA_AIR) == printed(area)


def test_critical_pressure_ratio():
    # Printed gamma = 7/5 table (as above), M = 1.00: p/p0 = 0.5283.
    assert nozzle.critical_pressure_ratio(GAMMA_AIR) == printed("0.5283")


def test_mach_from_area_ratio_inverts_table():
    # NACA Report 1135, Table I (from memory): A/A* = 1.6875 at M = 2 and 25.000 at M = 5, both exact
    # for gamma = 1.4 (27/16 and 5^3/5); printed table (seen): A/A* = 1.3398 at M = 0.50.
    assert nozzle.mach_from_area_ratio([1.6875, 25.0], GAMMA_AIR) == pytest.approx([2.0, 5.0], rel=1e-12)
    assert nozzle.mach_from_area_ratio(1.3398, GAMMA_AIR, supersonic=False) == pytest.approx(0.5, abs=1e-4)
    assert nozzle.mach_from_area_ratio(1.0, GAMMA_AIR, supersonic=False) == 1.0
    assert nozzle.mach_from_area_ratio(1.0, GAMMA_AIR) == 1.0


def test_mach_from_pressure_ratio_inverts_table():
    # NACA Report 1135, Table I, M = 2 (from memory): p/p0 = 0.1278 (4 figures: M good to about 5e-4).
    assert nozzle.mach_from_pressure_ratio(0.1278, GAMMA_AIR) == pytest.approx(2.0, abs=5e-4)
    assert nozzle.mach_from_pressure_ratio(1.0, GAMMA_AIR) == 0.0


@settings(max_examples=200, deadline=None)
@given(st.floats(1.01, 12.0), st.floats(1.05, 1.7))
def test_area_ratio_round_trip_supersonic(mach, gamma):
    ratio = nozzle.area_ratio(mach, gamma)
    assert nozzle.mach_from_area_ratio(ratio, gamma, supersonic=True) == pytest.approx(mach, rel=1e-9)


@settings(max_examples=200, deadline=None)
@given(st.floats(0.01, 0.99), st.floats(1.05, 1.7))
def test_area_ratio_round_trip_subsonic(mach, gamma):
    ratio = nozzle.area_ratio(mach, gamma)
    assert nozzle.mach_from_area_ratio(ratio, gamma, supersonic=False) == pytest.approx(mach, rel=1e-9)


@settings(max_examples=200, deadline=None)
@given(st.floats(0.0, 20.0), st.floats(1.05, 1.7))
def test_pressure_ratio_round_trip(mach, gamma):
    ratio = nozzle.pressure_ratio(mach, gamma)
    assert nozzle.mach_from_pressure_ratio(ratio, gamma) == pytest.approx(mach, rel=1e-9, abs=1e-7)


def test_functions_broadcast():
    machs = nozzle.mach_from_area_ratio(np.array([[1.5], [4.0]]), np.array([1.3, 1.4, 1.67]))
    assert machs.shape == (2, 3)
    assert np.all(np.diff(machs, axis=1) > 0.0)  # higher gamma, higher exit Mach at fixed A/A*
    assert nozzle.pressure_ratio(2.0, GAMMA_AIR).shape == ()


def test_choked_mass_flow_of_air():
    # Textbook constant for air (gamma 1.4, R 287): mdot = 0.0404 At p0 / sqrt(T0) in SI (from memory);
    # the tolerance covers the 3-figure rounding of 0.0404.
    mdot = nozzle.choked_mass_flow_kg_s(1.0e6, 300.0, 1.0e-4, GAMMA_AIR, R_AIR_J_KG_K)
    assert mdot == pytest.approx(0.0404 * 1.0e-4 * 1.0e6 / math.sqrt(300.0), rel=1.5e-3)
    assert nozzle.choked_mass_flow_kg_s(1.0e6, 300.0, 1.0e-4, GAMMA_AIR, R_AIR_J_KG_K, 0.9) == pytest.approx(
        0.9 * mdot
    )


def test_orifice_flow_regimes_and_continuity_at_critical_ratio():
    p0, t0, area = 5.0e5, 293.15, 2.0e-6
    critical = float(nozzle.critical_pressure_ratio(GAMMA_AIR))
    choked = nozzle.choked_mass_flow_kg_s(p0, t0, area, GAMMA_AIR, R_AIR_J_KG_K)
    back_pa = p0 * critical * np.array([0.0, 0.5, 1.0 - 1e-9, 1.0, 1.0 + 1e-9])
    flows = nozzle.orifice_mass_flow_kg_s(p0, t0, back_pa, area, GAMMA_AIR, R_AIR_J_KG_K)
    assert flows[:4] == pytest.approx([choked] * 4, rel=1e-12)
    assert flows[4] == pytest.approx(choked, rel=1e-6)  # subsonic formula meets the choked one
    none = nozzle.orifice_mass_flow_kg_s(p0, t0, [p0, 2 * p0], area, GAMMA_AIR, R_AIR_J_KG_K)
    assert list(none) == [0.0, 0.0]


@settings(max_examples=200, deadline=None)
@given(st.floats(0.0, 1.0), st.floats(0.0, 1.0), st.floats(1.05, 1.7))
def test_orifice_flow_falls_as_back_pressure_rises(a, b, gamma):
    p0 = 3.0e5
    low, high = sorted((a, b))
    flows = nozzle.orifice_mass_flow_kg_s(p0, 300.0, [low * p0, high * p0], 1e-6, gamma, R_AIR_J_KG_K)
    assert flows[0] >= flows[1] - 1e-18


def test_divergence_factor():
    # Sutton & Biblarz, ch. 3, table of the correction factor for conical nozzles (from memory):
    # lambda = 0.9830 at a 15 degree half-angle; 1 for a parallel exit flow.
    assert nozzle.divergence_factor(math.radians(15.0)) == printed("0.9830")
    assert nozzle.divergence_factor(0.0) == 1.0


def test_thrust_coefficient_against_table_momentum():
    # Independent of the Cf closed form: in vacuum F = mdot ve + pe Ae = pe Ae (1 + gamma Me^2), so
    # Cf = (pe/p0)(Ae/At)(1 + gamma Me^2), read from the gamma = 1.4 table entries above.
    # M = 1 (printed, seen): 0.5283 * 1.0000 * 2.4 = 1.26792; tolerance = 2.4 * half a last digit.
    assert nozzle.thrust_coefficient(GAMMA_AIR, 1.0, 0.0) == pytest.approx(1.26792, abs=1.3e-4)
    # M = 2 (NACA Report 1135, from memory): 0.1278 * 1.6875 * 6.6 = 1.42338; tolerance 1.6875 * 6.6 * 5e-5.
    assert nozzle.thrust_coefficient(GAMMA_AIR, 1.6875, 0.0) == pytest.approx(1.42338, abs=6e-4)
    # M = 3 (from memory): 0.02722 * 4.2346 * 13.6 = 1.56762; tolerance 4.2346 * 13.6 * 5e-6 + 1e-4 (A/A*).
    assert nozzle.thrust_coefficient(GAMMA_AIR, 4.2346, 0.0) == pytest.approx(1.56762, abs=4e-4)
    # Matched at M = 2: the pressure term vanishes, Cf = 1.42338 - 0.1278 * 1.6875 = 1.20772.
    assert nozzle.thrust_coefficient(GAMMA_AIR, 1.6875, 0.1278045) == pytest.approx(1.20772, abs=6e-4)


def test_cold_gas_nitrogen_vacuum_isp():
    # Sutton & Biblarz, cold-gas propellant table (from memory): N2 theoretical Isp 80 s, measured 73 s,
    # "in vacuum with nozzle area ratio of 50:1 and initial temperature of 20 C" (that footnote seen).
    # The ideal 1-D nozzle with gamma 1.4 gives 75.96 s; the 80 s entry is 5 % higher, more than rounding,
    # close to the infinite-expansion limit (79.6 s). The band [73, 80] is what the table supports.
    perf = nozzle.nozzle_performance(20.0e5, 293.15, GAMMA_AIR, R_N2_J_KG_K, 1.0e-6, 50.0e-6, 0.0)
    assert 73.0 <= float(perf.isp_vacuum_s) <= 80.0
    assert float(perf.isp_s) == pytest.approx(float(perf.isp_vacuum_s), rel=1e-12)
    # Sutton & Biblarz, ch. 3: c = Cf c* (identity between the fields).
    assert perf.isp_vacuum_s * G0_M_S2 == pytest.approx(
        perf.thrust_coefficient_vacuum * perf.characteristic_velocity_m_s, rel=1e-12
    )
    assert perf.thrust_coefficient_vacuum == pytest.approx(nozzle.thrust_coefficient(GAMMA_AIR, 50.0, 0.0))


def _optimum(p0, pa, at, gamma):
    """Exit area that expands exactly to pa at this p0 (isentropic relations)."""
    return at * nozzle.area_ratio(nozzle.mach_from_pressure_ratio(pa / p0, gamma), gamma)


def test_over_expanded_sea_level_thrust_is_smaller():
    at, pa = 1.0e-5, STANDARD_ATMOSPHERE_PA
    over = nozzle.nozzle_performance(20.0e5, 293.15, GAMMA_AIR, R_N2_J_KG_K, at, 4.0 * at, pa)
    assert float(over.exit_pressure_pa) < pa and float(over.exit_mach) > 1.0  # over-expanded, shock outside
    best_ae = _optimum(20.0e5, pa, at, 1.4)
    optimum = nozzle.nozzle_performance(20.0e5, 293.15, GAMMA_AIR, R_N2_J_KG_K, at, best_ae, pa)
    under = nozzle.nozzle_performance(20.0e5, 293.15, GAMMA_AIR, R_N2_J_KG_K, at, 1.5 * at, pa)
    assert over.thrust_n < over.thrust_vacuum_n
    assert over.thrust_n < optimum.thrust_n
    assert under.thrust_n < optimum.thrust_n
    assert float(optimum.exit_pressure_pa) == pytest.approx(pa, rel=1e-9)


def test_matched_expansion_thrust_is_mdot_ve():
    at, p0, pa = 2.0e-6, 30.0e5, STANDARD_ATMOSPHERE_PA
    perf = nozzle.nozzle_performance(p0, 293.15, GAMMA_AIR, R_N2_J_KG_K, at, _optimum(p0, pa, at, 1.4), pa)
    assert perf.thrust_n == pytest.approx(perf.mass_flow_kg_s * perf.exit_velocity_m_s, rel=1e-9)
    assert perf.effective_exhaust_velocity_m_s == pytest.approx(perf.exit_velocity_m_s, rel=1e-9)


def test_large_matched_jet_thrust():
    # Common practice, no source: a matched jet of 15,000 kg/s at 2,500 m/s pushes mdot ve = 37.5 MN.
    # The stagnation temperature and throat that give that jet come from the isentropic relations.
    gamma, r, p0, pa = 1.4, 287.0, 10.0e6, STANDARD_ATMOSPHERE_PA
    expansion = 1.0 - (pa / p0) ** ((gamma - 1.0) / gamma)
    t0 = 2500.0**2 / (2.0 * gamma / (gamma - 1.0) * r * expansion)
    at = 15000.0 / float(nozzle.choked_mass_flow_kg_s(p0, t0, 1.0, gamma, r))
    perf = nozzle.nozzle_performance(p0, t0, gamma, r, at, _optimum(p0, pa, at, gamma), pa)
    assert float(perf.mass_flow_kg_s) == pytest.approx(15000.0, rel=1e-9)
    assert float(perf.exit_velocity_m_s) == pytest.approx(2500.0, rel=1e-9)
    assert float(perf.thrust_n) == pytest.approx(37.5e6, rel=1e-9)


def test_mass_flow_continuity_at_exit_in_every_regime():
    at, ae, pa = 1.0e-6, 4.0e-6, STANDARD_ATMOSPHERE_PA
    p0 = np.array([1.02e5, 1.5e5, 2.5e5, 4.0e5, 20.0e5, 300.0e5])  # subsonic, shock inside (2), supersonic
    perf = nozzle.nozzle_performance(p0, 293.15, GAMMA_AIR, R_N2_J_KG_K, at, ae, pa)
    density = perf.exit_pressure_pa / (R_N2_J_KG_K * perf.exit_temperature_k)
    assert density * perf.exit_velocity_m_s * ae == pytest.approx(perf.mass_flow_kg_s, rel=1e-9)
    assert list(perf.choked) == [False, True, True, True, True, True]
    assert np.all(perf.exit_mach[:3] < 1.0) and np.all(perf.exit_mach[3:] > 1.0)


def test_shock_at_exit_plane_matches_normal_shock_table():
    # Normal-shock table, gamma 1.4, M1 = 2: p2/p1 = 4.5000, M2 = 0.5774 (NACA Report 1135, Table II, from
    # memory; formulas as printed in "Normal shock tables", Wikipedia). With A/A* = 1.6875 the exit is at
    # M = 2, so the shock reaches the exit at p0 = pa / (0.1278045 * 4.5).
    pa, at = STANDARD_ATMOSPHERE_PA, 1.0e-6
    p0_boundary = pa / (float(nozzle.pressure_ratio(2.0, 1.4)) * 4.5)
    p0 = p0_boundary * np.array([1 - 1e-9, 1 + 1e-9])
    perf = nozzle.nozzle_performance(p0, 300.0, 1.4, 287.0, at, 1.6875 * at, pa)
    assert perf.exit_mach[0] == pytest.approx(0.5774, abs=1e-4)  # shock just inside the exit
    assert perf.exit_mach[1] == pytest.approx(2.0, rel=1e-9)
    assert perf.thrust_n[0] == pytest.approx(perf.thrust_n[1], rel=1e-6)  # momentum is conserved by the shock


def test_thrust_continuous_at_choking_boundary():
    at, ae, pa = 1.0e-6, 4.0e-6, STANDARD_ATMOSPHERE_PA
    subsonic_exit_mach = nozzle.mach_from_area_ratio(4.0, 1.4, supersonic=False)
    first_critical = float(nozzle.pressure_ratio(subsonic_exit_mach, 1.4))
    p0 = pa / first_critical * np.array([1 - 1e-9, 1 + 1e-9])
    perf = nozzle.nozzle_performance(p0, 293.15, 1.4, R_N2_J_KG_K, at, ae, pa)
    assert list(perf.choked) == [False, True]
    assert perf.thrust_n[0] == pytest.approx(perf.thrust_n[1], rel=1e-6)
    assert perf.mass_flow_kg_s[0] == pytest.approx(perf.mass_flow_kg_s[1], rel=1e-6)


@settings(max_examples=150, deadline=None)
@given(st.floats(1.0, 100.0), st.floats(0.0, 100.0e5), st.floats(0.0, 100.0e5))
def test_thrust_rises_with_stagnation_pressure(area_ratio, p_a, p_b):
    low, high = sorted((p_a, p_b))
    perf = nozzle.nozzle_performance([low, high], 293.15, 1.4, R_N2_J_KG_K, 1e-6, area_ratio * 1e-6, 101325.0)
    assert perf.thrust_n[0] <= perf.thrust_n[1] + 1e-12
    assert np.all(perf.thrust_n >= 0.0)


def test_separation_flag_follows_summerfield():
    # Sutton & Biblarz, ch. 3 (common practice): separation once the exit pressure is below about 0.4 pa.
    # A/A* = 4, gamma 1.4: full-flowing pe/p0 = 0.0298, so pe = 29.8 kPa at 10 bar, 59.6 kPa at 20 bar.
    perf = nozzle.nozzle_performance([10.0e5, 20.0e5], 293.15, 1.4, R_N2_J_KG_K, 1e-6, 4e-6, 101325.0)
    assert list(perf.separation_likely) == [True, False]
    vacuum = nozzle.nozzle_performance(10.0e5, 293.15, 1.4, R_N2_J_KG_K, 1e-6, 4e-6, 0.0)
    assert not bool(vacuum.separation_likely)


def test_no_flow_at_or_below_ambient():
    perf = nozzle.nozzle_performance([0.0, 0.5e5, 101325.0], 293.15, 1.4, R_N2_J_KG_K, 1e-6, 4e-6, 101325.0)
    for field in ("mass_flow_kg_s", "thrust_n", "isp_s", "effective_exhaust_velocity_m_s", "exit_mach"):
        assert np.all(getattr(perf, field) == 0.0), field
    assert not np.any(perf.choked)
    assert perf.thrust_vacuum_n[0] == 0.0 and perf.isp_vacuum_s[0] == 0.0


def test_losses_scale_flow_and_thrust():
    args = (20.0e5, 293.15, 1.4, R_N2_J_KG_K, 1e-6, 10e-6, 0.0)
    ideal = nozzle.nozzle_performance(*args)
    lossy = nozzle.nozzle_performance(
        *args, discharge_coefficient=0.9, divergence_half_angle_rad=math.radians(15), thrust_efficiency=0.95
    )
    lam = float(nozzle.divergence_factor(math.radians(15)))
    momentum = ideal.mass_flow_kg_s * ideal.exit_velocity_m_s
    pressure_term = ideal.exit_pressure_pa * 10e-6
    assert lossy.mass_flow_kg_s == pytest.approx(0.9 * ideal.mass_flow_kg_s)
    assert lossy.thrust_n == pytest.approx(0.95 * (lam * 0.9 * momentum + pressure_term))


def test_nozzle_performance_broadcasts():
    perf = nozzle.nozzle_performance(np.array([[10e5], [20e5], [30e5]]), 293.15, 1.4, R_N2_J_KG_K, 1e-6, 4e-6,
                                     np.array([0.0, 101325.0]))
    assert perf.thrust_n.shape == (3, 2) and perf.separation_likely.shape == (3, 2)
    scalar = nozzle.nozzle_performance(20e5, 293.15, 1.4, R_N2_J_KG_K, 1e-6, 4e-6, 101325.0)
    assert scalar.thrust_n.shape == ()


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: nozzle.pressure_ratio(2.0, 1.0), "gamma"),
        (lambda: nozzle.area_ratio(-1.0, 1.4), "mach"),
        (lambda: nozzle.mach_from_area_ratio(0.9, 1.4), "area_ratio"),
        (lambda: nozzle.mach_from_area_ratio(float("nan"), 1.4), "area_ratio"),
        (lambda: nozzle.mach_from_pressure_ratio(1.2, 1.4), "p_over_p0"),
        (lambda: nozzle.mach_from_pressure_ratio(0.0, 1.4), "p_over_p0"),
        (lambda: nozzle.choked_mass_flow_kg_s(-1.0, 300.0, 1e-6, 1.4, 287.0), "stagnation_pressure_pa"),
        (lambda: nozzle.orifice_mass_flow_kg_s(1e5, 300.0, -1.0, 1e-6, 1.4, 287.0), "back_pressure_pa"),
        (lambda: nozzle.characteristic_velocity_m_s(0.0, 1.4, 287.0), "stagnation_temperature_k"),
        (lambda: nozzle.thrust_coefficient(1.4, 0.5, 0.0), "area_ratio"),
        (lambda: nozzle.nozzle_performance(1e6, 300.0, 1.4, 287.0, 2e-6, 1e-6, 1e5), "exit_area_m2"),
        (lambda: nozzle.nozzle_performance(1e6, 300.0, 1.4, 287.0, -1e-6, 1e-6, 1e5), "throat_area_m2"),
        (lambda: nozzle.nozzle_performance(1e6, float("inf"), 1.4, 287.0, 1e-6, 2e-6, 1e5),
         "stagnation_temperature_k"),
        (lambda: nozzle.nozzle_performance(1e6, 300.0, 1.4, 287.0, 1e-6, 2e-6, 1e5, 1.2),
         "discharge_coefficient"),
        (lambda: nozzle.nozzle_performance("ten bar", 300.0, 1.4, 287.0, 1e-6, 2e-6, 1e5),
         "stagnation_pressure_pa"),
    ],
)
def test_bad_input_raises_physics_error_naming_argument(call, name):
    with pytest.raises(PhysicsError, match=name):
        call()
