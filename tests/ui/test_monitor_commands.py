"""`ejecta demo`, `live` and `replay` refuse bad input with a message and an exit code before any screen starts."""

from __future__ import annotations

import re

import pytest

from monitor.cli import main
from monitor.rigs import resolve_rig

ROOT_LOGS = "replay_logs"


def _error(capsys) -> str:
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err + captured.out
    return captured.err


def test_replay_of_a_missing_log_exits_4_with_a_message(tmp_path, capsys):
    missing = tmp_path / "no_such_run.ejlog"
    assert main(["replay", str(missing)]) == 4
    err = _error(capsys)
    assert err.startswith("ejecta replay: ") and "no_such_run.ejlog" in err and "cannot read" in err


def test_replay_of_a_file_that_is_not_a_run_log_exits_4(tmp_path, capsys):
    path = tmp_path / "notes.ejlog"
    path.write_text("shopping list\nmilk\n", encoding="ascii")
    assert main(["replay", str(path)]) == 4
    assert "not an ejecta run log" in _error(capsys)


def _recorded_log(tmp_path):
    from monitor.demo_logs import DemoLog, make_demo_log

    return make_demo_log(DemoLog("short.ejlog", "bench_nitrogen_1l", None, "50 Hz"), tmp_path)


def test_replay_of_a_log_with_a_damaged_row_exits_4(tmp_path, capsys):
    path = _recorded_log(tmp_path)
    lines = path.read_text(encoding="ascii").splitlines(keepends=True)
    body = next(k for k, line in enumerate(lines) if line.startswith("s,"))
    lines[body + 3] = 's,1.0,"unfinished quote,,\n'
    damaged = tmp_path / "damaged.ejlog"
    damaged.write_text("".join(lines), encoding="ascii")
    assert main(["replay", str(damaged)]) == 4
    assert "damaged.ejlog" in _error(capsys)


def test_replay_of_a_log_cut_inside_its_header_exits_4(tmp_path, capsys):
    path = _recorded_log(tmp_path)
    cut = tmp_path / "cut.ejlog"
    cut.write_text("".join(path.read_text(encoding="ascii").splitlines(keepends=True)[:5]), encoding="ascii")
    assert main(["replay", str(cut)]) == 4
    assert "header" in _error(capsys)


def test_replay_of_a_log_whose_channels_are_not_its_rigs_exits_4(tmp_path, capsys):
    path = _recorded_log(tmp_path)
    text = path.read_text(encoding="ascii")
    renamed = tmp_path / "renamed.ejlog"
    # the rig file in the header calls its valve channel otherwise; the log's columns still say valve
    header_line = "# rig: name = \\x22valve\\x22\n"
    assert text.count(header_line) == 1
    renamed.write_text(text.replace(header_line, "# rig: name = \\x22valve_command\\x22\n"), encoding="ascii")
    assert main(["replay", str(renamed)]) == 4
    assert "'valve'" in _error(capsys)


@pytest.mark.parametrize("speed", ["0", "-2", "nan"])
def test_replay_speed_must_be_positive(speed, capsys):
    assert main(["replay", f"{ROOT_LOGS}/bench_pulses.ejlog", "--speed", speed]) == 2
    assert "--speed" in _error(capsys)


def test_demo_of_an_unknown_rig_exits_2(capsys):
    assert main(["demo", "no_such_rig"]) == 2
    assert "bench_nitrogen_1l" in _error(capsys)  # the message lists the bundled rigs


def test_demo_of_a_rig_on_real_sensors_exits_2(tmp_path, capsys):
    text = resolve_rig("bench_nitrogen_1l").read_text(encoding="utf-8")
    path = tmp_path / "serial.toml"
    serial = re.sub(r'(?m)^driver = "simulated"$', 'driver = "serial_lines"\nport = "/dev/null"', text)
    assert serial != text
    path.write_text(serial, encoding="utf-8")
    assert main(["demo", str(path)]) == 2
    assert "ejecta live" in _error(capsys)


def test_demo_of_an_unknown_scenario_exits_2(capsys):
    assert main(["demo", "--scenario", "no_such_scenario"]) == 2
    assert "no_such_scenario" in _error(capsys)


def test_demo_out_without_record_exits_2(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path / "x.ejlog")]) == 2
    assert "--record" in _error(capsys)
    assert not (tmp_path / "x.ejlog").exists()


def test_live_on_a_port_that_cannot_be_opened_exits_3_and_leaves_no_log(tmp_path, capsys):
    out = tmp_path / "run.ejlog"
    assert main(["live", "bench_nitrogen_1l", "--port", str(tmp_path / "no_such_tty"), "--out", str(out)]) == 3
    assert "no_such_tty" in _error(capsys)
    assert not out.exists()


def test_live_never_overwrites_a_log(tmp_path, capsys):
    out = tmp_path / "run.ejlog"
    out.write_text("precious\n", encoding="ascii")
    assert main(["live", "bench_nitrogen_1l", "--out", str(out)]) == 2
    assert "never overwrites" in _error(capsys)
    assert out.read_text(encoding="ascii") == "precious\n"
