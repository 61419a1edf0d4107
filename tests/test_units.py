"""Unit parsing at the edges: pint conversions checked against the definitions of the units."""

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from monitor.errors import ConfigError
from monitor.units import G0_M_S2, R_J_PER_MOL_K, convert, parse_pressure, parse_quantity


def test_constants_are_the_defined_values():
    # 3rd CGPM (1901): standard acceleration of gravity, exact.
    assert G0_M_S2 == 9.80665
    # CODATA 2018: R = N_A k = 6.02214076e23 * 1.380649e-23 J/(mol K), exact.
    assert R_J_PER_MOL_K == pytest.approx(6.02214076e23 * 1.380649e-23, rel=1e-12)


@pytest.mark.parametrize(
    ("text", "kind", "si"),
    [
        ("1 psi", "pressure", 6894.757293168361),  # NIST SP 811, Appendix B.8: 1 psi = 6.894757e3 Pa
        ("1 bar", "pressure", 1e5),  # bar = 100 kPa by definition
        ("1 atm", "pressure", 101325.0),  # standard atmosphere, ISO 2533 / CGPM 1954
        ("1 lbf", "force", 4.4482216152605),  # NIST SP 811, B.8: 1 lbf = 4.448222 N
        ("1 L", "volume", 1e-3),  # litre = 1 dm^3 (CGPM 1964)
        ("1 ft**3", "volume", 0.028316846592),  # international foot = 0.3048 m exactly
        ("20 C", "temperature", 293.15),  # ITS-90 / SI: T/K = t/C + 273.15
        ("68 F", "temperature", 293.15),  # t/F = 1.8 t/C + 32
        ("15 deg", "angle", math.pi / 12),
        ("2 g/s", "mass_flow", 0.002),
    ],
)
def test_parse_quantity_against_unit_definitions(text, kind, si):
    assert parse_quantity(text, kind, "k") == pytest.approx(si, rel=1e-9)


def test_gauge_and_absolute_pressures():
    assert parse_pressure("300 bar gauge", "k", 101325.0) == pytest.approx(300e5 + 101325.0)
    assert parse_pressure("101.325 kPa abs", "k", 0.0) == pytest.approx(101325.0)
    assert parse_pressure("14.696 psi a", "k", 0.0) == pytest.approx(101325.0, rel=1e-5)  # US practice: 1 atm = 14.696 psia


@pytest.mark.parametrize("bad", ["300", "300 bar", "300 m gauge", "lots gauge", 300])
def test_bad_pressures_name_the_key(bad):
    with pytest.raises(ConfigError) as info:
        parse_pressure(bad, "tank.fill_pressure", 101325.0, "rig.toml")
    assert "tank.fill_pressure" in str(info.value) and "rig.toml" in str(info.value)


@pytest.mark.parametrize("bad", [3.0, "3", "3 kg", "nan L", None, True])
def test_bad_volumes_are_refused(bad):
    with pytest.raises(ConfigError, match="tank.volume"):
        parse_quantity(bad, "volume", "tank.volume")


@given(st.floats(min_value=1e-3, max_value=1e9), st.sampled_from(["psi", "bar", "kPa", "MPa", "atm", "torr"]))
def test_pressure_round_trip(value_pa, unit):
    shown = convert(value_pa, "pressure", unit)
    assert parse_quantity(f"{shown!r} {unit}", "pressure", "k") == pytest.approx(value_pa, rel=1e-12)


@given(st.floats(min_value=1.0, max_value=2000.0))
def test_temperature_round_trip_through_celsius(temperature_k):
    shown = convert(temperature_k, "temperature", "C")
    assert parse_quantity(f"{shown!r} C", "temperature", "k") == pytest.approx(temperature_k, rel=1e-12)
