"""Alert rules from the rig file: the defaults built from the rig, overrides, units, and mistakes naming the key."""

import re
from pathlib import Path

import pytest
from CoolProp.CoolProp import PropsSI

from monitor.alerts import MEOP_RULE, AlertEngine, rules_from_rig
from monitor.calibration import parse_channels
from monitor.config import parse_rig
from monitor.errors import ConfigError
from monitor.rigs import resolve_rig

BENCH = Path(resolve_rig("bench_nitrogen_1l")).read_text(encoding="utf-8")
HOVER = Path(resolve_rig("hover_air_3l")).read_text(encoding="utf-8")
AMBIENT_PA = 101325.0  # both demo rigs: ambient_pressure = "101.325 kPa abs"
BAR_PA = 1e5  # bar, by definition
PSI_PA = 6894.757293168  # 1 lbf/in^2 in Pa, NIST SP 811 (2008), Appendix B.8 (from memory: 6.894 757 E+03)


def rules(text: str, alerts: str = "") -> dict:
    rig = parse_rig(text + "\n" + alerts, "test.toml")
    return {r.name: r for r in rules_from_rig(rig, parse_channels(rig))}


def usable_nitrogen_bench_kg() -> float:
    # CoolProp (reference library): 1 L of N2 from 200 bar gauge, 20 C, down the isentrope to 10 bar gauge
    fill = 200 * BAR_PA + AMBIENT_PA
    s = PropsSI("S", "P", fill, "T", 293.15, "Nitrogen")
    rho_fill = PropsSI("D", "P", fill, "T", 293.15, "Nitrogen")
    rho_min = PropsSI("D", "P", 10 * BAR_PA + AMBIENT_PA, "S", s, "Nitrogen")
    return (rho_fill - rho_min) * 1.0e-3


def test_defaults_of_the_bench_rig():
    r = rules(BENCH)
    meop = r[MEOP_RULE]
    assert (meop.signal, meop.condition, meop.severity) == ("tank_pressure", "above", "critical")
    assert meop.threshold == pytest.approx(230 * BAR_PA + AMBIENT_PA, rel=1e-12)  # meop = "230 bar gauge"
    assert meop.always_on and not meop.shelvable and meop.latch
    reserve = r["propellant_reserve_low"]
    assert (reserve.signal, reserve.condition) == ("usable_propellant_kg", "below")
    assert reserve.threshold == pytest.approx(0.10 * usable_nitrogen_bench_kg(), rel=1e-6)
    # regulator margin: 10 % of (fill - min inlet) = 0.1 * (200 - 10) bar
    assert r["regulator_headroom_low"].threshold == pytest.approx(19 * BAR_PA, rel=1e-12)
    assert r["leak_suspected"].threshold == 0.5
    assert r["tank_pressure_stale"].threshold == 0.5 and r["tank_temperature_stale"].threshold == 1.0
    assert r["tank_pressure_stale"].severity == "warning" and r["thrust_stale"].severity == "advisory"
    # the bench rig states no requirement: no delta-v or hover rule
    assert "delta_v_below_required" not in r and "hover_endurance_below_required" not in r


def test_requirements_give_conservative_bound_rules():
    r = rules(HOVER)
    dv, hover = r["delta_v_below_required"], r["hover_endurance_below_required"]
    assert (dv.signal, dv.condition, dv.threshold, dv.unit) == ("delta_v_left_conservative_m_s", "below", 40.0, "m/s")
    assert (hover.signal, hover.threshold, hover.unit) == ("hover_endurance_left_conservative_s", 10.0, "s")


def test_override_a_default_and_add_new_rules_with_units():
    r = rules(BENCH, """
[[alerts]]
name = "propellant_reserve_low"
threshold = "15 %"
deadband = "2 g"

[[alerts]]
name = "leak_suspected"
enabled = false

[[alerts]]
name = "tank_pressure_above_meop"
threshold = "3000 psi gauge"
on_delay = "50 ms"

[[alerts]]
name = "tank_hot"
condition = "above"
signal = "tank_temperature"
threshold = "60 C"
deadband = "2 C"
severity = "advisory"

[[alerts]]
name = "tank_falling_fast"
condition = "rate_below"
signal = "tank_pressure"
threshold = "-2 bar/s"
deadband = "0.5 bar/s"
rate_window = "500 ms"

[[alerts]]
name = "gauges_disagree"
condition = "disagree"
signal = "propellant_flow_gauge_kg"
other = "propellant_pvt_gauge_kg"
tolerance = "5 %"
deadband = "1 %"
only_while = "valve"
""")
    assert r["propellant_reserve_low"].threshold == pytest.approx(0.15 * usable_nitrogen_bench_kg(), rel=1e-6)
    assert r["propellant_reserve_low"].deadband == pytest.approx(0.002, rel=1e-12)
    assert "leak_suspected" not in r
    assert r[MEOP_RULE].threshold == pytest.approx(3000 * PSI_PA + AMBIENT_PA, rel=1e-9)
    assert r[MEOP_RULE].on_delay_s == pytest.approx(0.05) and r[MEOP_RULE].always_on
    hot = r["tank_hot"]
    assert hot.threshold == pytest.approx(333.15, rel=1e-12) and hot.deadband == pytest.approx(2.0, rel=1e-9)
    fast = r["tank_falling_fast"]
    assert (fast.threshold, fast.deadband, fast.rate_window_s, fast.unit) == (-2e5, 5e4, 0.5, "Pa/s")
    dis = r["gauges_disagree"]
    assert dis.relative and dis.threshold == pytest.approx(0.05) and dis.deadband == pytest.approx(0.01)
    names = list(r)
    assert names.index("thrust_stale") < names.index("tank_hot")  # defaults first, then the rig's own rules
    AlertEngine(tuple(r.values()))


MISTAKES = [
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthresold = "1 bar gauge"', "alerts[0].thresold", "typo"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "250 bar"', "alerts[0].threshold", "gauge"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "2 kg"', "alerts[0].threshold", "pressure"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "1 bar gauge"\ndeadband = "-1 bar"',
     "alerts[0].deadband", "0 or more"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "1 bar gauge"\ndeadband = "1 bar gauge"',
     "alerts[0].deadband", "without 'gauge'"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_presure"\nthreshold = "1 bar gauge"', "alerts[0].signal", "channel"),
    ('name = "x"\ncondition = "over"\nsignal = "tank_pressure"', "alerts[0].condition", "one of"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "1 bar gauge"\nseverity = "high"',
     "alerts[0].severity", "critical"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "1 bar gauge"\non_delay = "-1 s"',
     "alerts[0].on_delay", "0 s or more"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "1 bar gauge"\noff_delay = 2',
     "alerts[0].off_delay", "unit"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "1 bar gauge"\nlatch = "yes"',
     "alerts[0].latch", "true or false"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "1 bar gauge"\nmessage = 5',
     "alerts[0].message", "text"),
    ('name = "x"\ncondition = "above"\nsignal = "tank_pressure"', "alerts[0].threshold", "required"),
    ('name = "x"\ncondition = "stale"\nsignal = "tank_pressure"\nstale_after = "1 s"\ndeadband = "1 s"',
     "alerts[0].deadband", "condition 'stale'"),
    ('name = "x"\ncondition = "stale"\nsignal = "usable_propellant_kg"\nstale_after = "1 s"', "alerts[0].signal",
     "sensor channel"),
    ('name = "x"\ncondition = "rate_below"\nsignal = "tank_pressure"\nthreshold = "2 bar"', "alerts[0].threshold",
     "per second"),
    ('name = "x"\ncondition = "disagree"\nsignal = "propellant_flow_gauge_kg"\nother = "propellant_pvt_gauge_kg"',
     "alerts[0].tolerance", "required"),
    ('name = "x"\ncondition = "disagree"\nsignal = "tank_pressure"\nother = "feed_pressure"\ntolerance = "5 %"\n'
     'deadband = "1 bar"', "alerts[0].deadband", "percentage"),
    ('name = "x"\ncondition = "disagree"\nsignal = "tank_pressure"\nother = "mass_flow"\ntolerance = "1 bar"',
     "alerts[0].other", "same kind"),
    ('name = "x"\ncondition = "below"\nsignal = "feed_pressure"\nthreshold = "5 bar gauge"\nonly_while = "valv"',
     "alerts[0].only_while", "channel"),
    ('name = "Tank High"\ncondition = "above"\nsignal = "tank_pressure"\nthreshold = "1 bar gauge"', "alerts[0].name",
     "snake_case"),
    ('name = "tank_pressure_above_meop"\nenabled = false', "alerts[0].enabled", "cannot be disabled"),
    ('name = "tank_pressure_above_meop"\nshelvable = true', "alerts[0].shelvable", "cannot be shelved"),
    ('name = "tank_pressure_above_meop"\nseverity = "advisory"', "alerts[0].severity", "always on"),
    ('name = "tank_pressure_above_meop"\nthreshold = "240 bar gauge"', "alerts[0].threshold", "at most"),
    ('name = "tank_pressure_above_meop"\nonly_while = "valve"', "alerts[0].only_while", "cannot be suppressed"),
    ('name = "leak_suspected"\ncondition = "below"', "alerts[0].condition", "default rule"),
    ('name = "leak_suspected"\nsignal = "thrust_ratio"', "alerts[0].signal", "default rule"),
]


@pytest.mark.parametrize("table, key, expected", MISTAKES)
def test_rig_file_mistakes_name_the_key_value_and_expectation(table, key, expected):
    with pytest.raises(ConfigError) as info:
        rules(BENCH, "[[alerts]]\n" + table + "\n")
    assert info.value.key == key and info.value.source == "test.toml"
    assert expected in info.value.expected


def test_the_second_table_is_named_and_duplicates_are_refused():
    first = '[[alerts]]\nname = "a"\ncondition = "out_of_range"\nsignal = "feed_pressure"\n'
    with pytest.raises(ConfigError) as info:
        rules(BENCH, first + '[[alerts]]\nname = "b"\ncondition = "out_of_range"\nsignal = "nope"\n')
    assert info.value.key == "alerts[1].signal"
    with pytest.raises(ConfigError) as info:
        rules(BENCH, first + first)
    assert info.value.key == "alerts[1].name" and "alerts[0]" in info.value.expected


def test_the_annotated_example_in_the_docs_is_a_valid_rig_section():
    doc = (Path(__file__).resolve().parents[2] / "docs" / "alerts.md").read_text(encoding="utf-8")
    blocks = [b for b in re.findall(r"```toml\n(.*?)```", doc, re.S) if "[[alerts]]" in b]
    assert blocks
    r = rules(HOVER, "\n".join(blocks))
    assert {"feed_low_while_firing", "tank_falling_fast", "gauges_disagree"} <= set(r)
