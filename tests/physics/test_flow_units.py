"""Tests for monitor.physics.flow_units: reference conditions, unit factors, densities, round trips."""

from __future__ import annotations

import math

import CoolProp.CoolProp as coolprop
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.errors import PhysicsError
from monitor.physics.flow_units import (
    FLOW_UNITS,
    REFERENCE_CONDITIONS,
    ReferenceCondition,
    flow_unit,
    mass_flow_to_standard_flow,
    reference_condition,
    standard_density_kg_m3,
    standard_flow_to_mass_flow_kg_s,
    volume_flow_m3_s_per_unit,
)

# The Fahrenheit scale: T[K] = (T[F] + 459.67) * 5/9, exact by definition (NIST SP 811; from memory).
F60_K = (60.0 + 459.67) * 5.0 / 9.0
F70_K = (70.0 + 459.67) * 5.0 / 9.0
# ISO 2533 standard atmosphere at sea level: 101 325 Pa (from memory).
ATM_PA = 101325.0


@pytest.mark.parametrize(
    "name, temperature_k, pressure_pa",
    [
        ("0C", 273.15, ATM_PA),  # DIN 1343: normal conditions Tn = 273.15 K, pn = 1.01325 bar (from memory)
        ("normal", 273.15, ATM_PA),  # DIN 1343, as above
        ("15C", 288.15, ATM_PA),  # ISO 13443: 288.15 K and 101.325 kPa (from memory)
        ("20C", 293.15, ATM_PA),  # common practice, no source (meter datasheets); pressure per ISO 2533
        ("21.1C", F70_K, ATM_PA),  # 70 F, common practice, no source; pressure per ISO 2533
        ("25C", 298.15, ATM_PA),  # common practice, no source; pressure per ISO 2533
        ("SATP", 298.15, 100000.0),  # IUPAC Gold Book, SATP: 298.15 K, 10^5 Pa (from memory)
        ("STP", 273.15, 100000.0),  # IUPAC Gold Book, STP (1982): 273.15 K, 10^5 Pa (from memory)
        ("60F", F60_K, ATM_PA),  # API MPMS / US petroleum practice: 60 F, 14.696 psia (from memory)
    ],
)
def test_reference_condition_matches_defining_standard(name, temperature_k, pressure_pa):
    ref = reference_condition(name)
    assert ref.name == name
    assert ref.temperature_k == pytest.approx(temperature_k, rel=1e-12)
    assert ref.pressure_pa == pytest.approx(pressure_pa, rel=1e-12)
    assert ref.source


def test_60f_pressure_is_14_696_psia():
    # 1 psi = 6894.757 Pa (NIST SP 811, from memory); 14.696 psia is 1 atm to 5 significant figures.
    assert reference_condition("60F").pressure_pa == pytest.approx(14.696 * 6894.757, rel=1e-5)


def test_reference_lookup_ignores_case_and_accepts_a_custom_condition():
    assert reference_condition("stp") is REFERENCE_CONDITIONS["STP"]
    custom = ReferenceCondition("vendor", 294.26, 101352.9, "a meter datasheet: 70 F, 14.7 psia")
    assert reference_condition(custom) is custom


def test_0c_and_20c_bases_differ_by_the_temperature_ratio():
    # Ideal gas at equal pressure: rho ~ 1/T, so the mass behind 1 SLPM scales as 293.15/273.15 (7.3 %).
    m_0c = standard_flow_to_mass_flow_kg_s(1.0, "SLPM", "N2", "0C", model="ideal")
    m_20c = standard_flow_to_mass_flow_kg_s(1.0, "SLPM", "N2", "20C", model="ideal")
    assert m_0c / m_20c == pytest.approx(293.15 / 273.15, rel=1e-12)
    assert m_0c / m_20c - 1.0 == pytest.approx(0.0732, abs=5e-4)
    # The real gas keeps that ratio to within the change of Z between the two states (about 0.02 % at 1 atm).
    real_ratio = standard_flow_to_mass_flow_kg_s(1.0, "SLPM", "N2", "0C") / standard_flow_to_mass_flow_kg_s(
        1.0, "SLPM", "N2", "20C"
    )
    assert real_ratio == pytest.approx(293.15 / 273.15, rel=5e-4)
    assert real_ratio != pytest.approx(293.15 / 273.15, rel=1e-6)


def test_iupac_stp_differs_from_din_1343_by_the_pressure_ratio():
    # Ideal gas at equal temperature: rho ~ p, so 100 kPa against 101.325 kPa is 1.3 % less mass.
    m_stp = standard_flow_to_mass_flow_kg_s(1.0, "SLPM", "air", "STP", model="ideal")
    m_din = standard_flow_to_mass_flow_kg_s(1.0, "SLPM", "air", "0C", model="ideal")
    assert m_stp / m_din == pytest.approx(100000.0 / 101325.0, rel=1e-12)


@pytest.mark.parametrize(
    "gas, density_kg_m3, rel",
    [
        # N2 at 0 C, 1 atm: 1.2506 kg/m^3 (handbook value, from memory). The Span et al. 2000 equation gives
        # 1.2504; the two differ by 0.017 %, hence the tolerance.
        ("N2", 1.2506, 3e-4),
        ("air", 1.2930, 2e-4),  # handbook value (CRC Handbook), from memory
        ("Ar", 1.784, 3e-4),  # handbook value, from memory
        ("CO2", 1.977, 3e-4),  # handbook value, from memory
        ("He", 0.1785, 1e-3),  # handbook value, from memory (quoted as 0.1785 to 0.1786)
    ],
)
def test_normal_density_against_handbook(gas, density_kg_m3, rel):
    assert standard_density_kg_m3(gas, "0C") == pytest.approx(density_kg_m3, rel=rel)


@pytest.mark.parametrize("gas, fluid", [("N2", "Nitrogen"), ("air", "Air"), ("CO2", "CarbonDioxide")])
@pytest.mark.parametrize("reference", ["0C", "15C", "20C", "SATP", "60F"])
def test_standard_density_matches_coolprop(gas, fluid, reference):
    # CoolProp (reference library) evaluated directly at the reference condition.
    ref = reference_condition(reference)
    expected = coolprop.PropsSI("D", "T", ref.temperature_k, "P", ref.pressure_pa, fluid)
    assert standard_density_kg_m3(gas, reference) == pytest.approx(expected, rel=1e-10)


def test_real_and_ideal_normal_density_of_co2_differ():
    # CO2 handbook 1.977 kg/m^3 (from memory) is 0.7 % above p M / (R T): only the real model reproduces it.
    ideal = standard_density_kg_m3("CO2", "0C", model="ideal")
    real = standard_density_kg_m3("CO2", "0C", model="real")
    assert ideal == pytest.approx(ATM_PA * 44.0095e-3 / (8.314462618 * 273.15), rel=5e-5)  # IUPAC M, CODATA R
    assert abs(ideal / 1.977 - 1.0) > 5e-3
    assert real / ideal - 1.0 == pytest.approx(0.0068, abs=5e-4)


def test_one_slpm_of_nitrogen_at_0c():
    # 1 L/min * 1.2506 kg/m^3 (handbook, from memory) = 2.084e-5 kg/s.
    assert standard_flow_to_mass_flow_kg_s(1.0, "SLPM", "N2", "0C") == pytest.approx(2.084e-5, rel=3e-4)


def test_unit_factors_from_length_definitions():
    # International foot = 0.3048 m exactly (1959 agreement): 1 ft^3 = 28.316846592 L.
    slpm = volume_flow_m3_s_per_unit("SLPM")
    assert slpm == pytest.approx(1e-3 / 60.0, rel=1e-12)
    assert volume_flow_m3_s_per_unit("SCFM") / slpm == pytest.approx(28.316846592, rel=1e-12)
    assert volume_flow_m3_s_per_unit("SCFM") / slpm == pytest.approx(28.3168, abs=5e-5)
    scfh = volume_flow_m3_s_per_unit("SCFH")
    assert volume_flow_m3_s_per_unit("SCFM") / scfh == pytest.approx(60.0, rel=1e-12)
    assert slpm / volume_flow_m3_s_per_unit("SCCM") == pytest.approx(1000.0, rel=1e-12)  # 1 L = 1000 cm^3
    nlpm = volume_flow_m3_s_per_unit("NLPM")
    assert volume_flow_m3_s_per_unit("NM3H") / nlpm == pytest.approx(1000.0 / 60.0, rel=1e-12)
    assert volume_flow_m3_s_per_unit("SLM") == slpm


def test_unit_factors_carry_through_to_mass_flow():
    one_scfm = standard_flow_to_mass_flow_kg_s(1.0, "SCFM", "air", "60F")
    same_in_slpm = standard_flow_to_mass_flow_kg_s(28.316846592, "SLPM", "air", "60F")
    assert same_in_slpm == pytest.approx(one_scfm, rel=1e-12)
    assert standard_flow_to_mass_flow_kg_s(1000.0, "SCCM", "air", "60F") == pytest.approx(
        standard_flow_to_mass_flow_kg_s(1.0, "SLPM", "air", "60F"), rel=1e-12
    )


def test_unit_names_are_read_loosely():
    assert flow_unit("sccm").name == "SCCM"
    assert flow_unit("Nm3/h").name == "NM3H"
    assert flow_unit("slm").name == "SLPM"


def test_normal_units_are_always_at_0c():
    # DIN 1343: a normal litre is reckoned at 273.15 K, 101.325 kPa, whatever else the rig file says.
    nlpm_none = standard_flow_to_mass_flow_kg_s(5.0, "NLPM", "N2", None)
    nlpm_0c = standard_flow_to_mass_flow_kg_s(5.0, "NLPM", "N2", "0C")
    slpm_0c = standard_flow_to_mass_flow_kg_s(5.0, "SLPM", "N2", "0C")
    assert nlpm_none == pytest.approx(slpm_0c, rel=1e-12)
    assert nlpm_0c == pytest.approx(slpm_0c, rel=1e-12)
    same = ReferenceCondition("site", 273.15, 101325.0, "our own copy of DIN 1343")
    assert standard_flow_to_mass_flow_kg_s(5.0, "NLPM", "N2", same) == pytest.approx(slpm_0c, rel=1e-12)
    with pytest.raises(PhysicsError, match="NLPM"):
        standard_flow_to_mass_flow_kg_s(5.0, "NLPM", "N2", "20C")
    with pytest.raises(PhysicsError, match="NM3H"):
        mass_flow_to_standard_flow(1e-3, "NM3H", "N2", "STP")


def test_gas_correction_factor_scales_the_reading():
    # Convention of thermal mass-flow meter datasheets (common practice, no source): actual = indicated * K.
    base = standard_flow_to_mass_flow_kg_s(10.0, "SLPM", "Ar", "0C")
    corrected = standard_flow_to_mass_flow_kg_s(10.0, "SLPM", "Ar", "0C", gas_correction_factor=1.4)
    assert corrected == pytest.approx(1.4 * base, rel=1e-12)
    assert mass_flow_to_standard_flow(base, "SLPM", "Ar", "0C", gas_correction_factor=1.4) == pytest.approx(
        10.0 / 1.4, rel=1e-12
    )


def test_vectorised_and_signed():
    readings = np.array([[-0.02, 0.0], [1.0, 250.0]])
    out = standard_flow_to_mass_flow_kg_s(readings, "SCCM", "He", "20C")
    assert out.shape == (2, 2)
    assert out[0, 0] < 0.0 and out[0, 1] == 0.0
    assert np.allclose(out, readings * out[1, 0], rtol=1e-12, atol=0.0)  # linear in the reading
    scalar = standard_flow_to_mass_flow_kg_s(1.0, "SCCM", "He", "20C")
    assert np.ndim(scalar) == 0


_STANDARD_UNITS = [unit for unit, spec in FLOW_UNITS.items() if not spec.normal]
_NORMAL_UNITS = [unit for unit, spec in FLOW_UNITS.items() if spec.normal]
_COMBINATIONS = [(unit, ref) for unit in _STANDARD_UNITS for ref in REFERENCE_CONDITIONS]
_COMBINATIONS += [(unit, ref) for unit in _NORMAL_UNITS for ref in (None, "0C", "normal")]


@settings(max_examples=300, deadline=None)
@given(
    combo=st.sampled_from(_COMBINATIONS),
    gas=st.sampled_from(["N2", "air", "He", "Ar", "CO2"]),
    model=st.sampled_from(["real", "ideal"]),
    mass_flow_kg_s=st.floats(min_value=-1.0, max_value=1.0, allow_nan=False),
    factor=st.floats(min_value=0.05, max_value=20.0),
)
def test_round_trip_mass_to_standard_to_mass(combo, gas, model, mass_flow_kg_s, factor):
    unit, reference = combo
    reading = mass_flow_to_standard_flow(mass_flow_kg_s, unit, gas, reference, model, factor)
    back = standard_flow_to_mass_flow_kg_s(reading, unit, gas, reference, model, factor)
    assert back == pytest.approx(mass_flow_kg_s, rel=1e-12, abs=1e-300)


def test_every_combination_is_covered():
    assert len(_COMBINATIONS) == 5 * len(REFERENCE_CONDITIONS) + 2 * 3


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"unit": "LPM"}, "unit = 'LPM'"),
        ({"unit": "SLPM", "reference": "30C"}, "unknown reference condition"),
        ({"unit": "SLPM", "reference": None}, "needs a reference condition"),
        ({"gas_correction_factor": -1.0}, "gas_correction_factor"),
        ({"gas_correction_factor": 0.0}, "gas_correction_factor"),
        ({"gas_correction_factor": math.nan}, "gas_correction_factor"),
        ({"gas": "xenon"}, "unknown gas"),
        ({"model": "virial"}, "unknown gas model"),
        ({"value": math.inf}, "value"),
    ],
)
def test_errors(kwargs, message):
    args = {"value": 1.0, "unit": "SLPM", "gas": "N2", "reference": "0C"} | kwargs
    with pytest.raises(PhysicsError, match=message):
        standard_flow_to_mass_flow_kg_s(**args)


def test_inverse_errors():
    with pytest.raises(PhysicsError, match="gas_correction_factor"):
        mass_flow_to_standard_flow(1e-3, "SLPM", "N2", "0C", gas_correction_factor=-0.5)
    with pytest.raises(PhysicsError, match="mass_flow_kg_s"):
        mass_flow_to_standard_flow([1e-3, math.nan], "SLPM", "N2", "0C")
    with pytest.raises(PhysicsError, match="unknown flow unit"):
        mass_flow_to_standard_flow(1e-3, "SCMM", "N2", "0C")


def test_bad_custom_reference():
    with pytest.raises(PhysicsError, match="temperature_k"):
        reference_condition(ReferenceCondition("cold", -5.0, 101325.0, "a typo"))
    with pytest.raises(PhysicsError, match="0C, normal, 15C"):
        reference_condition("standard")
