"""Property, usable-mass and nozzle tables against CoolProp and the physics core they are built from."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from monitor.errors import PhysicsError
from monitor.estimators.tables import Grid2D, gas_tables, nozzle_tables, usable_density_table
from monitor.physics import nozzle
from monitor.physics.gas import gas_state
from monitor.physics.tank import TankPath, usable_mass_kg

P_GRID = (5e4, 3.3e7, 241)
T_GRID = (143.15, 373.15, 116)


@pytest.fixture(scope="module")
def nitrogen():
    return gas_tables("nitrogen", "real", P_GRID, T_GRID)


def test_density_and_gamma_follow_coolprop(nitrogen):
    rng = np.random.default_rng(3)
    p, t = rng.uniform(1e5, 3.2e7, 400), rng.uniform(200.0, 370.0, 400)
    # CoolProp's Helmholtz equation for nitrogen (Span et al. 2000) is the reference.
    reference = gas_state("nitrogen", "real", pressure=p, temperature=t)
    np.testing.assert_allclose(nitrogen.density_kg_m3(p, t), reference.density_kg_m3, rtol=2e-4)
    np.testing.assert_allclose(nitrogen.gamma(p, t), reference.gamma, atol=2e-3)
    # The table's own check value: 300 bar, 20 C gives 302.44 kg/m^3 (CoolProp; NIST WebBook from memory 302.4).
    assert float(nitrogen.density_kg_m3(300e5, 293.15)) == pytest.approx(302.44, rel=2e-4)
    assert np.isnan(nitrogen.density_kg_m3(5e7, 293.15))  # outside the table: unknown, not extrapolated


def test_throttled_temperature_is_coolprops_isenthalpic_state(nitrogen):
    rng = np.random.default_rng(4)
    p, t = rng.uniform(20e5, 3.0e7, 200), rng.uniform(250.0, 350.0, 200)
    h = gas_state("nitrogen", "real", pressure=p, temperature=t).enthalpy_j_kg
    outlet = np.full(p.shape, 7.0e5)
    # CoolProp's pressure-enthalpy flash at the outlet: Joule-Thomson cooling through the regulator.
    expected = gas_state("nitrogen", "real", pressure=outlet, enthalpy=h).temperature_k
    np.testing.assert_allclose(nitrogen.throttled_temperature_k(h, outlet, t), expected, atol=0.05)


@pytest.mark.parametrize(("expansion", "exponent"), [("isothermal", None), ("isentropic", None), ("polytropic", 1.25)])
def test_usable_mass_matches_the_tank_path(expansion, exponent):
    table = usable_density_table("nitrogen", "real", expansion, exponent, 11.0e5, (P_GRID[1], P_GRID[2]), T_GRID)
    rng = np.random.default_rng(5)
    for p, t in zip(rng.uniform(12e5, 3.0e7, 25), rng.uniform(230.0, 360.0, 25)):
        try:  # monitor.physics.tank, itself checked against closed forms and an ODE integration
            expected = usable_mass_kg(TankPath("nitrogen", 1e-3, p, t, expansion, exponent), 11.0e5)
        except PhysicsError:
            continue
        assert float(table(p, t)) * 1e-3 == pytest.approx(expected, rel=1e-3, abs=2e-6)
    assert float(table(11.0e5, 293.15)) == 0.0


def test_nozzle_tables_reproduce_nozzle_performance():
    eps, cd, angle, eff = 1.96, 0.95, math.radians(15.0), 0.97
    tables = nozzle_tables(eps, cd, angle, eff, (1.30, 1.70, 25))
    rng = np.random.default_rng(6)
    r, g = rng.uniform(0.0, 0.999, 300), rng.uniform(1.3, 1.7, 300)
    p0, t0, gas_r = 1.0e6, 280.0, 296.8
    perf = nozzle.nozzle_performance(p0, t0, g, gas_r, 1.0, eps, r * p0, cd, angle, eff)
    scale = math.sqrt(gas_r * t0)
    np.testing.assert_allclose(tables.velocity(r, g) * scale, perf.effective_exhaust_velocity_m_s, rtol=3e-3)
    np.testing.assert_allclose(tables.flow(r, g) * p0 / scale, perf.mass_flow_kg_s, rtol=3e-3)
    choked = tables.choked(r, g)
    assert np.array_equal(choked, perf.choked | (r <= 0.0))


def test_choked_flow_function_matches_naca_1135():
    # NACA Report 1135: the choked mass-flow function mdot sqrt(R T0) / (p0 A*) = sqrt(g) (2/(g+1))^((g+1)/(2(g-1)))
    # is 0.6847 for gamma = 1.4 (from memory; the formula gives 0.68473).
    tables = nozzle_tables(2.0, 1.0, 0.0, 1.0, (1.3, 1.5, 21))
    assert float(tables.flow(0.0, 1.4)) == pytest.approx(0.68473, rel=1e-4)
    assert float(tables.velocity(1.0, 1.4)) == 0.0  # no pressure difference, no flow


coefficient = st.floats(-100.0, 100.0)


@given(a=coefficient, b=coefficient, c=coefficient, d=coefficient, x=st.floats(0.0, 3.0), y=st.floats(10.0, 14.0))
def test_bilinear_functions_are_reproduced_exactly(a, b, c, d, x, y):
    # Bilinear interpolation is exact for f = a + b x + c y + d x y (its defining property).
    gx, gy = np.linspace(0.0, 3.0, 4), np.linspace(10.0, 14.0, 5)
    grid = Grid2D(gx, gy, a + b * gx[:, None] + c * gy[None, :] + d * gx[:, None] * gy[None, :])
    value, dx, dy = grid.evaluate(x, y)
    scale = 1.0 + abs(a) + abs(b) * 3 + abs(c) * 14 + abs(d) * 42
    assert float(value) == pytest.approx(a + b * x + c * y + d * x * y, abs=1e-12 * scale)
    assert float(dx) == pytest.approx(b + d * y, abs=1e-11 * scale)
    assert float(dy) == pytest.approx(c + d * x, abs=1e-11 * scale)
    assert math.isnan(float(grid(3.5, 12.0))) and math.isnan(float(grid(np.nan, 12.0)))
