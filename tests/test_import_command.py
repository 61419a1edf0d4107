"""`ejecta import`: another logger's CSV export becomes a run log that replays; mistakes exit 2 naming the option."""

import math
from pathlib import Path

import numpy as np
import pytest

from monitor.cli import main
from monitor.clock import FakeClock
from monitor.samples import Batch
from monitor.sources.replay import ReplaySource

FIXTURE = Path(__file__).parent / "data" / "other_logger_export.csv"
MAPS = [
    "--map",
    "P_tank [psi]=tank_pressure:psi gauge",
    "--map",
    "Thrust [lbf]=thrust:lbf",
    "--map",
    "Flow [SLPM]=mass_flow:SLPM",
]


def test_import_then_replay(tmp_path, capsys):
    out = tmp_path / "imported.ejlog"
    code = main(
        ["import", str(FIXTURE), "bench_nitrogen_1l", "--out", str(out), "--time", "Time [ms]:ms", "--skip-lines", "2", *MAPS]
    )
    assert code == 0
    assert "-> " in capsys.readouterr().out
    batch = Batch.concat(list(r.batch for r in ReplaySource(out, FakeClock(), speed=math.inf)))
    # 2900 psi gauge -> Pa absolute: 1 psi = 6894.757 Pa (NIST SP 811, B.8) plus the rig's 101.325 kPa ambient.
    assert batch.values["tank_pressure"][0] == pytest.approx(2900 * 6894.757293168 + 101325.0, rel=1e-12)
    # 1.25 lbf = 5.5603 N (1 lbf = 4.4482216152605 N, NIST SP 811, B.8)
    assert batch.values["thrust"][1] == pytest.approx(1.25 * 4.4482216152605, rel=1e-12)
    assert np.all(np.diff(batch.t_s) > 0)


@pytest.mark.parametrize(
    ("args", "key"),
    [
        (["--time", "Time [ms]"], "--time"),
        (["--time", "Time [ms]:ms", "--map", "nonsense"], "--map"),
        (["--time", "Nope:ms", "--map", "P_tank [psi]=tank_pressure:psi gauge"], "Nope"),
        (["--time", "Time [ms]:ms", "--map", "P_tank [psi]=tank_pressure:psi"], "gauge"),
    ],
)
def test_import_mistakes_exit_2(tmp_path, capsys, args, key):
    code = main(
        ["import", str(FIXTURE), "bench_nitrogen_1l", "--out", str(tmp_path / "x.ejlog"), "--skip-lines", "2", *args]
        + ([] if "--map" in args else MAPS)
    )
    assert code == 2
    err = capsys.readouterr().err
    assert key in err and "Traceback" not in err
