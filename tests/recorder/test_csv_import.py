"""CSV import: another logger's file becomes a run log whose samples, raw lines and header are right.

Unit factors are checked against published definitions, not against pint:
  # NIST SP 811 (2008), Appendix B.8: 1 psi = 6.894 757 E+03 Pa; exactly 0.45359237 kg * 9.80665 m/s^2 / (0.0254 m)^2
  # NIST SP 811 (2008), Appendix B.8: 1 lbf = 4.448 222 E+00 N; exactly 0.45359237 kg * 9.80665 m/s^2
  # SI Brochure (9th ed., 2019), 2.3.1: t/degC = T/K - 273.15
  # Nitrogen at 0 C and 101.325 kPa: 1.2506 kg/m^3 (CRC Handbook of Chemistry and Physics, from memory)
"""

from __future__ import annotations

import re
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drivers.base import LineStatus
from monitor.config import parse_rig
from monitor.errors import ConfigError
from monitor.recorder import RunLog
from monitor.recorder.csv_import import import_csv
from monitor.samples import Quality

DATA = Path(__file__).resolve().parents[1] / "data"
FIXTURE = DATA / "other_logger_export.csv"

PSI_PA = 0.45359237 * 9.80665 / 0.0254**2
LBF_N = 0.45359237 * 9.80665
AMBIENT_PA = 101325.0  # the test rig's ambient_pressure = "101.325 kPa abs"
N2_0C_KG_M3 = 1.2506

# An invented stand, written out here so that the test does not depend on the demo rigs' contents.
RIG_TOML = """
format = 1

[rig]
name = "Import test stand: 2 L nitrogen"
kind = "stand"
gas = "nitrogen"
ambient_pressure = "101.325 kPa abs"
ambient_temperature = "20 C"

[tank]
volume = "2 L"
fill_pressure = "300 bar gauge"
fill_temperature = "20 C"
meop = "310 bar gauge"

[regulator]
set_pressure = "8 bar gauge"
min_inlet_pressure = "12 bar gauge"

[nozzle]
throat_diameter = "1.2 mm"
exit_diameter = "3 mm"

[vehicle]
dry_mass = "3 kg"
[[channels]]
name = "tank_pressure"
role = "tank_pressure"
field = "P_tank"
unit = "bar gauge"
calibration = { kind = "current_4_20", low = "0 bar gauge", high = "400 bar gauge" }
valid_range = ["-1 bar gauge", "420 bar gauge"]

[[channels]]
name = "thrust"
role = "thrust"
field = "load"
unit = "N"
calibration = { kind = "linear", gain = 1.0, offset = 0.0 }
tare = { samples = 200 }
"""

COLUMN_MAP = {
    "P_tank [psi]": ("tank_pressure", "psi gauge"),
    "T_tank [°C]": ("tank_temperature", "C"),
    "Thrust [lbf]": ("thrust", "lbf"),
    "Flow [SLPM]": {"name": "mass_flow", "unit": "SLPM", "flow_reference": "0C"},
}


@pytest.fixture(scope="module")
def rig():
    return parse_rig(RIG_TOML, "import_test_stand.toml")


def test_fixture_round_trip(tmp_path, rig):
    out = tmp_path / "imported.ejlog"
    summary = import_csv(FIXTURE, out, rig, COLUMN_MAP, "Time [ms]", "ms", skip_lines=2)
    assert (summary.lines, summary.good_lines, summary.bad_lines) == (8, 6, 2)
    log = RunLog.open(out)

    # Raw: every data line exactly as in the file (terminator CR LF removed), with its status.
    file_lines = FIXTURE.read_bytes().split(b"\r\n")[3:-1]
    raw = log.raw_lines()
    assert raw.lines == file_lines
    assert [LineStatus(s).name for s in raw.status] == [
        "OK", "OK", "OK", "OK", "BAD_NUMBER", "FIELD_COUNT", "OK", "OK"]

    s = log.samples()
    # times in ms divided by 1000 (correctly rounded, so these compare exactly)
    assert s["t_s"].tolist() == [0.0, 0.01, 0.02, 0.03, 0.06, 0.07]
    assert s["device_t_s"].tolist() == [120.0, 120.01, 120.02, 120.03, 120.06, 120.07]
    psi = np.array([2900, 2899.5, np.nan, 2898, np.nan, 2896.5])  # 6500 psi gauge is above 420 bar gauge
    assert np.allclose(s["tank_pressure_pa"], psi * PSI_PA + AMBIENT_PA, rtol=1e-12, equal_nan=True)
    assert s["tank_pressure_q"].tolist() == [0, 0, Quality.MISSING, 0, Quality.OUT_OF_RANGE, 0]
    assert np.allclose(s["tank_temperature_k"], np.array([20.5, 20.4, 20.3, np.nan, 20.1, 20.0]) + 273.15,
                       rtol=1e-13, equal_nan=True)
    assert s["tank_temperature_q"].tolist() == [0, 0, 0, Quality.NON_FINITE, 0, 0]
    assert np.allclose(s["thrust_n"], np.array([0, 1.25, 1.5, 1.5, 1.5, -0.25]) * LBF_N, rtol=1e-12)
    slpm_kg_s = 1e-3 / 60.0 * N2_0C_KG_M3
    assert np.allclose(s["mass_flow_kg_s"], np.array([0, 10, 10, 10.5, 11, 11]) * slpm_kg_s, rtol=1e-3)

    h = log.header
    assert h.rig_text == rig.text and h.started_utc is None and h.started_t_s == 0.0
    assert [c.column for c in h.channels] == ["tank_pressure_pa", "tank_temperature_k", "thrust_n",
                                              "mass_flow_kg_s"]
    lines = [v for k, v in h.extra if k == "import-line"]
    assert [line.encode("utf-8") for line in lines] == FIXTURE.read_bytes().split(b"\r\n")[:3]
    assert ("imported-from", "other_logger_export.csv") in h.extra

    # It replays like a native log: Batches keyed by channel name, in SI, on the log's time axis.
    batches = list(log.batches(4))
    assert [len(b) for b in batches] == [4, 2]
    assert batches[0].channels == ("tank_pressure", "tank_temperature", "thrust", "mass_flow")
    assert np.array_equal(batches[1].values["thrust"], s["thrust_n"].to_numpy()[4:])


def test_iso_timestamps_give_the_start_time(tmp_path, rig):
    csv_path = tmp_path / "stamped.csv"
    csv_path.write_text("when;F\n2025-03-01T10:15:02.000+01:00;1,5\n2025-03-01T10:15:02.250+01:00;2,5\n")
    out = tmp_path / "stamped.ejlog"
    import_csv(csv_path, out, rig, {"F": ("thrust", "N")}, "when", "iso8601", delimiter=";", decimal=",")
    log = RunLog.open(out)
    assert log.header.started_utc == datetime(2025, 3, 1, 9, 15, 2, tzinfo=timezone.utc)
    s = log.samples()
    assert s["t_s"].tolist() == [0.0, 0.25] and s["thrust_n"].tolist() == [1.5, 2.5]
    assert s["device_t_s"].isna().all()


def test_naive_timestamps_need_assume_utc(tmp_path, rig):
    csv_path = tmp_path / "naive.csv"
    csv_path.write_text("when,F\n2025-03-01 10:15:02,1\n")
    with pytest.raises(ConfigError, match="assume_utc"):
        import_csv(csv_path, tmp_path / "a.ejlog", rig, {"F": ("thrust", "N")}, "when", "iso8601")
    assert not (tmp_path / "a.ejlog").exists()
    import_csv(csv_path, tmp_path / "b.ejlog", rig, {"F": ("thrust", "N")}, "when", "iso8601", assume_utc=True)
    assert RunLog.open(tmp_path / "b.ejlog").header.started_utc == datetime(2025, 3, 1, 10, 15, 2,
                                                                            tzinfo=timezone.utc)


def test_standard_flow_needs_its_reference(tmp_path, rig):
    with pytest.raises(ConfigError, match=re.escape("column_map['Flow [SLPM]'].flow_reference")):
        import_csv(FIXTURE, tmp_path / "x.ejlog", rig, {"Flow [SLPM]": ("mass_flow", "SLPM")}, "Time [ms]", "ms",
                   skip_lines=2)


@pytest.mark.parametrize("column_map, time_column, words", [
    ({"P_tank [bar]": ("tank_pressure", "bar gauge")}, "Time [ms]", "column_map = 'P_tank [bar]'"),
    ({"P_tank [psi]": ("tank_pressure", "psi")}, "Time [ms]", "gauge"),  # a pressure must say gauge or abs
    ({"Thrust [lbf]": ("thrust", "psi gauge")}, "Time [ms]", "role"),  # the rig's thrust role wants a force
    ({"Thrust [lbf]": ("thrust", "lbf")}, "Time", "time_column = 'Time'"),
])
def test_bad_maps_are_refused_by_name(tmp_path, rig, column_map, time_column, words):
    out = tmp_path / "x.ejlog"
    with pytest.raises(ConfigError, match=re.escape(words)) as err:
        import_csv(FIXTURE, out, rig, column_map, time_column, "ms", skip_lines=2)
    assert "column_map" in str(err.value) or "time_column" in str(err.value)
    assert not out.exists()


def test_never_overwrites(tmp_path, rig):
    out = tmp_path / "x.ejlog"
    out.write_text("keep me")
    with pytest.raises(ConfigError, match="x.ejlog"):
        import_csv(FIXTURE, out, rig, {"Thrust [lbf]": ("thrust", "lbf")}, "Time [ms]", "ms", skip_lines=2)
    assert out.read_text() == "keep me"


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(values=st.lists(st.floats(allow_nan=False, allow_infinity=False, width=64), min_size=1, max_size=50))
def test_si_values_come_through_exactly(tmp_path_factory, rig, values):
    # A column already in newtons is scaled by exactly 1 (x * 1.0 + 0.0 is x in IEEE 754, but for -0.0).
    tmp = tmp_path_factory.mktemp("si")
    csv_path = tmp / "si.csv"
    csv_path.write_text("t,F\n" + "".join(f"{k},{v!r}\n" for k, v in enumerate(values)))
    import_csv(csv_path, tmp / "si.ejlog", rig, {"F": ("thrust", "N")}, "t", "s")
    got = RunLog.open(tmp / "si.ejlog").samples()["thrust_n"].to_numpy()
    want = np.array(values) + 0.0
    assert np.array_equal(got.view(np.int64), want.view(np.int64))
