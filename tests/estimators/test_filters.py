"""Streaming blocks: the low-pass against the Butterworth response, integrals and fits against numpy, chunking."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.estimators.filters import BlockMeans, Hold, Integral, LowPass
from monitor.estimators.propellant import WindowFits

RATE_HZ, CUTOFF_HZ = 1000.0, 10.0


def _chunks(n: int, cuts: list[int]) -> list[tuple[int, int]]:
    edges = sorted({0, n, *(c % (n + 1) for c in cuts)})
    return list(zip(edges[:-1], edges[1:]))


def test_butterworth_gain_and_delay():
    f = LowPass(1, CUTOFF_HZ)
    f.design(RATE_HZ)
    t = np.arange(20000) / RATE_HZ
    # A 2nd-order Butterworth low-pass passes DC unchanged and is 3 dB down (gain 1/sqrt(2)) at its cutoff
    # (Butterworth's maximally flat response, |H| = 1/sqrt(1 + (f/fc)^4); from memory).
    assert np.allclose(f(np.full((1, 500), 3.0)), 3.0, rtol=1e-12)
    for freq, gain in ((CUTOFF_HZ, 1 / math.sqrt(2)), (3 * CUTOFF_HZ, 1 / math.sqrt(1 + 3.0**4))):
        g = LowPass(1, CUTOFF_HZ)
        g.design(RATE_HZ)
        y = g(np.sin(2 * np.pi * freq * t)[None, :])[0, 10000:]
        assert np.max(np.abs(y)) == pytest.approx(gain, rel=0.01)
    # A ramp comes out late by the low-frequency group delay sqrt(2)/(2 pi fc) (H(s) = w^2/(s^2 + sqrt2 w s + w^2)).
    h = LowPass(1, CUTOFF_HZ)
    h.design(RATE_HZ)
    ramp = h(t[None, :])[0]
    assert t[-1] - ramp[-1] == pytest.approx(h.group_delay_s(), rel=0.01)
    assert h.group_delay_s() == pytest.approx(0.0225, rel=0.01)


def test_low_pass_passes_through_near_nyquist_and_starts_at_the_first_value():
    fast = LowPass(1, 450.0)
    fast.design(RATE_HZ)  # 450 Hz is not below 0.4 x 1 kHz: no filter
    x = np.random.default_rng(1).normal(size=(1, 50))
    assert np.array_equal(fast(x), x)
    f = LowPass(2, CUTOFF_HZ)
    f.design(RATE_HZ)
    y = f(np.array([[np.nan, np.nan, 5.0, 5.0], [1.0, 1.0, 1.0, 1.0]]))
    assert np.isnan(y[0, :2]).all() and np.allclose(y[0, 2:], 5.0) and np.allclose(y[1], 1.0)


@settings(max_examples=40, deadline=None)
@given(cuts=st.lists(st.integers(0, 400), max_size=12))
def test_chunking_changes_nothing(cuts):
    rng = np.random.default_rng(2)
    n = 400
    t = np.cumsum(rng.uniform(0.0005, 0.0015, n))
    x = rng.normal(size=(2, n))
    x[0, 50:70] = np.nan
    x[1, :30] = np.nan

    def run(pieces):
        hold, low, integral, means = Hold(2), LowPass(2, CUTOFF_HZ), Integral(2), BlockMeans(2, 0.02)
        low.design(RATE_HZ)
        out = {"held": [], "low": [], "integral": [], "means": [], "closed": []}
        closed_before = 0
        for a, b in pieces:
            held, _ = hold(t[a:b], x[:, a:b])
            out["held"].append(held)
            out["low"].append(low(held))
            out["integral"].append(integral(t[a:b], held))
            _, m, closed, _ = means(t[a:b], x[:, a:b])
            out["means"].append(m)
            out["closed"].append(closed + closed_before)
            closed_before += m.shape[1]
        return {k: np.concatenate(v, axis=-1) for k, v in out.items()}

    whole, cut = run([(0, n)]), run(_chunks(n, cuts))
    for key in whole:
        np.testing.assert_allclose(cut[key], whole[key], rtol=1e-12, atol=1e-12, err_msg=key)


def test_trapezoidal_integral_of_a_line_is_exact():
    t = np.linspace(0.0, 7.0, 701)
    integral = Integral(1)
    out = integral(t, (2.0 + 3.0 * t)[None, :])
    # Integral of a + b t from 0 to T is a T + b T^2 / 2; the trapezoidal rule is exact for a line.
    assert out[0, -1] == pytest.approx(2.0 * 7.0 + 1.5 * 49.0, rel=1e-13)
    # A step longer than max_step_s (a link gap) adds nothing.
    gapped = Integral(1, np.array([0.5]))
    out = gapped(np.array([0.0, 1.0, 2.0, 2.1]), np.ones((1, 4)))
    assert out[0, -1] == pytest.approx(0.1)


def test_block_means_are_means_over_the_time_grid():
    rng = np.random.default_rng(3)
    t = np.sort(rng.uniform(0.0, 1.0, 1000))
    x = rng.normal(size=(1, 1000))
    t_mean, means, closed, slots = BlockMeans(1, 0.1)(t, x)
    groups = np.floor(t / 0.1).astype(int)
    for k, slot in enumerate(slots):
        assert means[0, k] == pytest.approx(x[0, groups == slot].mean(), rel=1e-12)
        assert t_mean[k] == pytest.approx(t[groups == slot].mean(), rel=1e-12)
    assert slots.size == len(set(groups)) - 1  # the last block is still open
    assert closed[-1] == slots.size


def test_window_fit_matches_numpy_polyfit():
    rng = np.random.default_rng(4)
    t = np.arange(300) * 0.02
    y = 0.3 - 0.01 * t + rng.normal(0.0, 1e-3, 300)
    slots = np.arange(300)
    fits = WindowFits(1, 100)
    slope, se, n = fits(t[:150], slots[:150], y[None, :150])
    more_slope, more_se, more_n = fits(t[150:], slots[150:], y[None, 150:])
    window = slice(300 - 100, 300)
    # numpy.polyfit's least-squares line and its covariance (cov="unscaled" times the residual variance).
    coef, cov = np.polyfit(t[window], y[window], 1, cov=True)
    assert more_slope[0, -1] == pytest.approx(coef[0], rel=1e-9)
    assert more_se[0, -1] == pytest.approx(math.sqrt(cov[0, 0]), rel=1e-6)
    assert more_n[0, -1] == 100 and n[0, 0] == 1 and math.isnan(slope[0, 0])
