"""Fixtures of the terminal-UI tests: the snapshot comparer and its explicit update flag."""

from __future__ import annotations

from pathlib import Path

import pytest

SNAPSHOTS = Path(__file__).with_name("snapshots")


def pytest_addoption(parser):
    parser.addoption("--update-ui-snapshots", action="store_true", default=False,
                     help="rewrite tests/ui/snapshots/ from the screens as they are now (review the diff!)")


@pytest.fixture
def ui_snapshot(request):
    """compare(name, text): the text must equal snapshots/<name>; with --update-ui-snapshots it is rewritten."""
    update = request.config.getoption("--update-ui-snapshots")

    def compare(name: str, text: str) -> None:
        path = SNAPSHOTS / name
        if update:
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(text, encoding="utf-8")
            return
        if not path.exists():
            pytest.fail(f"no snapshot {path}: run pytest tests/ui --update-ui-snapshots and review it")
        expected = path.read_text(encoding="utf-8")
        if text != expected:
            diff = [f"row {k}: expected {a!r}\n        got      {b!r}"
                    for k, (a, b) in enumerate(zip(expected.splitlines(), text.splitlines())) if a != b]
            pytest.fail(f"screen differs from {path.name} ({len(diff)} rows; --update-ui-snapshots accepts it):\n"
                        + "\n".join(diff[:8]))

    return compare
