"""First-order propagation of measurement uncertainty (GUM, JCGM 100:2008, section 5) and datasheet specs.

A Measured holds an estimate x and its standard uncertainty u(x) (one standard deviation, coverage factor
k = 1), as floats or as arrays of the same shape (a whole channel of samples at once). propagate applies the
law of propagation of uncertainty to any numpy-vectorised function, with sensitivity coefficients found by
central finite differences, so every physics function of ejecta can carry uncertainty without being
rewritten. The method is first order: it is good while the function is close to linear over a few u(x); a
Monte Carlo check (JCGM 101:2008) is the test for when it is not.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Literal

import numpy as np

from monitor.errors import PhysicsError

Distribution = Literal["rectangular", "normal"]
_DISTRIBUTIONS = ("rectangular", "normal")
# Tolerance for a correlation matrix that is positive semi-definite up to rounding.
_PSD_TOLERANCE = 1e-12


def _finite_array(name: str, value: object) -> np.ndarray:
    try:
        arr = np.array(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise PhysicsError(f"{name} = {value!r}: expected a number or an array of numbers") from exc
    if not np.all(np.isfinite(arr)):
        raise PhysicsError(f"{name} = {float(arr[~np.isfinite(arr)].flat[0])!r}: expected a finite number")
    return arr


def _non_negative_array(name: str, value: object) -> np.ndarray:
    arr = _finite_array(name, value)
    if np.any(arr < 0.0):
        first = float(arr[arr < 0.0].flat[0])
        raise PhysicsError(f"{name} = {first!r}: expected a standard uncertainty >= 0")
    return arr


@dataclass(frozen=True)
class Measured:
    """An estimate and its standard uncertainty u(x) (k = 1), in the same unit; arrays are broadcast together.

    Attributes:
        value: the estimate x, in its SI unit (float or array; stored as a read-only array).
        std_uncertainty: the standard uncertainty u(x), same unit, >= 0 (stored broadcast to value's shape).

    Raises:
        PhysicsError: non-finite values, a negative uncertainty, or shapes that do not broadcast.
    """

    value: np.ndarray
    std_uncertainty: np.ndarray

    def __post_init__(self) -> None:
        value = _finite_array("value", self.value)
        std = _non_negative_array("std_uncertainty", self.std_uncertainty)
        try:
            value, std = (np.array(a) for a in np.broadcast_arrays(value, std))
        except ValueError as exc:
            raise PhysicsError(
                f"value shape {value.shape} and std_uncertainty shape {std.shape} do not broadcast together"
            ) from exc
        value.flags.writeable = False
        std.flags.writeable = False
        object.__setattr__(self, "value", value)
        object.__setattr__(self, "std_uncertainty", std)

    @property
    def relative(self) -> np.ndarray:
        """Relative standard uncertainty u(x)/|x| (dimensionless; GUM 5.1.6).

        Raises:
            PhysicsError: the value is zero somewhere, where a relative uncertainty has no meaning.
        """
        if np.any(self.value == 0.0):
            raise PhysicsError("value = 0.0: a relative uncertainty needs a non-zero value")
        return np.asarray(self.std_uncertainty / np.abs(self.value))

    def expanded(self, k: float = 2.0) -> np.ndarray:
        """Expanded uncertainty U = k u(x), in the value's unit (GUM 6.2.1); k = 2: about 95 % for a normal.

        Raises:
            PhysicsError: k not positive and finite.
        """
        if not (math.isfinite(k) and k > 0.0):
            raise PhysicsError(f"k = {k!r}: expected a positive finite coverage factor")
        return np.asarray(k * self.std_uncertainty)


def combine_uncorrelated(*std_uncertainties) -> np.ndarray:
    """Root-sum-square of independent standard uncertainties of one quantity: sqrt(sum u_i^2).

    GUM eq. (10) with every sensitivity coefficient 1. Arguments broadcast together.

    Args:
        *std_uncertainties: standard uncertainties in one unit (floats or arrays, >= 0).

    Returns:
        Combined standard uncertainty, same unit.

    Raises:
        PhysicsError: no argument, a negative or non-finite uncertainty, or shapes that do not broadcast.
    """
    if not std_uncertainties:
        raise PhysicsError("combine_uncorrelated needs at least one standard uncertainty, got none")
    arrays = [_non_negative_array(f"std_uncertainties[{i}]", u) for i, u in enumerate(std_uncertainties)]
    try:
        stacked = np.broadcast_arrays(*arrays)
    except ValueError as exc:
        shapes = [a.shape for a in arrays]
        raise PhysicsError(f"std_uncertainties shapes {shapes} do not broadcast together") from exc
    return np.asarray(np.sqrt(sum(a * a for a in stacked)))


def sensor_std_uncertainty(
    reading,
    percent_of_reading: float = 0.0,
    percent_of_full_scale: float = 0.0,
    full_scale: float = 0.0,
    absolute: float = 0.0,
    distribution: Distribution = "rectangular",
) -> np.ndarray:
    """Standard uncertainty of a reading from a datasheet accuracy of the form +/-(% reading + % FS + a).

    The stated limits are added term by term, a = |reading| percent_of_reading/100 + full_scale
    percent_of_full_scale/100 + absolute, as datasheets intend them (common practice). Then:
    "rectangular": the reading lies anywhere within +/-a with equal probability, u = a/sqrt(3) (GUM 4.3.7);
    use it when the datasheet gives bare limits, which is the usual case. "normal": the limits are read
    as an expanded uncertainty with coverage factor k = 2 (about 95 %), u = a/2 (GUM 4.3.3); use it only
    when the datasheet says the accuracy is a 2-sigma or 95 % figure.

    Args:
        reading: the sensor's reading(s), in its SI unit.
        percent_of_reading: accuracy term in percent of reading (>= 0).
        percent_of_full_scale: accuracy term in percent of full scale (>= 0).
        full_scale: the sensor's full scale, same unit as reading (>= 0; > 0 if percent_of_full_scale is).
        absolute: fixed accuracy term, same unit as reading (>= 0).
        distribution: "rectangular" or "normal", as above.

    Returns:
        Standard uncertainty u, in the reading's unit, with the reading's shape.

    Raises:
        PhysicsError: a negative term, a percentage of full scale without the full scale, or an unknown
            distribution.
    """
    x = _finite_array("reading", reading)
    terms = {
        "percent_of_reading": percent_of_reading,
        "percent_of_full_scale": percent_of_full_scale,
        "full_scale": full_scale,
        "absolute": absolute,
    }
    for name, term in terms.items():
        if not (math.isfinite(term) and term >= 0.0):
            raise PhysicsError(f"{name} = {term!r}: expected a finite number >= 0")
    if percent_of_full_scale > 0.0 and full_scale == 0.0:
        raise PhysicsError(
            f"full_scale = {full_scale!r}: expected the sensor's full scale (> 0) "
            "when percent_of_full_scale is given"
        )
    if distribution not in _DISTRIBUTIONS:
        raise PhysicsError(f"distribution = {distribution!r}: expected 'rectangular' or 'normal'")
    half_width = (np.abs(x) * percent_of_reading + full_scale * percent_of_full_scale) / 100.0 + absolute
    divisor = math.sqrt(3.0) if distribution == "rectangular" else 2.0
    return np.asarray(half_width / divisor)


def _correlation_matrix(
    names: list[str], correlation: Mapping[tuple[str, str], float] | None
) -> np.ndarray:
    """Build the symmetric correlation matrix r_ij from the given pairs (unlisted pairs are 0)."""
    n = len(names)
    matrix = np.eye(n)
    if not correlation:
        return matrix
    index = {name: i for i, name in enumerate(names)}
    given: dict[tuple[int, int], float] = {}
    for pair, r in correlation.items():
        if not (isinstance(pair, tuple) and len(pair) == 2):
            raise PhysicsError(f"correlation key {pair!r}: expected a pair of input names such as ('a', 'b')")
        a, b = pair
        for name in (a, b):
            if name not in index:
                raise PhysicsError(
                    f"correlation key {pair!r}: {name!r} is not an input; expected names from {names}"
                )
        if a == b:
            raise PhysicsError(f"correlation key {pair!r}: an input's correlation with itself is always 1")
        try:
            r = float(r)
        except (TypeError, ValueError) as exc:
            raise PhysicsError(f"correlation {pair!r} = {r!r}: expected a number from -1 to 1") from exc
        if not (math.isfinite(r) and -1.0 <= r <= 1.0):
            raise PhysicsError(f"correlation {pair!r} = {r!r}: expected a number from -1 to 1")
        i, j = sorted((index[a], index[b]))
        if (i, j) in given and given[(i, j)] != r:
            raise PhysicsError(
                f"correlation {pair!r} is given twice with different values: {given[(i, j)]} and {r}"
            )
        given[(i, j)] = r
        matrix[i, j] = matrix[j, i] = r
    if np.linalg.eigvalsh(matrix).min() < -_PSD_TOLERANCE:
        raise PhysicsError(
            f"correlation {dict(correlation)!r}: these coefficients cannot hold together "
            "(the correlation matrix is not positive semi-definite)"
        )
    return matrix


def _evaluate(
    function: Callable[..., object], values: Mapping[str, np.ndarray], shape: tuple[int, ...]
) -> np.ndarray:
    try:
        with np.errstate(all="ignore"):
            result = np.asarray(function(**values), dtype=float)
    except PhysicsError:
        raise
    except (TypeError, ValueError) as exc:
        raise PhysicsError(f"the function could not be evaluated at the inputs: {exc}") from exc
    if result.shape != shape:
        raise PhysicsError(
            f"the function returned shape {result.shape} for inputs of shape {shape}: "
            "expected an element-by-element (numpy-vectorised) function giving one value per element"
        )
    return result


def sensitivity_coefficients(
    function: Callable[..., object], inputs: Mapping[str, Measured], relative_step: float = 1e-6
) -> dict[str, np.ndarray]:
    """Sensitivity coefficients c_i = df/dx_i at the estimates (GUM 5.1.3), by central finite differences.

    Each input is stepped by h = relative_step * max(|x_i|, u(x_i)), or by relative_step itself (in x_i's
    unit) where x_i and u(x_i) are both zero; such an input contributes nothing to the uncertainty. The
    derivative is (f(x_i + h) - f(x_i - h)) / (2 h), element by element, so function must act on each
    element of its array arguments independently, as numpy ufuncs do. Rounding limits the method: a term
    that changes y by less than about 1e-10 |y| across the step is lost, which is harmless for uncertainty
    (its contribution is as small) but means c_i is not a general-purpose derivative.

    Args:
        function: called as function(**values) with every input's value; returns y in its unit.
        inputs: name -> Measured, the names being function's keyword arguments.
        relative_step: relative size of the difference step (0 < step <= 0.01).

    Returns:
        name -> c_i, in y's unit per x_i's unit, with the inputs' broadcast shape.

    Raises:
        PhysicsError: no inputs, a bad step, shapes that do not broadcast, a function that fails, is not
            element by element, or gives a non-finite value or derivative.
    """
    values, stds, shape = _unpack(inputs)
    if not (math.isfinite(relative_step) and 0.0 < relative_step <= 0.01):
        raise PhysicsError(f"relative_step = {relative_step!r}: expected a number in (0, 0.01]")
    coefficients: dict[str, np.ndarray] = {}
    for name, x in values.items():
        h = relative_step * np.maximum(np.abs(x), stds[name])
        h = np.where(h > 0.0, h, relative_step)
        up, down = dict(values), dict(values)
        up[name], down[name] = x + h, x - h
        with np.errstate(all="ignore"):
            c = (_evaluate(function, up, shape) - _evaluate(function, down, shape)) / (up[name] - down[name])
        if not np.all(np.isfinite(c)):
            raise PhysicsError(
                f"the function's derivative with respect to {name!r} is not finite near {name} = "
                f"{float(x[~np.isfinite(c)].flat[0])!r}: expected a function smooth over x +/- "
                f"{relative_step:g} max(|x|, u(x))"
            )
        coefficients[name] = c
    return coefficients


def _unpack(
    inputs: Mapping[str, Measured],
) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray], tuple[int, ...]]:
    if not inputs:
        raise PhysicsError("inputs is empty: expected at least one name -> Measured")
    for name, m in inputs.items():
        if not isinstance(m, Measured):
            raise PhysicsError(f"inputs[{name!r}] = {m!r}: expected a Measured(value, std_uncertainty)")
    names = list(inputs)
    try:
        broadcast = np.broadcast_arrays(
            *(inputs[n].value for n in names), *(inputs[n].std_uncertainty for n in names)
        )
    except ValueError as exc:
        shapes = ", ".join(f"{n} {inputs[n].value.shape}" for n in names)
        raise PhysicsError(f"input shapes do not broadcast together: {shapes}") from exc
    values = {n: np.array(a) for n, a in zip(names, broadcast[: len(names)])}
    stds = {n: np.array(a) for n, a in zip(names, broadcast[len(names) :])}
    return values, stds, broadcast[0].shape


def propagate(
    function: Callable[..., object],
    inputs: Mapping[str, Measured],
    correlation: Mapping[tuple[str, str], float] | None = None,
    relative_step: float = 1e-6,
) -> Measured:
    """Estimate and combined standard uncertainty of y = f(x_1, ..., x_N) by the GUM law of propagation.

    u_c^2(y) = sum_i c_i^2 u^2(x_i) + 2 sum_{i<j} c_i c_j u(x_i) u(x_j) r(x_i, x_j), with c_i = df/dx_i
    (JCGM 100:2008, eq. (10) for independent inputs, eq. (13) and (16) with correlation; first order in the
    Taylor series of f). Sensitivity coefficients come from sensitivity_coefficients. With arrays of
    inputs, every element is an independent evaluation (many samples at once); the correlation
    coefficients apply to each element alike.

    Args:
        function: numpy-vectorised, element-by-element function called as function(**values).
        inputs: name -> Measured; the names are function's keyword arguments.
        correlation: (name_a, name_b) -> r(x_a, x_b) in [-1, 1]; unlisted pairs are uncorrelated.
        relative_step: relative finite-difference step (see sensitivity_coefficients).

    Returns:
        Measured(y, u_c(y)), in y's unit, with the inputs' broadcast shape.

    Raises:
        PhysicsError: see sensitivity_coefficients; also a correlation key that is not a pair of distinct
            input names, |r| > 1, or coefficients that cannot hold together (matrix not positive
            semi-definite).
    """
    values, stds, shape = _unpack(inputs)
    names = list(values)
    r = _correlation_matrix(names, correlation)
    y = _evaluate(function, values, shape)
    if not np.all(np.isfinite(y)):
        raise PhysicsError("the function gave a non-finite value at the input estimates")
    c = sensitivity_coefficients(function, inputs, relative_step)
    weighted = np.stack([c[n] * stds[n] for n in names])  # c_i u(x_i), shape (N, *shape)
    variance = np.einsum("i...,ij,j...->...", weighted, r, weighted)
    return Measured(value=np.array(y), std_uncertainty=np.sqrt(np.maximum(variance, 0.0)))
