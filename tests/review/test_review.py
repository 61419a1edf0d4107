"""`ejecta review`: the summary of a simulated run against the simulator's truth, damaged and empty logs, the CLI."""

from __future__ import annotations

import math
import shutil
from pathlib import Path

import pandas as pd
import pytest
from review_helpers import rig_text, simulate_log

from monitor.cli import main
from monitor.review import review_log
from monitor.review.render_text import render_text
from monitor.units import G0_M_S2

REPLAY_LOGS = Path(__file__).resolve().parents[2] / "replay_logs"


@pytest.fixture(scope="module")
def leak_run(tmp_path_factory):
    """The bench rig's leak-and-dropout scenario at 200 Hz, recorded, with the simulator's truth."""
    log = tmp_path_factory.mktemp("review") / "leak.ejlog"
    truth = simulate_log(rig_text("bench_nitrogen_1l"), log, "leak_and_dropout")
    return log, truth, review_log(log, with_prediction=True)


def test_review_matches_the_simulator_truth(leak_run):
    _, truth, review = leak_run
    s = review.summary
    # Ground truth: drivers.sim_model (checked in tests/physics against CoolProp's blowdown); 2 sigma = k = 2.
    assert s.thrust.total_impulse_measured_n_s == pytest.approx(truth.total_impulse_n_s,
                                                                abs=2 * s.thrust.total_impulse_measured_n_s_std)
    assert s.thrust.total_impulse_estimated_n_s == pytest.approx(truth.total_impulse_n_s,
                                                                 abs=2 * s.thrust.total_impulse_estimated_n_s_std)
    assert s.propellant.used_flow_gauge_kg == pytest.approx(truth.nozzle_mass_kg, abs=2 * s.propellant.used_flow_gauge_kg_std)
    # The PVT gauge sees the leak too: what left the tank, nozzle plus leak.
    assert s.propellant.used_pvt_gauge_kg == pytest.approx(truth.initial_mass_kg - truth.mass_kg,
                                                           abs=2 * s.propellant.used_pvt_gauge_kg_std)
    true_isp_s = truth.total_impulse_n_s / (G0_M_S2 * truth.nozzle_mass_kg)  # Isp = I / (g0 m), Sutton eq. 2-3 (from memory)
    assert s.isp.isp_delivered_mean_s == pytest.approx(true_isp_s, abs=2 * s.isp.isp_delivered_mean_s_std)
    # The scenario's own settings: five 1 s pulses from 2 s every 3 s, then 18 s to 28 s; 0.15 g/s leak.
    assert s.firing.pulse_count == 6
    assert s.firing.burn_time_s == pytest.approx(15.0, abs=0.02)
    assert [round(p.start_s, 2) for p in s.pulses] == [2.0, 5.0, 8.0, 11.0, 14.0, 18.0]
    assert [round(p.on_time_s, 2) for p in s.pulses] == [1.0] * 5 + [10.0]
    assert s.firing.duty_cycle == pytest.approx(15.0 / 26.0, rel=1e-3)
    assert s.propellant.leak_suspected
    assert s.propellant.leak_rate_kg_s == pytest.approx(0.15e-3, abs=3 * s.propellant.leak_rate_kg_s_std + 0.02e-3)
    assert s.alerts_raised.keys() == {"leak_suspected", "mass_flow_stale"}
    # The flow meter sends nan from 20 s to 24 s; stale after its 0.5 s stale_after.
    (stale,) = s.link.stale_periods
    assert stale.channel == "mass_flow" and 20.4 < stale.start_s < 20.6 and 23.9 < stale.end_s < 24.1


def test_pulses_add_up_to_the_totals(leak_run):
    _, _, review = leak_run
    s = review.summary
    assert sum(p.impulse_measured_n_s for p in s.pulses) == pytest.approx(s.thrust.total_impulse_measured_n_s,
                                                                          abs=3 * s.thrust.total_impulse_measured_n_s_std)
    for p in s.pulses:
        assert p.isp_delivered_s == pytest.approx(s.isp.isp_delivered_mean_s, rel=0.05)
        assert p.thrust_peak_measured_n > 0.5  # the rig's set-point thrust is 0.58 N (ejecta predict)


def test_prediction_ratios_near_one_for_the_simulated_rig(leak_run):
    _, _, review = leak_run
    c = review.summary.prediction
    # The simulator and the prediction share the physics core; the run starts from the rig's fill state.
    assert c.total_impulse_ratio == pytest.approx(1.0, abs=0.03)
    assert c.burn_time_ratio == pytest.approx(1.0, abs=0.03)
    assert "predicted_thrust_n" in review.series


def test_every_demo_log_reviews(tmp_path):
    for log in sorted(REPLAY_LOGS.glob("*.ejlog")):
        review = review_log(log)
        text = render_text(review.summary)
        assert "total impulse" in text and review.summary.firing.pulse_count > 0
        assert not review.summary.log.warnings


def test_hover_rig_gives_hover_endurance_and_the_stand_does_not():
    hover = review_log(REPLAY_LOGS / "hover_hops.ejlog").summary
    stand = review_log(REPLAY_LOGS / "bench_pulses.ejlog").summary
    assert hover.flight.hover_endurance_left_s > 0
    assert math.isnan(stand.flight.hover_endurance_left_s)


def test_truncated_log_reviews_with_a_warning(tmp_path):
    log = tmp_path / "cut.ejlog"
    data = (REPLAY_LOGS / "bench_pulses.ejlog").read_bytes()
    log.write_bytes(data[: len(data) // 2 + 17])  # cut mid-row, as a crash would
    s = review_log(log).summary
    assert any("unfinished row" in w for w in s.log.warnings)
    assert 0 < s.log.end_s < 20.0 and s.firing.pulse_count >= 4


def test_corrupted_row_reviews_up_to_it_and_names_the_line(tmp_path):
    log = tmp_path / "bad.ejlog"
    lines = (REPLAY_LOGS / "bench_pulses.ejlog").read_text().split("\n")
    header = next(i for i, line in enumerate(lines) if line.startswith("kind,"))
    bad = header + 2001  # a sample row at about 10 s
    lines[bad] = lines[bad].replace(",", ",xx", 3)
    log.write_text("\n".join(lines))
    s = review_log(log).summary
    (warning,) = s.log.warnings
    assert f"line {bad + 1}" in warning and "damaged row" in warning
    assert s.log.sample_count == 2000 - 1  # the rows before it are one 'e' row and 1999 samples
    assert s.log.end_s < 10.1 and s.firing.pulse_count == 3


def test_log_with_no_flow_gives_zeros(tmp_path):
    log = tmp_path / "still.ejlog"
    simulate_log(rig_text("bench_nitrogen_1l", no_firing=True, duration="3 s"), log)
    s = review_log(log, with_prediction=True).summary
    assert s.firing.burn_time_s == 0.0 and s.firing.pulse_count == 0 and s.pulses == ()
    assert s.firing.duty_cycle == 0.0 and s.isp.isp_estimated_mean_s == 0.0
    assert s.thrust.thrust_mean_estimated_n == 0.0 and s.flight.delta_v_achieved_m_s == 0.0
    assert abs(s.propellant.used_flow_gauge_kg) < 3 * s.propellant.used_flow_gauge_kg_std + 1e-6


def test_cli_review_text_and_bad_inputs(tmp_path, capsys):
    assert main(["review", str(REPLAY_LOGS / "bench_pulses.ejlog"), "--predict"]) == 0
    out = capsys.readouterr().out
    assert "burn time" in out and "measured / predicted" in out
    assert main(["review", str(tmp_path / "missing.ejlog")]) == 4
    assert "missing.ejlog" in capsys.readouterr().err
    other = tmp_path / "notes.txt"
    other.write_text("hello\n")
    assert main(["review", str(other)]) == 4
    assert "not an ejecta run log" in capsys.readouterr().err


def test_damaged_before_the_first_row_is_exit_4(tmp_path, capsys):
    log = tmp_path / "bad.ejlog"
    shutil.copy(REPLAY_LOGS / "bench_pulses.ejlog", log)
    lines = log.read_text().split("\n")
    header = next(i for i, line in enumerate(lines) if line.startswith("kind,"))
    lines[header + 1] = "Q" + lines[header + 1][1:]
    log.write_text("\n".join(lines))
    assert main(["review", str(log)]) == 4
    assert "no row before it" in capsys.readouterr().err


def test_a_log_imported_from_plain_csv_reviews_like_the_native_one(leak_run, tmp_path):
    """The leak run's samples exported as another system's CSV (other units, its own time column), imported
    with `ejecta import`'s function, and reviewed: the same figures, within their uncertainties."""
    from monitor.config import parse_rig
    from monitor.recorder import RunLog
    from monitor.recorder.csv_import import import_csv
    from monitor.samples import Quality

    log_path, truth, native = leak_run
    log = RunLog.open(log_path)
    rig = parse_rig(log.header.rig_text, "leak run rig")
    samples = log.samples()
    psi_pa = 6894.757293168361  # 1 psi = 6894.757... Pa (NIST SP 811, appendix B.8)
    lbf_n = 4.4482216152605  # 1 lbf = 4.4482216152605 N exactly (NIST SP 811, appendix B.8)
    columns = {
        "Time [ms]": (samples["t_s"] - samples["t_s"].iloc[0]) * 1e3,
        "P tank [psig]": (samples["tank_pressure_pa"] - rig.ambient_pressure_pa) / psi_pa,
        "P feed [bar]": samples["feed_pressure_pa"] / 1e5,
        "T tank [C]": samples["tank_temperature_k"] - 273.15,
        "Flow [g/s]": samples["mass_flow_kg_s"] * 1e3,
        # While ejecta tares the load cell its samples are flagged, not valued; the other system reports 0.
        "Thrust [lbf]": samples["thrust_n"].where(samples["thrust_q"] != int(Quality.TARING), 0.0) / lbf_n,
        "Valve": samples["valve"],
    }
    csv_path = tmp_path / "other_system.csv"
    pd.DataFrame(columns).to_csv(csv_path, index=False, na_rep="")
    column_map = {"P tank [psig]": ("tank_pressure", "psi gauge"), "P feed [bar]": ("feed_pressure", "bar abs"),
                  "T tank [C]": ("tank_temperature", "C"), "Flow [g/s]": ("mass_flow", "g/s"),
                  "Thrust [lbf]": ("thrust", "lbf"), "Valve": ("valve", "1")}
    imported_path = tmp_path / "imported.ejlog"
    import_csv(csv_path, imported_path, rig, column_map, "Time [ms]", "ms")

    s, n = review_log(imported_path).summary, native.summary
    assert s.link.lines == n.link.lines and s.firing.pulse_count == n.firing.pulse_count == 6
    assert s.firing.burn_time_s == pytest.approx(n.firing.burn_time_s, abs=0.02)
    for imported, original, std in (
        (s.thrust.total_impulse_measured_n_s, n.thrust.total_impulse_measured_n_s, n.thrust.total_impulse_measured_n_s_std),
        (s.thrust.total_impulse_estimated_n_s, n.thrust.total_impulse_estimated_n_s, n.thrust.total_impulse_estimated_n_s_std),
        (s.propellant.used_flow_gauge_kg, n.propellant.used_flow_gauge_kg, n.propellant.used_flow_gauge_kg_std),
        (s.propellant.used_pvt_gauge_kg, n.propellant.used_pvt_gauge_kg, n.propellant.used_pvt_gauge_kg_std),
    ):
        assert imported == pytest.approx(original, abs=0.1 * std)  # the same data: far inside the uncertainty
    assert s.thrust.total_impulse_measured_n_s == pytest.approx(truth.total_impulse_n_s,
                                                                abs=2 * s.thrust.total_impulse_measured_n_s_std)
    assert s.propellant.leak_suspected and s.alerts_raised.keys() == n.alerts_raised.keys()
    (stale,) = s.link.stale_periods
    assert stale.channel == "mass_flow" and stale.end_s - stale.start_s == pytest.approx(3.5, abs=0.15)
