"""The review's JSON schema (as documented in docs/review.md), the self-contained HTML report in a real headless
browser, and `ejecta compare`."""

from __future__ import annotations

import base64
import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from monitor.cli import main
from monitor.review import review_log
from monitor.review.compare import render_compare_text
from monitor.review.render_json import to_dict, to_json
from monitor.review.report_html import render_html

ROOT = Path(__file__).resolve().parents[2]
LEAK_LOG = ROOT / "replay_logs" / "bench_leak_and_dropout.ejlog"
PULSE_LOG = ROOT / "replay_logs" / "bench_pulses.ejlog"
HOVER_LOG = ROOT / "replay_logs" / "hover_hops.ejlog"
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG specification (W3C/ISO 15948), section 5.2 signature
UNIT_SUFFIXES = ("_s", "_kg", "_kg_s", "_n", "_n_s", "_m_s", "_pa", "_std")
DIMENSIONLESS = {"duty_cycle", "total_impulse_ratio", "burn_time_ratio", "value", "threshold"}


def documented_keys() -> set[str]:
    text = (ROOT / "docs" / "review.md").read_text(encoding="utf-8")
    return set(re.findall(r"^\| `([^`]+)` \|", text, flags=re.M))


def flatten(data: dict, prefix: str = "") -> dict[str, object]:
    out: dict[str, object] = {}
    for key, value in data.items():
        name = prefix + key
        if isinstance(value, dict) and key not in ("alerts_raised", "bad_lines", "link_events"):
            out.update(flatten(value, name + "."))
        elif isinstance(value, list) and value and isinstance(value[0], dict):
            out.update(flatten(value[0], name + "[]."))
        else:
            out[name] = value
    return out


@pytest.fixture(scope="module")
def leak_review():
    return review_log(LEAK_LOG, with_prediction=True)


def test_json_has_every_documented_key_and_no_other(leak_review):
    keys = flatten(to_dict(leak_review.summary))
    plain = {k for k in keys if not k.endswith("_std")}
    documented = documented_keys() - {"prediction"}
    assert plain == documented
    for key, value in keys.items():
        leaf = key.rsplit(".", 1)[-1]
        if isinstance(value, float) and leaf not in DIMENSIONLESS:
            assert leaf.endswith(UNIT_SUFFIXES), f"{key} has no SI unit in its name"


def test_json_round_trips_and_is_strict(leak_review):
    text = to_json(leak_review.summary)
    data = json.loads(text)  # strict JSON: NaN became null
    assert data == to_dict(leak_review.summary)
    assert json.loads(json.dumps(data)) == data
    assert data["schema_version"] == 1
    assert data["thrust"]["total_impulse_measured_n_s"] > 0 and data["prediction"] is not None


def test_cli_json_on_a_stand_without_hover(capsys):
    assert main(["review", str(PULSE_LOG), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["flight"]["hover_endurance_left_s"] is None and data["prediction"] is None
    assert len(data["pulses"]) == data["firing"]["pulse_count"] == 6


def _check_self_contained(page: str, images: int) -> None:
    assert "http://" not in page and "https://" not in page and "<script" not in page
    uris = re.findall(r"<img [^>]*src='([^']+)'", page)
    assert len(uris) == images
    for uri in uris:
        assert uri.startswith("data:image/png;base64,")
        assert base64.b64decode(uri.split(",", 1)[1]).startswith(PNG_MAGIC)


def test_report_is_self_contained(tmp_path, capsys):
    report = tmp_path / "r.html"
    assert main(["review", str(LEAK_LOG), "--report", str(report), "--predict"]) == 0
    page = report.read_text(encoding="utf-8")
    _check_self_contained(page, 6)
    alts = re.findall(r"<img alt='([^']+)'", page)
    assert alts == ["Thrust", "Mass flow", "Tank and feed pressure", "Propellant in the tank by both gauges",
                    "Leak rate estimate", "Delivered Isp per pulse (at pulse start)"]
    assert "leak_suspected" in page and "prediction.total_impulse_ratio" in page


def test_report_opens_in_headless_chromium_and_its_images_load(tmp_path):
    chromium = shutil.which("chromium")
    if chromium is None:
        pytest.skip("Debian's chromium package is not installed (.ci/run installs it)")
    page = render_html([review_log(HOVER_LOG)])
    # A test-only copy that records, after load, whether each image decoded (naturalWidth > 0).
    probe = page.replace("</body>", "<script>window.addEventListener('load',()=>{document.body.setAttribute("
                                    "'data-images',[...document.images].map(i=>i.complete&&i.naturalWidth>0)"
                                    ".join(','));});</script></body>")
    path = tmp_path / "probe.html"
    path.write_text(probe, encoding="utf-8")
    result = subprocess.run(
        [chromium, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run", f"--user-data-dir={tmp_path / 'profile'}",
         "--virtual-time-budget=5000", "--dump-dom", path.as_uri()],
        capture_output=True, text=True, timeout=60,
    )
    match = re.search(r'data-images="([^"]*)"', result.stdout)
    assert match, f"chromium did not render the page: {result.stderr[-500:]}"
    flags = match.group(1).split(",")
    assert len(flags) == 6 and all(f == "true" for f in flags)


def test_compare_table_and_overlaid_report(tmp_path, capsys):
    report = tmp_path / "c.html"
    assert main(["compare", str(PULSE_LOG), str(LEAK_LOG), "--report", str(report)]) == 0
    out = capsys.readouterr().out
    header, *rows = out.splitlines()
    assert "bench_pulses.ejlog" in header and "bench_leak_and_dropout.ejlog" in header
    stale = next(r for r in rows if r.startswith("stale periods"))
    assert stale.split()[-2:] == ["0", "1"]  # the dropout run had one stale flow meter
    page = report.read_text(encoding="utf-8")
    _check_self_contained(page, 6)
    assert page.count("bench_leak_and_dropout.ejlog") >= 2


def test_compare_needs_two_logs_and_reads_json(capsys):
    assert main(["compare", str(PULSE_LOG)]) == 2
    capsys.readouterr()
    assert main(["compare", str(PULSE_LOG), str(HOVER_LOG), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["runs"] == ["bench_pulses.ejlog", "hover_hops.ejlog"] and len(data["summaries"]) == 2
    text = render_compare_text([review_log(PULSE_LOG), review_log(PULSE_LOG)])
    assert "1:bench_pulses.ejlog" in text and "2:bench_pulses.ejlog" in text
