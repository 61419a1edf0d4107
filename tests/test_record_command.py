"""`ejecta record`: records the in-process simulated rig, refuses to overwrite, reports a missing port (exit 3)."""

from monitor.cli import main
from monitor.recorder.reader import RunLog


def test_record_the_simulated_rig(tmp_path, capsys):
    out = tmp_path / "run.ejlog"
    assert main(["record", "bench_nitrogen_1l", "--duration", "1", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert text.startswith(f"recording to {out}") and "0 bad" in text
    samples = RunLog.open(out).samples()
    assert 500 < len(samples) < 2000  # about a second at 1 kHz


def test_record_never_overwrites(tmp_path, capsys):
    out = tmp_path / "run.ejlog"
    out.write_text("precious")
    assert main(["record", "bench_nitrogen_1l", "--duration", "0.1", "--out", str(out)]) == 2
    assert "never overwrites" in capsys.readouterr().err
    assert out.read_text() == "precious"


def test_record_from_a_port_that_does_not_exist(tmp_path, capsys):
    code = main(
        [
            "record",
            "bench_nitrogen_1l",
            "--port",
            str(tmp_path / "ttyNOPE"),
            "--duration",
            "1",
            "--out",
            str(tmp_path / "x.ejlog"),
        ]
    )
    assert code == 3
    err = capsys.readouterr().err
    assert "ttyNOPE" in err and "Traceback" not in err
