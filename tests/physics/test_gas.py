"""Tests for monitor.physics.gas against published equation-of-state tables, CoolProp and ideal-gas relations.

Table values marked "as quoted by pychemqt" were read from the test suite of the pychemqt project
(jjgomera/pychemqt, lib/mEoS/*.py), which cites the table and page of each paper; the papers themselves
were not seen.
"""

from __future__ import annotations

import math

import CoolProp.CoolProp as coolprop
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.errors import PhysicsError
from monitor.physics.gas import (
    SUPPORTED_GASES,
    canonical_gas,
    density_kg_m3,
    gas_state,
    ideal_gamma,
    molar_mass_kg_mol,
    pressure_pa,
    specific_gas_constant_j_kg_k,
)

# CODATA 2018 / SI 2019: R = N_A * k, both exact.
R_CODATA = 6.02214076e23 * 1.380649e-23


# --- real-gas densities and speeds of sound against the papers behind each equation of state ---------

@pytest.mark.parametrize(
    "gas, temperature_k, pressure_pa_, molar_density_mol_dm3, sound_m_s",
    [
        # Span et al. 2000, J. Phys. Chem. Ref. Data 29, p. 1410, single-phase table (as quoted by pychemqt)
        ("nitrogen", 350.0, 20e6, 6.3552, 449.7),
        ("nitrogen", 1000.0, 2e6, 0.23889, 635.5),
        ("nitrogen", 80.0, 1e5, 0.15633, 178.3),
        # Lemmon et al. 2000, J. Phys. Chem. Ref. Data 29, Table A2, p. 366 (as quoted by pychemqt)
        ("air", 500.0, 2e5, 0.048077, 446.6),
        ("air", 130.0, 1e6, 1.0295, 216.8),
        ("air", 100.0, 101325.0, 0.12449, 198.2),
    ],
)
def test_real_molar_density_against_reference_tables(gas, temperature_k, pressure_pa_, molar_density_mol_dm3,
                                                     sound_m_s):
    state = gas_state(gas, pressure=pressure_pa_, temperature=temperature_k)
    molar_density = state.density_kg_m3 / molar_mass_kg_mol(gas) / 1000.0  # mol/dm^3
    assert molar_density == pytest.approx(molar_density_mol_dm3, rel=2e-4)
    assert state.speed_of_sound_m_s == pytest.approx(sound_m_s, rel=3e-4)


@pytest.mark.parametrize(
    "gas, temperature_k, pressure_pa_, density, sound_m_s",
    [
        # Tegeler et al. 1999, J. Phys. Chem. Ref. Data 28, Table 34, p. 830 (as quoted by pychemqt)
        ("Ar", 700.0, 1e5, 0.68619, 492.95),
        ("Ar", 400.0, 10e6, 119.43, 391.51),
        ("Ar", 170.0, 1e6, 29.723, 238.88),
        # Span & Wagner 1996, J. Phys. Chem. Ref. Data 25, Table 35, p. 1562 (as quoted by pychemqt)
        ("CO2", 280.0, 5e5, 9.7568, 257.27),
        ("CO2", 290.0, 5e6, 148.41, 207.56),
        ("CO2", 480.0, 10e6, 119.65, 328.74),
    ],
)
def test_real_density_against_reference_tables(gas, temperature_k, pressure_pa_, density, sound_m_s):
    state = gas_state(gas, pressure=pressure_pa_, temperature=temperature_k)
    assert state.density_kg_m3 == pytest.approx(density, rel=2e-4)
    assert state.speed_of_sound_m_s == pytest.approx(sound_m_s, rel=2e-4)


def test_helium_normal_density():
    # He at 0 C, 1 atm: 0.1785 kg/m^3 (handbook value, from memory).
    assert density_kg_m3("He", 101325.0, 273.15) == pytest.approx(0.1785, rel=1e-3)


def test_nitrogen_at_300_bar_and_its_ideal_gas_error():
    # CoolProp (reference library; Span et al. 2000 EOS): N2 at 300 bar, 20 C is about 302.4 kg/m^3.
    real = density_kg_m3("N2", 300e5, 293.15)
    assert real == pytest.approx(coolprop.PropsSI("D", "T", 293.15, "P", 300e5, "Nitrogen"), rel=1e-10)
    assert real == pytest.approx(302.4, rel=3e-3)
    ideal = density_kg_m3("N2", 300e5, 293.15, model="ideal")
    assert 0.12 <= ideal / real - 1.0 <= 0.16
    z = gas_state("N2", pressure=300e5, temperature=293.15).compressibility
    # Z = p / (rho R T), the definition of the compressibility factor. The equation of state computes Z with
    # its own R (8.31451 J/(mol K) in Span et al. 2000), 6e-6 above CODATA 2018, hence the tolerance.
    assert z == pytest.approx(300e5 / (real * specific_gas_constant_j_kg_k("N2") * 293.15), rel=2e-5)


# --- ideal model ------------------------------------------------------------------------------------------

@pytest.mark.parametrize(
    "gas, molar_mass_g_mol",
    [
        ("N2", 2 * 14.0067),  # IUPAC standard atomic weight of N, 14.0067 (from memory)
        ("Ar", 39.948),  # IUPAC standard atomic weight (from memory)
        ("He", 4.002602),  # IUPAC standard atomic weight (from memory)
        ("CO2", 12.011 + 2 * 15.999),  # IUPAC conventional atomic weights of C and O (from memory)
    ],
)
def test_ideal_density_is_p_m_over_r_t(gas, molar_mass_g_mol):
    p, t = 2.5e6, 310.0
    assert molar_mass_kg_mol(gas) == pytest.approx(molar_mass_g_mol * 1e-3, rel=5e-5)
    expected = p * molar_mass_kg_mol(gas) / (R_CODATA * t)  # ideal-gas law with the exact CODATA R
    assert density_kg_m3(gas, p, t, model="ideal") == pytest.approx(expected, rel=1e-12)
    assert pressure_pa(gas, expected, t, model="ideal") == pytest.approx(p, rel=1e-12)


@pytest.mark.parametrize(
    "gas, gamma, tolerance",
    [
        ("N2", 1.40, 2e-3),  # rigid diatomic molecule, cp/cv = 7/5 (kinetic theory, equipartition)
        ("Ar", 5.0 / 3.0, 1e-4),  # monatomic gas, cp/cv = 5/3 (kinetic theory)
        ("He", 5.0 / 3.0, 1e-4),  # monatomic gas, cp/cv = 5/3 (kinetic theory)
    ],
)
def test_ideal_gamma(gas, gamma, tolerance):
    assert ideal_gamma(gas) == pytest.approx(gamma, abs=tolerance)
    assert gas_state(gas, "ideal", pressure=1e5, temperature=300.0).gamma == pytest.approx(ideal_gamma(gas))


def test_ideal_speed_of_sound_of_argon():
    # Younglove 1982 argon table, 300 K, 101.325 kPa: w = 322.7 m/s (as quoted by pychemqt); a = sqrt(g R T).
    assert gas_state("Ar", "ideal", pressure=101325.0, temperature=300.0).speed_of_sound_m_s == pytest.approx(
        322.7, rel=5e-4
    )


@settings(max_examples=60, deadline=None)
@given(
    gas=st.sampled_from(["N2", "air", "He", "Ar", "CO2"]),
    temperature_k=st.floats(min_value=150.0, max_value=800.0),
    pressure_pa_=st.floats(min_value=1e3, max_value=5e7),
    density_ratio=st.floats(min_value=0.02, max_value=50.0),
)
def test_ideal_isentropic_density_relation(gas, temperature_k, pressure_pa_, density_ratio):
    # Isentropic relation of a calorically perfect gas: T2/T1 = (rho2/rho1)^(gamma-1) (textbook relation,
    # e.g. Anderson, Modern Compressible Flow, ch. 1; from memory).
    one = gas_state(gas, "ideal", pressure=pressure_pa_, temperature=temperature_k)
    two = gas_state(gas, "ideal", density=one.density_kg_m3 * density_ratio, entropy=one.entropy_j_kg_k)
    expected = density_ratio ** (ideal_gamma(gas) - 1.0)
    assert two.temperature_k / temperature_k == pytest.approx(expected, rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(
    gas=st.sampled_from(["N2", "air", "He", "Ar", "CO2"]),
    temperature_k=st.floats(min_value=150.0, max_value=800.0),
    pressure_ratio=st.floats(min_value=1e-3, max_value=1e3),
)
def test_ideal_isentropic_pressure_relation(gas, temperature_k, pressure_ratio):
    # T2/T1 = (p2/p1)^((gamma-1)/gamma) for a calorically perfect gas (same textbook relation, from memory).
    one = gas_state(gas, "ideal", pressure=1e6, temperature=temperature_k)
    two = gas_state(gas, "ideal", pressure=1e6 * pressure_ratio, entropy=one.entropy_j_kg_k)
    gamma = ideal_gamma(gas)
    expected = pressure_ratio ** ((gamma - 1.0) / gamma)
    assert two.temperature_k / temperature_k == pytest.approx(expected, rel=1e-9)


def test_ideal_enthalpy_is_cp_times_temperature_difference():
    # Calorically perfect gas: h2 - h1 = cp (T2 - T1), cp = gamma R / (gamma - 1); throttling keeps T.
    gamma, r = ideal_gamma("N2"), specific_gas_constant_j_kg_k("N2")
    a = gas_state("N2", "ideal", pressure=1e5, temperature=250.0)
    b = gas_state("N2", "ideal", pressure=1e5, temperature=400.0)
    assert b.enthalpy_j_kg - a.enthalpy_j_kg == pytest.approx(gamma * r / (gamma - 1.0) * 150.0, rel=1e-12)
    throttled = gas_state("N2", "ideal", pressure=10e5, enthalpy=a.enthalpy_j_kg)
    assert throttled.temperature_k == pytest.approx(250.0, rel=1e-12)


# --- real model consistency -----------------------------------------------------------------------------

@settings(max_examples=40, deadline=None)
@given(
    gas=st.sampled_from(["N2", "air", "He", "Ar"]),
    temperature_k=st.floats(min_value=250.0, max_value=400.0),
    pressure_pa_=st.floats(min_value=1e4, max_value=3e7),
)
def test_real_round_trip_through_density_and_entropy(gas, temperature_k, pressure_pa_):
    # Thermodynamic consistency of a single Helmholtz equation: (p, T) -> (rho, s) -> (p, T).
    state = gas_state(gas, pressure=pressure_pa_, temperature=temperature_k)
    back = gas_state(gas, density=state.density_kg_m3, entropy=state.entropy_j_kg_k)
    assert back.pressure_pa == pytest.approx(pressure_pa_, rel=1e-6)
    assert back.temperature_k == pytest.approx(temperature_k, rel=1e-6)
    via_h = gas_state(gas, pressure=pressure_pa_, enthalpy=state.enthalpy_j_kg)
    assert via_h.temperature_k == pytest.approx(temperature_k, rel=1e-6)


@settings(max_examples=20, deadline=None)
@given(
    temperature_k=st.floats(min_value=280.0, max_value=400.0),
    pressure_pa_=st.floats(min_value=1e4, max_value=3e6),
)
def test_real_round_trip_co2_gas(temperature_k, pressure_pa_):
    state = gas_state("CO2", pressure=pressure_pa_, temperature=temperature_k)
    back = gas_state("CO2", density=state.density_kg_m3, temperature=temperature_k)
    assert back.pressure_pa == pytest.approx(pressure_pa_, rel=1e-6)


def test_joule_thomson_throttling_cools_nitrogen_and_warms_helium():
    # Isenthalpic throttling 300 bar -> 10 bar at 20 C. N2 is below its inversion temperature and cools
    # (Joule-Thomson coefficient ~0.1-0.2 K/bar at room temperature, from memory); helium, whose inversion
    # temperature is about 40 K (from memory), warms.
    n2 = gas_state("N2", pressure=300e5, temperature=293.15)
    n2_out = gas_state("N2", pressure=10e5, enthalpy=n2.enthalpy_j_kg)
    assert 15.0 < 293.15 - n2_out.temperature_k < 60.0
    he = gas_state("He", pressure=300e5, temperature=293.15)
    he_out = gas_state("He", pressure=10e5, enthalpy=he.enthalpy_j_kg)
    assert 3.0 < he_out.temperature_k - 293.15 < 40.0


def test_arrays_broadcast():
    state = gas_state("N2", pressure=np.array([[1e5], [2e5]]), temperature=np.array([300.0, 400.0, 500.0]))
    assert state.density_kg_m3.shape == (2, 3)
    assert state.gamma.shape == (2, 3)
    assert np.all(np.diff(state.density_kg_m3, axis=1) < 0.0)  # hotter is lighter at fixed p
    assert gas_state("N2", pressure=1e5, temperature=300.0).density_kg_m3.shape == ()


# --- errors and names -----------------------------------------------------------------------------------

def test_unknown_gas():
    with pytest.raises(PhysicsError, match="unknown gas 'xenon'"):
        density_kg_m3("xenon", 1e5, 300.0)


def test_liquid_co2_is_rejected():
    # Span & Wagner 1996: vapour pressure of CO2 at 300 K is 6.7131 MPa (as quoted by pychemqt), lower still
    # at 25 C, so 70 bar at 25 C is compressed liquid.
    with pytest.raises(PhysicsError, match="liquid"):
        density_kg_m3("CO2", 70e5, 298.15)


def test_liquid_nitrogen_at_one_atmosphere_is_rejected():
    # Span et al. 2000: normal boiling point of N2 is 77.355 K (as quoted by pychemqt).
    with pytest.raises(PhysicsError, match="liquid"):
        density_kg_m3("N2", 101325.0, 75.0)
    assert density_kg_m3("N2", 101325.0, 80.0) < 5.0  # vapour just above it


@pytest.mark.parametrize(
    "pressure, temperature", [(-1e5, 300.0), (0.0, 300.0), (1e5, -10.0), (math.nan, 300.0)]
)
def test_non_physical_inputs(pressure, temperature):
    with pytest.raises(PhysicsError):
        density_kg_m3("N2", pressure, temperature)
    with pytest.raises(PhysicsError):
        density_kg_m3("N2", pressure, temperature, model="ideal")


def test_below_the_melting_line():
    # Span et al. 2000: triple point of N2 at 63.151 K (title of the paper); solid below it at 1 bar.
    with pytest.raises(PhysicsError, match="nitrogen"):
        density_kg_m3("N2", 1e5, 60.0)
    with pytest.raises(PhysicsError, match="nitrogen"):
        density_kg_m3("N2", np.array([1e5, 1e5]), np.array([300.0, 40.0]))


def test_bad_model_and_inputs():
    with pytest.raises(PhysicsError, match="unknown gas model"):
        gas_state("N2", "virial", pressure=1e5, temperature=300.0)
    with pytest.raises(PhysicsError, match="input pairs"):
        gas_state("N2", pressure=1e5)
    with pytest.raises(PhysicsError, match="input pairs"):
        gas_state("N2", enthalpy=1e5, entropy=1e3)
    with pytest.raises(PhysicsError, match="unknown input"):
        gas_state("N2", pressure=1e5, temp=300.0)


@pytest.mark.parametrize(
    "alias, name",
    [
        ("N2", "nitrogen"),
        ("He", "helium"),
        ("Ar", "argon"),
        ("CO2", "carbon_dioxide"),
        ("carbon dioxide", "carbon_dioxide"),
        ("Carbon-Dioxide", "carbon_dioxide"),
        (" Air ", "air"),
        ("NITROGEN", "nitrogen"),
    ],
)
def test_aliases(alias, name):
    assert canonical_gas(alias) == name
    assert name in SUPPORTED_GASES
    assert density_kg_m3(alias, 1e5, 300.0) == pytest.approx(density_kg_m3(name, 1e5, 300.0), rel=1e-15)
