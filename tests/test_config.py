"""Rig-file loading: the bundled rigs load, and every kind of mistake names its key, value and expectation."""

import pytest
from rig_texts import MINIMAL_RIG

from monitor.config import load_rig, parse_rig
from monitor.errors import ConfigError
from monitor.rigs import bundled_rig_names, resolve_rig

GOOD = MINIMAL_RIG


def test_bundled_rigs_load():
    names = bundled_rig_names()
    assert {"bench_nitrogen_1l", "hover_air_3l"} <= set(names)
    for name in names:
        rig = load_rig(resolve_rig(name))
        assert rig.tank.fill_pressure_pa <= rig.tank.meop_pa
        assert rig.regulator.set_pressure_pa < rig.regulator.min_inlet_pressure_pa < rig.tank.fill_pressure_pa


def test_minimal_rig_gets_documented_defaults():
    rig = parse_rig(GOOD, "good.toml")
    assert rig.gas == "nitrogen"
    assert rig.gas_model == "real"
    assert rig.ambient_pressure_pa == pytest.approx(101325.0)
    assert rig.ambient_temperature_k == pytest.approx(293.15)
    assert rig.tank.expansion == "isentropic"
    assert rig.nozzle.discharge_coefficient == 1.0 and rig.nozzle.count == 1
    assert rig.tank.fill_pressure_pa == pytest.approx(200e5 + 101325.0)  # gauge + ambient
    assert rig.nozzle.throat_area_m2 == pytest.approx(3.14159265e-6 / 4, rel=1e-8)


@pytest.mark.parametrize(
    ("old", "new", "key", "expected"),
    [
        ('volume = "1 L"', 'volume = "1"', "tank.volume", "unit"),
        ('volume = "1 L"', 'volume = "1 kg"', "tank.volume", "volume"),
        ('volume = "1 L"', 'volume = "-1 L"', "tank.volume", "positive"),
        ('fill_pressure = "200 bar gauge"', 'fill_pressure = "200 bar"', "tank.fill_pressure", "gauge"),
        ('fill_pressure = "200 bar gauge"', 'fill_pressure = "300 bar gauge"', "tank.fill_pressure", "MEOP"),
        ('gas = "N2"', 'gas = "xenon"', "rig.gas", "nitrogen"),
        ('kind = "stand"', 'kind = "rocket"', "rig.kind", "hover_platform"),
        (
            'min_inlet_pressure = "10 bar gauge"',
            'min_inlet_pressure = "5 bar gauge"',
            "regulator.min_inlet_pressure",
            "above the set point",
        ),
        ('exit_diameter = "2 mm"', 'exit_diameter = "0.5 mm"', "nozzle.exit_diameter", "throat"),
        ('exit_diameter = "2 mm"', 'exit_diameter = "2 mm"\ncount = 0', "nozzle.count", "whole number"),
        ('exit_diameter = "2 mm"', 'exit_diameter = "2 mm"\nthroat_dia = "1 mm"', "nozzle.throat_dia", "typo"),
        ('dry_mass = "1 kg"', 'dry_mass = "1 kg"\nrequired_hover_time = "soon"', "vehicle.required_hover_time", "time"),
        ("format = 1", "format = 7", "format", "1"),
        ("[vehicle]", "[vehicles]", "vehicles", "sections"),
    ],
)
def test_mistakes_name_key_value_and_expectation(old, new, key, expected):
    assert old in GOOD
    with pytest.raises(ConfigError) as info:
        parse_rig(GOOD.replace(old, new, 1), "bad.toml")
    message = str(info.value)
    assert message.startswith("bad.toml: ")
    assert key in message and expected in message
    assert info.value.exit_code == 2


def test_missing_required_key():
    with pytest.raises(ConfigError, match="nozzle.throat_diameter.*required"):
        parse_rig(GOOD.replace('throat_diameter = "1 mm"\n', ""), "x.toml")


def test_not_toml_and_missing_file(tmp_path):
    with pytest.raises(ConfigError, match="valid TOML"):
        parse_rig("[rig\nname=", "x.toml")
    with pytest.raises(ConfigError, match="readable"):
        load_rig(tmp_path / "nope.toml")
    with pytest.raises(ConfigError, match="bundled rig"):
        resolve_rig(str(tmp_path / "nope.toml"))


def test_polytropic_needs_its_exponent():
    text = GOOD.replace('meop = "230 bar gauge"', 'meop = "230 bar gauge"\nexpansion = "polytropic"')
    with pytest.raises(ConfigError, match="tank.polytropic_exponent"):
        parse_rig(text)
    rig = parse_rig(text.replace('expansion = "polytropic"', 'expansion = "polytropic"\npolytropic_exponent = 1.2'))
    assert rig.tank.polytropic_exponent == 1.2


def test_simulation_table_is_kept_raw_for_the_simulator():
    rig = parse_rig(GOOD + '[simulation]\nseed = 3\n[[simulation.faults]]\nkind = "leak"\n', "x.toml")
    assert rig.simulation == {"seed": 3, "faults": [{"kind": "leak"}]}
    assert parse_rig(GOOD).simulation == {}
    with pytest.raises(ConfigError) as info:
        parse_rig(GOOD.replace("format = 1", "format = 1\nsimulation = 3"), "x.toml")
    assert info.value.key == "simulation" and "a table" in str(info.value)
