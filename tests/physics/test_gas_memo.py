"""The memo of gas states on disk: a stored result is bit for bit what the equation of state gives, failures
come back as the same error, damage and unwritable folders only cost a recomputation, and a command run again
for the same rig does not load CoolProp at all."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from monitor import gas_memo
from monitor.errors import PhysicsError
from monitor.physics import gas
from monitor.physics.gas import GasState, cacheable, gas_state

ROOT = Path(__file__).resolve().parents[2]
FIELDS = GasState.__dataclass_fields__


@pytest.fixture
def memo(tmp_path, monkeypatch):
    """A DiskStore in a fresh folder, installed in the physics core for the test."""
    folder = tmp_path / "memo"
    monkeypatch.setenv(gas_memo.MEMO_ENV, str(folder))
    previous = gas.install_store(gas_memo.DiskStore(folder))
    yield folder
    gas.install_store(previous)


def _grid():
    return np.linspace(1e5, 300e5, 7)[:, None], np.linspace(200.0, 350.0, 5)[None, :]


def test_a_remembered_state_is_the_equation_of_states_own_bit_for_bit(memo):
    p, t = _grid()
    direct = gas_state("nitrogen", pressure=p, temperature=t)  # CoolProp itself (not marked cacheable)
    assert not memo.exists()
    with cacheable():
        first = gas_state("nitrogen", pressure=p, temperature=t)  # computed and stored
        again = gas_state("nitrogen", pressure=p, temperature=t)  # read back
    assert len(list(memo.glob("*.npz"))) == 1
    for name in FIELDS:
        for state in (first, again):
            assert getattr(state, name).shape == (7, 5)
            assert getattr(state, name).tobytes() == getattr(direct, name).tobytes(), name


def test_a_failure_is_remembered_as_the_same_error(memo):
    liquid = dict(pressure=10e5, temperature=90.0)  # N2 at 90 K boils at about 3.6 bar (from memory): liquid at 10 bar
    with pytest.raises(PhysicsError) as direct:
        gas_state("nitrogen", **liquid)
    for _ in range(2):  # computed, then read back
        with cacheable(), pytest.raises(PhysicsError) as remembered:
            gas_state("nitrogen", **liquid)
        assert str(remembered.value) == str(direct.value)


def test_other_inputs_are_another_entry(memo):
    with cacheable():
        a = gas_state("nitrogen", pressure=10e5, temperature=300.0)
        b = gas_state("nitrogen", pressure=10e5, temperature=np.nextafter(300.0, 400.0))
        c = gas_state("air", pressure=10e5, temperature=300.0)
    assert len(list(memo.glob("*.npz"))) == 3
    assert a.density_kg_m3 != b.density_kg_m3 and a.density_kg_m3 != c.density_kg_m3


def test_a_damaged_entry_is_computed_again(memo):
    with cacheable():
        good = gas_state("argon", pressure=20e5, temperature=290.0)
        (entry,) = memo.glob("*.npz")
        entry.write_bytes(b"not a numpy file")
        again = gas_state("argon", pressure=20e5, temperature=290.0)
    assert again.density_kg_m3 == good.density_kg_m3
    assert entry.read_bytes()[:2] == b"PK"  # written again, whole (an .npz is a zip file)


def test_off_and_unwritable_and_unmarked_write_nothing(tmp_path, monkeypatch):
    previous = gas.install_store(None)
    try:
        monkeypatch.setenv(gas_memo.MEMO_ENV, "off")
        assert gas_memo.install_from_environment() is None
        with cacheable():
            gas_state("helium", pressure=5e5, temperature=300.0)
        blocker = tmp_path / "a file"
        blocker.write_text("in the way")
        monkeypatch.setenv(gas_memo.MEMO_ENV, str(blocker / "memo"))  # a folder that cannot be created
        gas_memo.install_from_environment()
        with cacheable():
            state = gas_state("helium", pressure=5e5, temperature=300.0)
        assert state.density_kg_m3 > 0 and not (blocker / "memo").exists()
        monkeypatch.setenv(gas_memo.MEMO_ENV, str(tmp_path / "memo"))
        gas_memo.install_from_environment()
        gas_state("helium", pressure=5e5, temperature=300.0)  # not marked cacheable: the store is not asked
        assert not (tmp_path / "memo").exists()
    finally:
        gas.install_store(previous)


def test_the_key_changes_with_what_the_result_depends_on(monkeypatch):
    key = gas_memo.key("gas_state", ("nitrogen", ("P", "T"), np.array([1.0]), np.array([2.0])))
    assert key != gas_memo.key("gas_state", ("nitrogen", ("P", "T"), np.array([1.0]), np.array([2.0000001])))
    assert key != gas_memo.key("gas_state", ("nitrogen", ("P", "T"), np.array([1.0, 1.0]), np.array([2.0])))
    monkeypatch.setattr(gas_memo, "_salt", lambda: b"another CoolProp or another gas.py")
    assert key != gas_memo.key("gas_state", ("nitrogen", ("P", "T"), np.array([1.0]), np.array([2.0])))


def test_a_review_run_again_gives_the_same_numbers_without_loading_coolprop(tmp_path):
    """Two fresh processes review the same demo log with an empty memo: the second never imports CoolProp."""
    code = """
import contextlib, io, json, sys
from monitor.cli import main
out = io.StringIO()
with contextlib.redirect_stdout(out):
    code = main(["review", sys.argv[1], "--json"])
print(json.dumps({"code": code, "coolprop": "CoolProp" in sys.modules, "review": json.loads(out.getvalue())}))
"""
    env = {**__import__("os").environ, gas_memo.MEMO_ENV: str(tmp_path / "memo")}
    runs = []
    for _ in range(2):
        done = subprocess.run([sys.executable, "-c", code, str(ROOT / "replay_logs" / "bench_leak_and_dropout.ejlog")],
                              cwd=ROOT, env=env, capture_output=True, text=True, timeout=300, check=True)
        runs.append(json.loads(done.stdout.strip().splitlines()[-1]))
    assert [r["code"] for r in runs] == [0, 0]
    assert runs[0]["coolprop"] and not runs[1]["coolprop"]
    assert runs[1]["review"] == runs[0]["review"]


def test_molar_mass_is_remembered_too(memo):
    gas.molar_mass_kg_mol.cache_clear()
    try:
        with cacheable():
            first = gas.molar_mass_kg_mol("nitrogen")
        gas.molar_mass_kg_mol.cache_clear()
        with cacheable():
            again = gas.molar_mass_kg_mol("nitrogen")
    finally:
        gas.molar_mass_kg_mol.cache_clear()
    # N2: 28.0134 g/mol from IUPAC atomic weights (from memory); Span et al. (2000) use 28.01348.
    assert first == again == pytest.approx(0.0280134, rel=1e-5)
    assert len(list(memo.glob("*.npz"))) == 1
