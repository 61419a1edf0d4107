"""Tests of monitor.physics.energy: Brode and isentropic (ASME PCC-2) stored energy, TNT equivalent."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.errors import PhysicsError
from monitor.physics import energy

pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")

# Invented scenario: a 50 L bottle at 200 bar abs, vented to a sea-level standard atmosphere.
P_PA, PA_PA, V_M3 = 200.0e5, 101325.0, 0.050


def test_isentropic_energy_matches_pcc2_form_for_air():
    # ASME PCC-2, Article 501, gamma = 1.4: E = 2.5 p V [1 - (pa/p)^0.2857]. By hand:
    # pa/p = 101325 / 2.0e7 = 0.00506625; ln = -5.285154; x 0.2857 = -1.509969; exp = 0.220917;
    # 2.5 p V = 2.5e6 J; E = 2.5e6 x (1 - 0.220917) = 1.947708e6 J.
    # Tolerance 1e-4: PCC-2 rounds the exponent 2/7 to 0.2857 (a 2e-5 relative effect here).
    assert energy.isentropic_expansion_energy_j(P_PA, PA_PA, V_M3, 1.4) == pytest.approx(1.947708e6, rel=1e-4)


def test_brode_energy_by_hand():
    # Brode (1959): E = (p - pa) V / (gamma - 1) = (2.0e7 - 101325) x 0.05 / 0.4 = 2,487,334.375 J.
    assert energy.brode_energy_j(P_PA, PA_PA, V_M3, 1.4) == pytest.approx(2487334.375, rel=1e-12)


@settings(max_examples=200, deadline=None)
@given(st.floats(1.001, 1000.0), st.floats(1.05, 1.7), st.floats(1e-4, 10.0))
def test_brode_exceeds_isentropic_energy(pressure_ratio, gamma, volume_m3):
    # Known property: (1 - x) > (1 - x^k) for 0 < x < 1, 0 < k < 1, so the Brode energy bounds the
    # isentropic expansion energy from above for every vessel above ambient.
    p = pressure_ratio * PA_PA
    brode = energy.brode_energy_j(p, PA_PA, volume_m3, gamma)
    isentropic = energy.isentropic_expansion_energy_j(p, PA_PA, volume_m3, gamma)
    assert brode > isentropic > 0.0


def test_both_agree_when_expanding_to_vacuum():
    # With pa = 0 both reduce to the whole internal energy p V / (gamma - 1) (Brode 1959; PCC-2 form).
    expected = P_PA * V_M3 / 0.4
    assert energy.brode_energy_j(P_PA, 0.0, V_M3, 1.4) == pytest.approx(expected, rel=1e-12)
    assert energy.isentropic_expansion_energy_j(P_PA, 0.0, V_M3, 1.4) == pytest.approx(expected, rel=1e-12)


def test_zero_energy_at_or_below_ambient():
    pressures = np.array([PA_PA, 0.5 * PA_PA, 0.0])
    assert np.all(energy.brode_energy_j(pressures, PA_PA, V_M3, 1.4) == 0.0)
    assert np.all(energy.isentropic_expansion_energy_j(pressures, PA_PA, V_M3, 1.4) == 0.0)
    assert energy.isentropic_expansion_energy_j(0.0, 0.0, V_M3, 1.4) == 0.0


def test_tnt_equivalent_by_definition():
    # Conventional definition: 1 kg TNT equivalent = 4.184 MJ.
    assert energy.TNT_SPECIFIC_ENERGY_J_KG == 4.184e6
    assert energy.tnt_equivalent_kg(4.184e6) == pytest.approx(1.0, rel=1e-15)
    # The bottle above: 2,487,334.375 J / 4.184e6 J/kg = 0.594487 kg.
    brode = energy.brode_energy_j(P_PA, PA_PA, V_M3, 1.4)
    assert energy.tnt_equivalent_kg(brode) == pytest.approx(0.594487, rel=1e-6)


def test_energy_broadcasts():
    result = energy.brode_energy_j(np.array([[2e7], [3e7]]), PA_PA, np.array([0.01, 0.05, 0.1]), 1.4)
    assert result.shape == (2, 3)
    assert np.all(np.diff(result, axis=1) > 0.0) and np.all(np.diff(result, axis=0) > 0.0)


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: energy.brode_energy_j(-1.0, PA_PA, V_M3, 1.4), "pressure_pa"),
        (lambda: energy.brode_energy_j(P_PA, -1.0, V_M3, 1.4), "ambient_pressure_pa"),
        (lambda: energy.isentropic_expansion_energy_j(P_PA, PA_PA, -0.1, 1.4), "volume_m3"),
        (lambda: energy.isentropic_expansion_energy_j(P_PA, PA_PA, V_M3, 1.0), "gamma"),
        (lambda: energy.brode_energy_j(float("nan"), PA_PA, V_M3, 1.4), "pressure_pa"),
        (lambda: energy.tnt_equivalent_kg(-5.0), "energy_j"),
        (lambda: energy.tnt_equivalent_kg(float("inf")), "energy_j"),
    ],
)
def test_bad_input_raises_physics_error_naming_argument(call, name):
    with pytest.raises(PhysicsError, match=name):
        call()
