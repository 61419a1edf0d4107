"""Channel tables and calibration: signal standards, unit conversions, flags, tare, and every config mistake."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from rig_texts import MINIMAL_RIG, with_rig_lines

from drivers.base import LineStatus, RawBatch
from monitor.calibration import (
    Calibrator,
    Current420,
    Linear,
    Ratiometric,
    Table,
    parse_channels,
    std_uncertainty,
)
from monitor.config import parse_rig
from monitor.errors import ConfigError, PhysicsError
from monitor.physics.flow_units import standard_flow_to_mass_flow_kg_s
from monitor.samples import Quality

RIG_TEXT = with_rig_lines(MINIMAL_RIG, 'ambient_pressure = "95 kPa abs"')
RIG = parse_rig(RIG_TEXT, "test_rig.toml")
AMBIENT_PA = 95_000.0  # as written in RIG_TEXT

PRESSURE = {
    "name": "tank_pressure", "role": "tank_pressure", "field": "P", "unit": "bar gauge",
    "calibration": {"kind": "current_4_20", "low": "0 bar gauge", "high": "400 bar gauge"},
}
FLOW = {
    "name": "flow", "role": "mass_flow", "field": "Q", "unit": "SLPM", "flow_reference": "0C",
    "calibration": {"kind": "identity"},
}
THRUST = {"name": "thrust", "role": "thrust", "field": "F", "unit": "N", "calibration": {"kind": "identity"}}


def specs_of(*tables, rig=RIG, fields=None):
    return parse_channels(dataclasses.replace(rig, channels=tuple(tables)), fields)


def raw_batch(fields, rows, status=None, device=None, sequence=None):
    values = np.array(rows, dtype=float).reshape(len(rows), len(fields))
    n = len(rows)
    status = np.zeros(n, np.uint8) if status is None else np.asarray(status, np.uint8)
    return RawBatch(t_s=np.arange(n, dtype=float) * 0.01, lines=[b"x"] * n, status=status, fields=tuple(fields),
                    values=values, device_time_s=device, sequence=sequence)


def run(table, raw_values, rig=RIG):
    """Calibrate one channel's raw values; returns (values_si, quality)."""
    spec = specs_of(table, rig=rig)[0]
    batch = Calibrator((spec,), (table["field"],)).apply(raw_batch((table["field"],), [[v] for v in raw_values]))
    return batch.values[spec.name], batch.quality[spec.name]


# --- signal standards -------------------------------------------------------------------------------------


def test_current_4_20_is_linear_from_lower_to_upper_range_value():
    # IEC 60381-1 (from memory): 4 mA = lower range value, 20 mA = upper range value, linear in between;
    # 12 mA is mid-span. 1 bar = 100 kPa exactly (SI brochure).
    values, quality = run(PRESSURE, [4.0, 12.0, 20.0])
    np.testing.assert_allclose(values, [AMBIENT_PA, 200e5 + AMBIENT_PA, 400e5 + AMBIENT_PA], rtol=1e-12)
    assert not quality.any()


def test_current_outside_namur_band_is_out_of_range():
    # NAMUR NE 43 (common practice): measuring information 3.8 to 20.5 mA; beyond it the loop signals a fault.
    values, quality = run(PRESSURE, [3.79, 3.8, 20.5, 20.51, 0.0, 22.0])
    assert list(quality) == [Quality.OUT_OF_RANGE, 0, 0, Quality.OUT_OF_RANGE, Quality.OUT_OF_RANGE,
                             Quality.OUT_OF_RANGE]
    assert np.isnan(values[[0, 3, 4, 5]]).all()
    # 3.8 mA is 1.25 % of span below the lower range value: -5 bar gauge (linear extension, IEC 60381-1)
    np.testing.assert_allclose(values[1], -5e5 + AMBIENT_PA, rtol=1e-12)


def test_ratiometric_half_to_four_and_a_half_volts_on_five():
    # Datasheet convention for ratiometric transducers (common practice, no source): 0.5 V (10 %) = low,
    # 4.5 V (90 %) = high on a 5 V supply, so 2.5 V is mid-span.
    table = dict(PRESSURE, calibration={"kind": "ratiometric", "supply_v": 5.0, "low": "0 bar gauge",
                                        "high": "10 bar gauge"})
    values, quality = run(table, [0.5, 2.5, 4.5, 5.01, -0.1])
    np.testing.assert_allclose(values[:3], [AMBIENT_PA, 5e5 + AMBIENT_PA, 10e5 + AMBIENT_PA], rtol=1e-12)
    assert list(quality) == [0, 0, 0, Quality.OUT_OF_RANGE, Quality.OUT_OF_RANGE]


def test_ratiometric_with_other_fractions_and_supply():
    # Same definition with 0.05/0.95 of a 10 V supply: 0.5 V = low, 9.5 V = high (hand computation).
    table = dict(PRESSURE, calibration={"kind": "ratiometric", "supply_v": 10.0, "low_fraction": 0.05,
                                        "high_fraction": 0.95, "low": "0 bar abs", "high": "9 bar abs"})
    values, _ = run(table, [0.5, 9.5, 5.0])  # limits given absolute on a gauge channel: still 0 to 9 bar abs
    np.testing.assert_allclose(values, [0.0, 9e5, 4.5e5], atol=1e-6)


# --- unit conversions -------------------------------------------------------------------------------------


def test_celsius_and_fahrenheit_to_kelvin():
    # SI brochure: T/K = t/C + 273.15 (exact); NIST SP 811 (from memory): T/K = (t/F + 459.67) * 5/9.
    c = {"name": "t", "role": "tank_temperature", "field": "T", "unit": "C", "calibration": {"kind": "identity"}}
    values, _ = run(c, [-40.0, 0.0, 20.0])
    np.testing.assert_allclose(values, [233.15, 273.15, 293.15], rtol=1e-14)
    values, _ = run(dict(c, unit="F"), [-40.0, 32.0, 68.0])
    np.testing.assert_allclose(values, [233.15, 273.15, 293.15], rtol=1e-13)


def test_gauge_to_absolute_uses_the_rigs_ambient_pressure():
    # Absolute = gauge + ambient (definition of gauge pressure). 1 psi = 6894.757 Pa (NIST SP 811, from memory).
    table = dict(PRESSURE, unit="psi gauge", calibration={"kind": "linear", "gain": 1.0})
    values, _ = run(table, [0.0, 100.0])
    np.testing.assert_allclose(values, [AMBIENT_PA, 689475.7 + AMBIENT_PA], rtol=1e-7)
    other = dataclasses.replace(RIG, ambient_pressure_pa=101325.0)
    values, _ = run(table, [0.0], rig=other)
    assert values[0] == pytest.approx(101325.0, rel=1e-12)
    values, _ = run(dict(table, unit="kPa abs"), [250.0])
    assert values[0] == pytest.approx(250e3, rel=1e-12)


def test_calibration_limits_in_another_unit_than_the_channel():
    # 0-5800 psi gauge sensor shown in bar gauge: 20 mA = 5800 * 6894.757 Pa gauge (NIST SP 811, from memory).
    table = dict(PRESSURE, calibration={"kind": "current_4_20", "low": "0 psi gauge", "high": "5800 psi gauge"})
    spec = specs_of(table)[0]
    assert spec.calibration.high == pytest.approx(5800 * 6894.757 / 1e5, rel=1e-7)
    values, _ = run(table, [20.0])
    assert values[0] == pytest.approx(5800 * 6894.757 + AMBIENT_PA, rel=1e-7)


def test_display_unit_round_trip():
    # 1 bar = 14.5038 psi (NIST SP 811, from memory); gauge display removes the same ambient.
    spec = specs_of(dict(PRESSURE, display_unit="psi gauge"))[0]
    assert spec.to_display(np.array([1e5 + AMBIENT_PA]))[0] == pytest.approx(14.5038, rel=1e-5)


# --- calibration kinds ------------------------------------------------------------------------------------


def test_table_interpolates_linearly_and_flags_outside():
    # Linear interpolation between points (hand computation): halfway between (1, 10) and (2, 40) is 25.
    table = dict(THRUST, calibration={"kind": "table", "raw": [0.0, 1.0, 2.0], "value": [0.0, 10.0, 40.0]})
    values, quality = run(table, [0.0, 0.5, 1.5, 2.0, -0.01, 2.01])
    np.testing.assert_allclose(values[:4], [0.0, 5.0, 25.0, 40.0])
    assert list(quality[4:]) == [Quality.OUT_OF_RANGE] * 2


def test_polynomial_and_linear():
    # Hand computation: 1 + 2*2 + 3*2^2 = 17; 1 + 2*(-1) + 3*1 = 2. Linear: 2.5 * 4 - 1 = 9.
    values, _ = run(dict(THRUST, calibration={"kind": "polynomial", "coefficients": [1, 2, 3]}), [2.0, -1.0])
    np.testing.assert_allclose(values, [17.0, 2.0])
    values, _ = run(dict(THRUST, calibration={"kind": "linear", "gain": 2.5, "offset": -1.0}), [4.0])
    assert values[0] == 9.0


def test_polynomial_overflow_is_flagged_not_passed_on():
    # Hand reasoning: 1e300^2 overflows float64 to inf, which must never reach the listeners as a value.
    values, quality = run(dict(THRUST, calibration={"kind": "polynomial", "coefficients": [0, 0, 1]}), [1e300])
    assert np.isnan(values[0]) and quality[0] == Quality.OUT_OF_RANGE


# --- standard flow ----------------------------------------------------------------------------------------


def test_slpm_to_kg_s_matches_flow_units_and_hand_computation():
    spec = specs_of(FLOW)[0]
    values, _ = run(FLOW, [1.0, 50.0])
    expected = standard_flow_to_mass_flow_kg_s([1.0, 50.0], "SLPM", "nitrogen", "0C", "real")
    np.testing.assert_allclose(values, expected, rtol=1e-12)
    # Independent: 1 L/min = 1e-3 m^3 / 60 s (SI brochure); N2 at 0 C, 101.325 kPa: 1.2506 kg/m^3 (NIST, from
    # memory) -> 2.0843e-5 kg/s per SLPM.
    assert values[0] == pytest.approx(1e-3 / 60.0 * 1.2506, rel=5e-4)
    assert spec.flow.reference.temperature_k == 273.15 and spec.flow.gas == "nitrogen"


def test_flow_uses_rig_gas_model():
    ideal = dataclasses.replace(RIG, gas_model="ideal")
    values, _ = run(FLOW, [1.0], rig=ideal)
    # Ideal gas: rho = p M / (R T) with M(N2) = 28.0134 g/mol, R = 8.314462618 J/(mol K) (CODATA, from memory).
    rho = 101325.0 * 0.0280134 / (8.314462618 * 273.15)
    assert values[0] == pytest.approx(1e-3 / 60.0 * rho, rel=1e-5)


def test_gas_correction_factor_scales_mass_flow():
    # Meter calibrated on N2, reading argon with K = 1.40 (thermal meter datasheet convention, common practice,
    # no source): actual standard flow = reading * K. Argon at 0 C, 101.325 kPa: 1.7837 kg/m^3 (NIST, from memory).
    argon = dataclasses.replace(RIG, gas="argon")
    values, _ = run(dict(FLOW, gas_correction_factor=1.40), [10.0], rig=argon)
    assert values[0] == pytest.approx(10.0 * 1.40 * 1e-3 / 60.0 * 1.7837, rel=5e-4)
    plain, _ = run(FLOW, [10.0], rig=argon)
    assert values[0] / plain[0] == pytest.approx(1.40, rel=1e-12)


def test_normal_units_need_no_reference_and_reject_another():
    # DIN 1343 (from memory): a normal litre is at 0 C and 101.325 kPa, so NLPM equals SLPM referenced to 0 C.
    nlpm = {k: v for k, v in FLOW.items() if k != "flow_reference"} | {"unit": "NLPM"}
    values, _ = run(nlpm, [1.0])
    slpm, _ = run(FLOW, [1.0])
    assert values[0] == pytest.approx(slpm[0], rel=1e-12)
    with pytest.raises(ConfigError) as err:
        specs_of(dict(nlpm, flow_reference="20C"))
    assert err.value.key == "channels[0].flow_reference"


# --- flags, rows and time ---------------------------------------------------------------------------------


def test_non_finite_on_the_wire_and_missing_fields():
    fields = ("P", "F")
    specs = specs_of(PRESSURE, THRUST)
    raw = raw_batch(fields, [[12.0, np.nan], [np.inf, 1.0], [-np.inf, np.nan], [12.0, 2.0]],
                    status=[0, 0, 0, LineStatus.CHECKSUM], device=np.array([1.0, 2.0, 3.0, 4.0]),
                    sequence=np.array([7, 8, 9, 10], dtype=np.int64))
    batch = Calibrator(specs, fields).apply(raw)
    assert len(batch) == 3  # the checksum-failed line gives no sample
    np.testing.assert_array_equal(batch.t_s, [0.0, 0.01, 0.02])
    np.testing.assert_array_equal(batch.device_time_s, [1.0, 2.0, 3.0])
    np.testing.assert_array_equal(batch.sequence, [7, 8, 9])
    assert list(batch.quality["tank_pressure"]) == [0, Quality.NON_FINITE, Quality.NON_FINITE]
    assert list(batch.quality["thrust"]) == [Quality.NON_FINITE, 0, Quality.NON_FINITE]
    assert np.isnan(batch.values["tank_pressure"][1:]).all()
    # With the driver's mask of absent fields, an absent field is MISSING, a NaN sent on the wire is not.
    absent = np.array([[False, True], [False, False], [False, False], [False, False]])
    batch = Calibrator(specs, fields).apply(raw, missing=absent)
    assert list(batch.quality["thrust"]) == [Quality.MISSING, 0, Quality.NON_FINITE]


def test_valid_range_flags_out_of_range():
    table = dict(PRESSURE, valid_range=["0 bar abs", "300 bar gauge"])
    values, quality = run(table, [12.0, 16.0, 20.0])  # 200, 300, 400 bar gauge (IEC 60381-1 scaling)
    assert list(quality) == [0, 0, Quality.OUT_OF_RANGE]
    assert np.isnan(values[2]) and np.isfinite(values[:2]).all()


def test_fields_may_arrive_in_another_order_and_empty_batches():
    specs = specs_of(PRESSURE, THRUST)
    cal = Calibrator(specs, ("P", "F"))
    batch = cal.apply(raw_batch(("F", "x", "P"), [[3.0, 0.0, 12.0]]))
    assert batch.values["thrust"][0] == 3.0
    assert batch.values["tank_pressure"][0] == pytest.approx(200e5 + AMBIENT_PA)
    empty = cal.apply(RawBatch.empty(()))
    assert len(empty) == 0 and empty.channels == ("tank_pressure", "thrust")
    with pytest.raises(ConfigError) as err:
        cal.apply(raw_batch(("F",), [[1.0]]))
    assert err.value.key == "channels[0].field"


def test_tare_subtracts_the_mean_of_the_first_good_samples_across_batches():
    spec = specs_of(dict(THRUST, tare={"samples": 3}))[0]
    cal = Calibrator((spec,), ("F",))
    first = cal.apply(raw_batch(("F",), [[5.0], [np.nan], [5.2]]))
    # Until 3 usable samples are seen there is no zero: the samples are flagged and NaN.
    assert list(first.quality["thrust"]) == [Quality.TARING, Quality.NON_FINITE, Quality.TARING]
    assert cal.tare_offset_si("thrust") is None
    second = cal.apply(raw_batch(("F",), [[4.9], [7.0], [8.0]]))
    mean = (5.0 + 5.2 + 4.9) / 3.0  # arithmetic mean, hand computation
    assert cal.tare_offset_si("thrust") == pytest.approx(mean)
    assert list(second.quality["thrust"]) == [Quality.TARING, 0, 0]
    np.testing.assert_allclose(second.values["thrust"][1:], [7.0 - mean, 8.0 - mean])
    cal.reset_tare()
    third = cal.apply(raw_batch(("F",), [[1.0], [2.0], [3.0], [10.0]]))
    assert third.values["thrust"][3] == pytest.approx(10.0 - 2.0)


def test_tare_and_valid_range_apply_to_the_tared_value():
    spec = specs_of(dict(THRUST, tare={"samples": 2}, valid_range=["-1 N", "5 N"]))[0]
    batch = Calibrator((spec,), ("F",)).apply(raw_batch(("F",), [[100.0], [100.0], [104.0], [106.0]]))
    assert list(batch.quality["thrust"]) == [Quality.TARING, Quality.TARING, 0, Quality.OUT_OF_RANGE]


# --- uncertainty ------------------------------------------------------------------------------------------


def test_std_uncertainty_from_accuracy():
    # GUM 4.3.7: limits +/-a with a rectangular distribution give u = a / sqrt(3).
    table = dict(PRESSURE, accuracy={"percent_of_full_scale": 0.25, "full_scale": "400 bar"})
    spec = specs_of(table)[0]
    u = std_uncertainty(spec, np.array([AMBIENT_PA, 2e7, np.nan]))
    np.testing.assert_allclose(u[:2], 0.0025 * 4e7 / math.sqrt(3.0))
    assert np.isnan(u[2])
    # % of reading is of the gauge reading: 1 % of 100 bar gauge = 1 bar, as a k = 2 figure u = a / 2 (GUM 4.3.3).
    spec = specs_of(dict(PRESSURE, accuracy={"percent_of_reading": 1.0, "distribution": "normal"}))[0]
    assert std_uncertainty(spec, np.array([1e7 + AMBIENT_PA]))[0] == pytest.approx(1e5 / 2.0)
    # A temperature span "1.5 C" is 1.5 K (SI brochure), not 274.65 K.
    c = {"name": "t", "field": "T", "unit": "C", "calibration": {"kind": "identity"}, "accuracy": {"absolute": "1.5 C"}}
    assert std_uncertainty(specs_of(c)[0], np.array([300.0]))[0] == pytest.approx(1.5 / math.sqrt(3.0))
    with pytest.raises(PhysicsError):
        std_uncertainty(specs_of(THRUST)[0], np.array([1.0]))


# --- config mistakes --------------------------------------------------------------------------------------


def _without(table, key):
    return {k: v for k, v in table.items() if k != key}


def _cal(table, **changes):
    return dict(table, calibration=dict(table["calibration"], **changes))


CONFIG_MISTAKES = [
    (_without(FLOW, "flow_reference"), "channels[0].flow_reference"),
    (dict(FLOW, flow_reference="30C"), "channels[0].flow_reference"),
    (dict(THRUST, flow_reference="0C"), "channels[0].flow_reference"),
    (dict(THRUST, gas_correction_factor=1.2), "channels[0].gas_correction_factor"),
    (dict(FLOW, gas_correction_factor=0.0), "channels[0].gas_correction_factor"),
    (dict(THRUST, colour="red"), "channels[0].colour"),
    (_without(THRUST, "field"), "channels[0].field"),
    (_without(THRUST, "calibration"), "channels[0].calibration"),
    (dict(THRUST, name="Thrust N"), "channels[0].name"),
    (dict(THRUST, role="nozzle"), "channels[0].role"),
    (dict(THRUST, unit="bar gauge"), "channels[0].unit"),  # role thrust needs a force
    (dict(PRESSURE, unit="bar"), "channels[0].unit"),  # gauge or abs must be said
    (dict(THRUST, unit="parsecs per hogshead"), "channels[0].unit"),
    (dict(THRUST, display_unit="bar gauge"), "channels[0].display_unit"),
    (_cal(THRUST, kind="cubic"), "channels[0].calibration.kind"),
    (_cal(THRUST, gian=2.0), "channels[0].calibration.gian"),
    (_cal(PRESSURE, low="0"), "channels[0].calibration.low"),
    (_cal(PRESSURE, low="0 C"), "channels[0].calibration.low"),
    (_cal(PRESSURE, high="0 bar gauge"), "channels[0].calibration.high"),
    (_cal(PRESSURE, low="-2 bar gauge"), "channels[0].calibration.low"),  # below vacuum
    (dict(THRUST, calibration={"kind": "linear", "gain": 0.0}), "channels[0].calibration.gain"),
    (dict(THRUST, calibration={"kind": "linear", "gain": math.inf}), "channels[0].calibration.gain"),
    (dict(THRUST, calibration={"kind": "polynomial", "coefficients": [1.0, 0.0]}), "channels[0].calibration.coefficients"),
    (dict(THRUST, calibration={"kind": "polynomial", "coefficients": [1.0, "x"]}), "channels[0].calibration.coefficients"),
    (dict(THRUST, calibration={"kind": "table", "raw": [0, 2, 1], "value": [0, 1, 2]}), "channels[0].calibration.raw"),
    (dict(THRUST, calibration={"kind": "table", "raw": [0, 1, 2], "value": [0, 1]}), "channels[0].calibration.value"),
    (dict(THRUST, calibration={"kind": "table", "raw": [0, 1e-320], "value": [0, 1]}), "channels[0].calibration.raw"),
    (dict(PRESSURE, calibration={"kind": "ratiometric", "supply_v": 0.0, "low": "0 bar gauge", "high": "1 bar gauge"}),
     "channels[0].calibration.supply_v"),
    (dict(PRESSURE, calibration={"kind": "ratiometric", "supply_v": 5.0, "low_fraction": 0.9, "high_fraction": 0.1,
                                 "low": "0 bar gauge", "high": "1 bar gauge"}), "channels[0].calibration.high_fraction"),
    (dict(PRESSURE, valid_range=["10 bar gauge", "1 bar gauge"]), "channels[0].valid_range"),
    (dict(PRESSURE, valid_range=["1 bar gauge"]), "channels[0].valid_range"),
    (dict(THRUST, role="tank_temperature", unit="C", valid_range=["-300 C", "50 C"]), "channels[0].valid_range[0]"),
    (dict(PRESSURE, valid_range=["1 bar", "2 bar gauge"]), "channels[0].valid_range[0]"),
    (dict(PRESSURE, accuracy={"percent_of_full_scale": 0.25}), "channels[0].accuracy.full_scale"),
    (dict(PRESSURE, accuracy={"percent_of_reading": -1.0}), "channels[0].accuracy.percent_of_reading"),
    (dict(PRESSURE, accuracy={"absolute": "-1 bar"}), "channels[0].accuracy.absolute"),
    (dict(PRESSURE, accuracy={"distribution": "triangular"}), "channels[0].accuracy.distribution"),
    (dict(PRESSURE, accuracy={"typo": 1}), "channels[0].accuracy.typo"),
    (dict(THRUST, stale_after="0.5"), "channels[0].stale_after"),
    (dict(PRESSURE, tare={"samples": 10}), "channels[0].tare"),
    (dict(THRUST, tare={"samples": 0}), "channels[0].tare.samples"),
    (dict(THRUST, tare={"samples": 10, "every": 3}), "channels[0].tare.every"),
]


@pytest.mark.parametrize("table, key", CONFIG_MISTAKES, ids=[k + str(i) for i, (_, k) in enumerate(CONFIG_MISTAKES)])
def test_every_config_mistake_names_its_key(table, key):
    with pytest.raises(ConfigError) as err:
        specs_of(table)
    assert err.value.key == key
    assert err.value.source == "test_rig.toml"


@pytest.mark.parametrize("tables, fields, key", [
    ((THRUST, dict(PRESSURE, name="thrust")), None, "channels[1].name"),
    ((PRESSURE, dict(PRESSURE, name="p2", field="P2")), None, "channels[1].role"),
    ((THRUST, PRESSURE), ("F", "Q"), "channels[1].field"),
])
def test_channel_set_mistakes(tables, fields, key):
    with pytest.raises(ConfigError) as err:
        specs_of(*tables, fields=fields)
    assert err.value.key == key and err.value.source == "test_rig.toml"


def test_a_channel_table_from_a_real_rig_file():
    text = RIG_TEXT + """
[[channels]]
name = "feed_pressure"
role = "feed_pressure"
field = "P_feed"
unit = "bar gauge"
calibration = { kind = "ratiometric", supply_v = 5.0, low = "0 bar gauge", high = "16 bar gauge" }
accuracy = { percent_of_full_scale = 0.5, full_scale = "16 bar" }
stale_after = "250 ms"
"""
    (spec,) = parse_channels(parse_rig(text, "r.toml"), ("P_feed",))
    # 250 ms = 0.25 s (SI prefixes); 0.5 V on 5 V is the low end (datasheet convention, common practice).
    assert spec.stale_after_s == pytest.approx(0.25) and spec.calibration.low == 0.0
    assert spec.accuracy.full_scale == pytest.approx(16e5)


# --- invariants -------------------------------------------------------------------------------------------

_finite_floats = st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False)


@settings(max_examples=200, deadline=None)
@given(
    xs=st.lists(_finite_floats, min_size=2, max_size=8, unique=True),
    steps=st.lists(st.floats(0.0, 1e3), min_size=8, max_size=8),
    raw=st.lists(st.floats(-2e6, 2e6, allow_nan=False), min_size=2, max_size=50),
    descending=st.booleans(),
)
def test_table_is_monotonic_where_its_values_are(xs, steps, raw, descending):
    # Piecewise-linear interpolation of monotonic points is monotonic (property of linear interpolation).
    xs = sorted(xs)
    ys = np.cumsum(steps[: len(xs)]) * (-1.0 if descending else 1.0)
    with np.errstate(all="ignore"):
        assume(np.all(np.isfinite(np.diff(ys) / np.diff(xs))))  # parse_channels refuses other tables
    values, inside = Table(tuple(xs), tuple(ys)).apply(np.sort(np.array(raw)))
    kept = values[~inside]
    diffs = np.diff(kept)
    assert np.all(diffs <= 0.0) if descending else np.all(diffs >= 0.0)


@settings(max_examples=200, deadline=None)
@given(gain=_finite_floats.filter(lambda g: abs(g) > 1e-9), offset=_finite_floats,
       raw=st.lists(_finite_floats, min_size=2, max_size=50))
def test_linear_is_monotonic_with_the_sign_of_its_gain(gain, offset, raw):
    # A linear map is monotonic, increasing when the gain is positive (definition).
    values, _ = Linear(gain, offset).apply(np.sort(np.array(raw)))
    diffs = np.diff(values)
    assert np.all(diffs >= 0.0) if gain > 0 else np.all(diffs <= 0.0)


_wire = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.floats(2.0, 22.0))


@settings(max_examples=200, deadline=None)
@given(rows=st.lists(st.tuples(_wire, _wire, _wire), min_size=1, max_size=40), tare=st.integers(1, 5))
def test_flagged_exactly_when_nan(rows, tare):
    # Contract of monitor.samples.Batch: values are NaN where the sample is not good, and only there.
    tables = (
        dict(PRESSURE, valid_range=["0 bar gauge", "390 bar gauge"]),
        dict(THRUST, calibration={"kind": "table", "raw": [3.0, 10.0, 21.0], "value": [0.0, 5.0, 100.0]},
             tare={"samples": tare}),
        dict(FLOW, calibration={"kind": "polynomial", "coefficients": [0.0, 1.0, 1e-3]}),
    )
    cal = Calibrator(specs_of(*tables), ("P", "F", "Q"))
    batch = cal.apply(raw_batch(("P", "F", "Q"), rows))
    for name in batch.channels:
        assert np.array_equal(batch.quality[name] != 0, ~np.isfinite(batch.values[name]))


def test_current_and_ratiometric_objects_directly():
    # IEC 60381-1 scaling on a reversed range (20 mA = low end) stays linear: 12 mA is still mid-span.
    values, outside = Current420(low=10.0, high=0.0).apply(np.array([4.0, 12.0, 20.0]))
    np.testing.assert_allclose(values, [10.0, 5.0, 0.0])
    assert not outside.any()
    values, _ = Ratiometric(5.0, 0.1, 0.9, 0.0, 100.0).apply(np.array([0.5, 4.5]))
    np.testing.assert_allclose(values, [0.0, 100.0])


def test_the_documented_example_is_a_valid_rig_section():
    # docs/channels.md must show a table ejecta accepts; its values are checked against the doc's own comments.
    from pathlib import Path

    doc = (Path(__file__).parent.parent / "docs" / "channels.md").read_text(encoding="utf-8")
    example = doc.split("```toml", 1)[1].split("```", 1)[0]
    specs = parse_channels(parse_rig(RIG_TEXT + example, "doc.toml"), ("P_tank", "P_feed", "T_tank", "flow", "load", "sol"))
    assert [s.role for s in specs] == ["tank_pressure", "feed_pressure", "tank_temperature", "mass_flow", "thrust",
                                       "valve"]
    assert [s.quantity for s in specs] == ["pressure", "pressure", "temperature", "mass_flow", "force", "dimensionless"]
    # "1.5 K" absolute accuracy stays 1.5 K; 0.5 s stale; 200-sample tare (as the doc's comments say).
    assert specs[2].accuracy.absolute == pytest.approx(1.5) and specs[0].stale_after_s == 0.5
    assert specs[4].tare_samples == 200
