"""Propellant gauges and the leak detector, on the series of block means (see monitor.estimators.filters).

Two independent gauges of the propellant in the tank:
* the PVT gauge, m = rho(p, T) V, real-gas density from the rig's gas model (tabulated);
* the flow gauge, m0 - integral of the measured mass flow, m0 being the PVT gauge at the first good block.
Their difference d = m_PVT - m_flow stays near zero unless mass leaves the tank without passing the flow
meter (a leak upstream of it) or a sensor is wrong. The leak rate is minus the slope of a least-squares
straight line through d over a trailing window; a leak is suspected when that rate exceeds both a threshold
and its coverage factor times its combined standard uncertainty (GUM, JCGM 100:2008 eq. 10):
u^2 = (fit standard error)^2 + (lag correction)^2 + (flow meter accuracy)^2 + (pressure transducer gain)^2.
Both gauges are corrected for first-order sensor lag (a thermometer of time constant tau_T reads
T - tau_T dT/dt; a flow meter's reading lags by tau_f dmdot/dt); the lag term is the slope, over the same
window, of what those corrections added to d, times their relative uncertainty.
"""

from __future__ import annotations

import numpy as np

from monitor.estimators.tables import GasTables


class WindowFits:
    """Least-squares straight lines y = a + b t through the trailing window of several block series.

    The window is `blocks` grid slots of the block grid (an integer, so which points a window holds never
    depends on how times round). Keeps that much history, so windows reach back across batches. NaN points
    are left out of the fit. Sums come from prefix sums over the history and the new points, with t and y
    measured from reference values to keep their precision.
    """

    def __init__(self, series: int, blocks: int):
        self.blocks = int(blocks)
        self.t = np.empty(0)
        self.slot = np.empty(0, dtype=np.int64)
        self.y = np.empty((series, 0))

    def __call__(self, t_s: np.ndarray, slot: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """New points (t_s (m,), block grid slots (m,), y (series, m)) -> (slope, its standard error, points
        used), each (series, m); the window of a point holds the points of the last `blocks` slots."""
        m = t_s.size
        if m == 0:
            empty = np.empty((self.y.shape[0], 0))
            return empty, empty, empty
        t = np.concatenate([self.t, t_s])
        slots = np.concatenate([self.slot, slot])
        ys = np.concatenate([self.y, y], axis=1)
        valid = np.isfinite(ys)
        x = t - t[0]
        first = np.where(valid.any(axis=1), valid.argmax(axis=1), 0)
        reference = np.where(valid.any(axis=1), ys[np.arange(ys.shape[0]), first], 0.0)
        yc = np.where(valid, ys - reference[:, None], 0.0)
        w = valid.astype(float)
        terms = np.stack([w, w * x, yc, w * x * x, x * yc, yc * yc])  # (6, series, points)
        prefix = np.concatenate([np.zeros(terms.shape[:2] + (1,)), np.cumsum(terms, axis=2)], axis=2)
        end = np.arange(self.t.size, t.size) + 1
        start = np.searchsorted(slots, slot - self.blocks, side="right")
        n, sx, sy, sxx, sxy, syy = prefix[:, :, end] - prefix[:, :, start]
        with np.errstate(invalid="ignore", divide="ignore"):
            spread = sxx - sx * sx / n
            slope = (sxy - sx * sy / n) / spread
            residual = np.maximum(syy - sy * sy / n - slope * (sxy - sx * sy / n), 0.0)
            se = np.sqrt(residual / (n - 2.0) / spread)
        slope = np.where(n >= 2, slope, np.nan)
        se = np.where(n >= 3, se, np.nan)
        keep = slots > slots[-1] - self.blocks
        self.t, self.slot, self.y = t[keep], slots[keep], ys[:, keep]
        return slope, se, n


def density_sensitivities(tables: GasTables, p_pa, t_k) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """rho (kg/m^3) and its sensitivity coefficients drho/dp (kg/m^3/Pa) and drho/dT (kg/m^3/K).

    From rho = p / (Z R T): drho/dp = rho/p - (rho/Z) dZ/dp and drho/dT = -rho/T - (rho/Z) dZ/dT, with the
    partial derivatives of the tabulated Z.
    """
    p, t = np.asarray(p_pa, dtype=float), np.asarray(t_k, dtype=float)
    z, dz_dp, dz_dt = tables.compressibility.evaluate(p, t)
    rho = p / (z * tables.gas_constant_j_kg_k * t)
    return rho, rho / p - rho / z * dz_dp, -rho / t - rho / z * dz_dt


def pvt_gauge_kg(tables: GasTables, p_pa, p_std_pa, t_k, t_std_k, volume_m3: float, volume_std_m3: float
                 ) -> tuple[np.ndarray, np.ndarray]:
    """m = rho(p, T) V and its standard uncertainty, kg.

    GUM (JCGM 100:2008) eq. 10 with independent inputs: u^2 = (V rho_p u_p)^2 + (V rho_T u_T)^2 + (rho u_V)^2.
    """
    rho, rho_p, rho_t = density_sensitivities(tables, p_pa, t_k)
    std = np.sqrt((volume_m3 * rho_p * p_std_pa) ** 2 + (volume_m3 * rho_t * t_std_k) ** 2
                  + (rho * volume_std_m3) ** 2)
    return rho * volume_m3, std


def gauge_difference_kg(tables: GasTables, now: tuple, start: tuple, volume_m3: float, volume_std_m3: float,
                        spent_kg, spent_std_kg) -> tuple[np.ndarray, np.ndarray]:
    """d = V (rho(p, T) - rho(p0, T0)) + spent: the PVT gauge minus the flow gauge, and its uncertainty, kg.

    now and start are (p Pa, u(p), T K, u(T)) of the current and of the first good block; spent is the flow
    integral since the first good block. The tank sensors' errors are taken as fully correlated between the
    two blocks (the same sensors' calibration errors: GUM eq. 16 with r = 1), so their offsets cancel:
    u^2 = V^2 (rho_p u_p - rho_p0 u_p0)^2 + V^2 (rho_T u_T - rho_T0 u_T0)^2 + ((rho - rho0) u_V)^2 + u_spent^2.
    """
    rho, rho_p, rho_t = density_sensitivities(tables, now[0], now[2])
    rho0, rho0_p, rho0_t = density_sensitivities(tables, start[0], start[2])
    value = volume_m3 * (rho - rho0) + spent_kg
    std = np.sqrt((volume_m3 * (rho_p * now[1] - rho0_p * start[1])) ** 2
                  + (volume_m3 * (rho_t * now[3] - rho0_t * start[3])) ** 2
                  + ((rho - rho0) * volume_std_m3) ** 2 + np.square(spent_std_kg))
    return value, std


class LeakDetector:
    """Leak rate from the slope of the gauge difference over a trailing window, and the suspicion rule.

    Args:
        window_s: span of the fit, s.
        threshold_kg_s: smallest leak rate worth suspecting, kg/s.
        coverage: k in "rate > k u(rate)".
        block_s: block length, s (a window needs half its blocks to judge).
        lag_relative_std: relative standard uncertainty of the sensor-lag corrections.
    """

    def __init__(self, window_s: float, threshold_kg_s: float, coverage: float, block_s: float,
                 lag_relative_std: float):
        self.fits = WindowFits(3, max(2, int(round(window_s / block_s))))
        self.threshold_kg_s, self.coverage, self.lag_relative_std = threshold_kg_s, coverage, lag_relative_std
        self.min_points = max(5, int(0.5 * window_s / block_s))

    def __call__(self, t_s, slot, difference_kg, lag_error_kg, pvt_kg, flow_std_kg_s, pressure_rel_std):
        """Per closed block -> (leak rate kg/s, its std kg/s, suspected 0/1 as float).

        Args:
            t_s: block times, s.
            slot: the blocks' grid indices.
            difference_kg: PVT gauge minus flow gauge, kg (NaN where unknown).
            lag_error_kg: what the sensor-lag corrections added to the difference, kg.
            pvt_kg: PVT gauge, kg.
            flow_std_kg_s: accuracy of the block's measured flow, kg/s (a systematic error biases the rate).
            pressure_rel_std: u(p)/p of the tank pressure (taken as a gain error of the PVT gauge's slope).
        """
        slope, se, n = self.fits(t_s, slot, np.vstack([difference_kg, lag_error_kg, pvt_kg]))
        rate = -slope[0]
        lag = self.lag_relative_std * slope[1]
        u = np.sqrt(se[0] ** 2 + lag**2 + flow_std_kg_s**2 + (slope[2] * pressure_rel_std) ** 2)
        enough = n[0] >= self.min_points
        rate = np.where(enough, rate, np.nan)
        u = np.where(enough, u, np.nan)
        with np.errstate(invalid="ignore"):
            suspected = (rate > self.threshold_kg_s) & (rate > self.coverage * u)
        return rate, u, suspected.astype(float)
