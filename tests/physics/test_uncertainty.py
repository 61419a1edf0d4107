"""Tests of monitor.physics.uncertainty against the GUM (JCGM 100:2008) and a JCGM 101:2008 Monte Carlo."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from monitor.errors import PhysicsError
from monitor.physics import rocket
from monitor.physics.uncertainty import (
    Measured,
    combine_uncorrelated,
    propagate,
    sensitivity_coefficients,
    sensor_std_uncertainty,
)

positive = st.floats(min_value=0.1, max_value=1000.0)
exponents = st.floats(min_value=-3.0, max_value=3.0).filter(lambda p: abs(p) > 1e-3)
relative = st.floats(min_value=1e-4, max_value=0.05)


@given(x1=positive, x2=positive, a=exponents, b=exponents, r1=relative, r2=relative)
def test_products_of_powers_relative_uncertainty(x1, x2, a, b, r1, r2):
    # GUM (JCGM 100:2008) 5.1.6: for Y = c X1^p1 X2^p2 with independent inputs,
    # (u_c(y)/y)^2 = (p1 u(x1)/x1)^2 + (p2 u(x2)/x2)^2.
    inputs = {"x1": Measured(x1, r1 * x1), "x2": Measured(x2, r2 * x2)}
    y = propagate(lambda x1, x2: 3.7 * x1**a * x2**b, inputs)
    assert y.value == pytest.approx(3.7 * x1**a * x2**b, rel=1e-14)
    assert y.relative == pytest.approx(math.hypot(a * r1, b * r2), rel=1e-6)


def test_full_correlation_adds_uncertainties_linearly():
    # GUM 5.2.2, note 1: with every r(xi, xj) = +1, u_c(y) = sum c_i u(x_i); for y = x1 + x2, u1 + u2.
    inputs = {"x1": Measured(10.0, 0.3), "x2": Measured(4.0, 0.4)}
    y = propagate(lambda x1, x2: x1 + x2, inputs, {("x1", "x2"): 1.0})
    assert y.value == pytest.approx(14.0)
    assert y.std_uncertainty == pytest.approx(0.7, rel=1e-9)
    # Uncorrelated, the same inputs add in quadrature (GUM eq. (10)): sqrt(0.09 + 0.16) = 0.5.
    assert propagate(lambda x1, x2: x1 + x2, inputs).std_uncertainty == pytest.approx(0.5, rel=1e-9)
    # Anti-correlated (r = -1), the difference of two equal-weight terms: |u1 - u2| = 0.1.
    anti = propagate(lambda x1, x2: x1 + x2, inputs, {("x2", "x1"): -1.0})
    assert anti.std_uncertainty == pytest.approx(0.1, rel=1e-7)


# Coefficients of a size that finite differences can resolve next to the value of y (not 1e-45).
coefficients = st.one_of(st.just(0.0), st.floats(0.01, 5.0), st.floats(-5.0, -0.01))


@given(c1=coefficients, c2=coefficients, u1=st.floats(0, 2), u2=st.floats(0, 2), r=st.floats(-1, 1))
def test_linear_function_matches_gum_equation_16(c1, c2, u1, u2, r):
    # GUM eq. (16): u_c^2 = c1^2 u1^2 + c2^2 u2^2 + 2 c1 c2 u1 u2 r12, exact for a linear function.
    inputs = {"a": Measured(1.5, u1), "b": Measured(-2.0, u2)}
    y = propagate(lambda a, b: c1 * a + c2 * b, inputs, {("a", "b"): r})
    expected_variance = c1**2 * u1**2 + c2**2 * u2**2 + 2 * c1 * c2 * u1 * u2 * r
    # Compare variances, with a tolerance on the scale of the terms (they can cancel to rounding noise).
    scale = (abs(c1) * u1 + abs(c2) * u2) ** 2
    assert y.std_uncertainty**2 == pytest.approx(expected_variance, rel=1e-6, abs=1e-9 * scale + 1e-300)


def test_first_order_agrees_with_monte_carlo_for_mildly_nonlinear_function():
    # JCGM 101:2008 (propagation of distributions by a Monte Carlo method): draw the inputs from their
    # (here normal, correlated) distributions, evaluate f, take the standard deviation of the results.
    # For a function close to linear over a few u(x) the GUM first-order result agrees within a few %.
    def f(p, t, d):
        return p * d**2 / np.sqrt(t)

    mean = np.array([2.0e5, 290.0, 1.2e-3])
    std = np.array([3.0e3, 4.0, 1.5e-5])
    r_pt = 0.4
    y = propagate(
        f,
        {"p": Measured(mean[0], std[0]), "t": Measured(mean[1], std[1]), "d": Measured(mean[2], std[2])},
        {("p", "t"): r_pt},
    )
    corr = np.eye(3)
    corr[0, 1] = corr[1, 0] = r_pt
    cov = corr * np.outer(std, std)
    rng = np.random.default_rng(20080901)
    draws = rng.multivariate_normal(mean, cov, size=400_000)
    samples = f(draws[:, 0], draws[:, 1], draws[:, 2])
    assert y.std_uncertainty == pytest.approx(samples.std(ddof=1), rel=0.03)
    assert y.value == pytest.approx(samples.mean(), rel=0.005)
    # The correlation matters here: ignoring it moves the answer by more than the tolerance.
    independent = propagate(
        f, {"p": Measured(mean[0], std[0]), "t": Measured(mean[1], std[1]), "d": Measured(mean[2], std[2])}
    )
    assert abs(independent.std_uncertainty / samples.std(ddof=1) - 1.0) > 0.03


def test_vectorised_inputs_give_per_element_results():
    # Each element of an array of inputs is its own evaluation: same result as one call per element.
    p = np.array([1.0e5, 2.0e5, 3.0e5, 4.0e5])
    u_p = np.array([1.0e3, 1.0e3, 3.0e3, 0.0])
    area = Measured(2.0e-6, 2.0e-8)
    y = propagate(lambda p, a: p * a, {"p": Measured(p, u_p), "a": area})
    assert y.value.shape == (4,) and y.std_uncertainty.shape == (4,)
    for i in range(4):
        one = propagate(lambda p, a: p * a, {"p": Measured(p[i], u_p[i]), "a": area})
        assert y.value[i] == pytest.approx(float(one.value), rel=1e-15)
        assert y.std_uncertainty[i] == pytest.approx(float(one.std_uncertainty), rel=1e-12)
    # GUM 5.1.6 for a product, element 0: sqrt(1 % ^2 + 1 % ^2) of 0.2 N.
    assert y.std_uncertainty[0] == pytest.approx(0.2 * math.sqrt(2.0) * 0.01, rel=1e-6)


def test_sensitivities_of_rocket_equation_match_hand_derivatives():
    # dv = u ln(m0/mf): d/du = ln(m0/mf), d/dm0 = u/m0, d/dmf = -u/mf (calculus, by hand).
    inputs = {
        "exhaust_velocity_m_s": Measured(700.0, 10.0),
        "initial_mass_kg": Measured(12.0, 0.01),
        "final_mass_kg": Measured(9.0, 0.01),
    }
    c = sensitivity_coefficients(rocket.delta_v_m_s, inputs)
    assert c["exhaust_velocity_m_s"] == pytest.approx(math.log(12.0 / 9.0), rel=1e-8)
    assert c["initial_mass_kg"] == pytest.approx(700.0 / 12.0, rel=1e-8)
    assert c["final_mass_kg"] == pytest.approx(-700.0 / 9.0, rel=1e-8)


def test_rectangular_datasheet_limits_divide_by_root_three():
    # GUM 4.3.7: a quantity equally likely anywhere in +/-a has u = a / sqrt(3). A 20 MPa transducer
    # specified +/-0.25 % FS has a = 50 kPa, u = 28.87 kPa.
    assert sensor_std_uncertainty(5.0e6, percent_of_full_scale=0.25, full_scale=20.0e6) == pytest.approx(
        50.0e3 / math.sqrt(3.0), rel=1e-12
    )
    # Cross-check with sampled uniform values: their standard deviation is a / sqrt(3).
    draws = np.random.default_rng(437).uniform(-50.0e3, 50.0e3, 400_000)
    assert draws.std() == pytest.approx(50.0e3 / math.sqrt(3.0), rel=0.005)


def test_datasheet_terms_add_before_conversion():
    # Common practice, no source: datasheet accuracy +/-(% reading + % FS) means the two limits add.
    # Reading 80 N on a 200 N load cell, +/-(0.5 % reading + 0.1 % FS) -> a = 0.4 + 0.2 = 0.6 N.
    readings = np.array([80.0, -80.0, 0.0])
    u = sensor_std_uncertainty(readings, 0.5, 0.1, 200.0)
    np.testing.assert_allclose(u, np.array([0.6, 0.6, 0.2]) / math.sqrt(3.0), rtol=1e-12)
    # "normal": limits read as k = 2 expanded uncertainty (GUM 4.3.3 with the stated multiple 2): a/2.
    u_normal = sensor_std_uncertainty(80.0, 0.5, 0.1, 200.0, absolute=0.1, distribution="normal")
    assert u_normal == pytest.approx(0.35, rel=1e-12)


def test_combine_uncorrelated_and_helpers():
    # GUM eq. (10) with unit sensitivities: 3 and 4 combine to 5 (root-sum-square).
    assert combine_uncorrelated(3.0, 4.0) == pytest.approx(5.0)
    np.testing.assert_allclose(combine_uncorrelated([3.0, 5.0], [4.0, 12.0]), [5.0, 13.0])
    m = Measured(250.0, 2.5)
    assert m.relative == pytest.approx(0.01)
    # GUM 6.2.1: U = k u_c.
    assert m.expanded() == pytest.approx(5.0)
    assert m.expanded(k=3) == pytest.approx(7.5)


@pytest.mark.parametrize(
    "call",
    [
        lambda: Measured(1.0, -0.1),
        lambda: Measured([1.0, 2.0], [0.1, 0.1, 0.1]),
        lambda: Measured(float("nan"), 0.1),
        lambda: Measured(0.0, 0.1).relative,
        lambda: Measured(1.0, 0.1).expanded(k=0.0),
        lambda: combine_uncorrelated(),
        lambda: combine_uncorrelated(1.0, -1.0),
        lambda: propagate(lambda a, b: a + b, {"a": Measured(1, 1), "b": Measured(1, 1)}, {("a", "b"): 1.2}),
        lambda: propagate(lambda a, b: a + b, {"a": Measured(1, 1), "b": Measured(1, 1)}, {("a", "c"): 0.5}),
        lambda: propagate(lambda a, b: a + b, {"a": Measured(1, 1), "b": Measured(1, 1)}, {("a", "a"): 0.5}),
        # Input names that are not the function's arguments.
        lambda: propagate(lambda a, b: a + b, {"a": Measured(1, 1), "c": Measured(1, 1)}),
        lambda: propagate(lambda a: a, {}),
        lambda: propagate(lambda a: np.sum(a), {"a": Measured([1.0, 2.0], 0.1)}),  # not element by element
        lambda: propagate(lambda a: np.sqrt(a), {"a": Measured(-1.0, 0.1)}),  # non-finite value
        lambda: propagate(lambda a: a, {"a": Measured(1.0, 0.1)}, relative_step=0.0),
        # Pairwise coefficients that cannot hold together (not positive semi-definite).
        lambda: propagate(
            lambda a, b, c: a + b + c,
            {n: Measured(1.0, 1.0) for n in "abc"},
            {("a", "b"): 0.9, ("a", "c"): 0.9, ("b", "c"): -0.9},
        ),
        lambda: sensor_std_uncertainty(1.0, percent_of_full_scale=0.1),  # full scale missing
        lambda: sensor_std_uncertainty(1.0, percent_of_reading=-0.1),
        lambda: sensor_std_uncertainty(1.0, 0.1, distribution="triangular"),
    ],
)
def test_bad_input_raises_physics_error(call):
    with pytest.raises(PhysicsError):
        call()
