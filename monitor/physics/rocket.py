"""The rocket equation and what follows from it: delta-v, gravity loss, hover endurance, thrust, impulse.

Sources: K. E. Tsiolkovsky, "Exploration of cosmic space by means of reaction devices" (Nauchnoe Obozrenie,
1903) for the rocket equation; G. P. Sutton & O. Biblarz, Rocket Propulsion Elements, ch. 2 (definitions:
total impulse, specific impulse, effective exhaust velocity, momentum thrust) and ch. 4 (flight performance:
the rocket equation, gravity loss of a vertical burn), edition not checked.

Every function takes floats or numpy arrays (SI units) that broadcast together and returns an array of the
broadcast shape (0-d for scalars). Input that has no physical meaning raises PhysicsError; nothing returns
NaN. Masses are total vehicle masses: "initial" before the burn, "final" after it (dry mass plus payload plus
any propellant left).
"""

from __future__ import annotations

import numpy as np

from monitor.errors import PhysicsError
from monitor.units import G0_M_S2


def _checked(name: str, value: object, expectation: str = "finite") -> np.ndarray:
    """Return value as a float array, or raise PhysicsError naming the argument and the first bad element.

    expectation is one of "finite", "non-negative", "positive".
    """
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise PhysicsError(f"{name} = {value!r}: expected a number or an array of numbers") from exc
    bad = ~np.isfinite(arr)
    if expectation == "non-negative":
        bad |= arr < 0.0
    elif expectation == "positive":
        bad |= arr <= 0.0
    if bad.any():
        wanted = "a finite number" if expectation == "finite" else f"a {expectation} finite number"
        raise PhysicsError(f"{name} = {_first(arr, bad)!r}: expected {wanted}")
    return arr


def _first(arr: np.ndarray, mask: np.ndarray) -> float:
    """The first element of arr where mask is true, as a float (for error messages)."""
    return float(arr[mask].flat[0])


def _broadcast(**named: np.ndarray) -> list[np.ndarray]:
    """Broadcast the arrays together, or raise PhysicsError naming their shapes."""
    try:
        return list(np.broadcast_arrays(*named.values()))
    except ValueError as exc:
        shapes = ", ".join(f"{k} {np.shape(v)}" for k, v in named.items())
        raise PhysicsError(f"array shapes do not broadcast together: {shapes}") from exc


def _masses(initial_mass_kg: object, final_mass_kg: object) -> tuple[np.ndarray, np.ndarray]:
    """Check initial >= final > 0 and return both as broadcast arrays."""
    m0 = _checked("initial_mass_kg", initial_mass_kg, "positive")
    mf = _checked("final_mass_kg", final_mass_kg, "positive")
    m0, mf = _broadcast(initial_mass_kg=m0, final_mass_kg=mf)
    gained = mf > m0
    if gained.any():
        raise PhysicsError(
            f"final_mass_kg = {_first(mf, gained)!r} is above initial_mass_kg = {_first(m0, gained)!r}: "
            "expected final mass <= initial mass "
            "(a burn only expels mass)"
        )
    return m0, mf


def _log_mass_ratio(m0: np.ndarray, mf: np.ndarray) -> np.ndarray:
    """ln(m0/mf) as log1p(mp/mf): a small propellant mass keeps its precision; exactly 0 for mp = 0."""
    return np.log1p((m0 - mf) / mf)


def mass_ratio(initial_mass_kg, final_mass_kg) -> np.ndarray:
    """Initial over final mass, m0/mf (>= 1).

    Sutton & Biblarz (ch. 4, edition not checked) define their mass ratio the other way up, MR = mf/m0;
    this function is m0/mf, the form in Tsiolkovsky's equation dv = u ln(m0/mf).

    Args:
        initial_mass_kg: vehicle mass before the burn, kg (> 0).
        final_mass_kg: vehicle mass after the burn, kg (> 0, <= initial).

    Returns:
        m0/mf, dimensionless.

    Raises:
        PhysicsError: a non-positive or non-finite mass, or final above initial.
    """
    m0, mf = _masses(initial_mass_kg, final_mass_kg)
    return np.asarray(m0 / mf)


def delta_v_m_s(exhaust_velocity_m_s, initial_mass_kg, final_mass_kg) -> np.ndarray:
    """Ideal velocity change of a burn in free space: dv = u ln(m0/mf) (Tsiolkovsky 1903).

    Sutton & Biblarz, ch. 4 (flight performance, no gravity and no drag; edition not checked). Exactly 0
    when no propellant is burnt (m0 == mf).

    Args:
        exhaust_velocity_m_s: effective exhaust velocity u, m/s (> 0).
        initial_mass_kg: vehicle mass before the burn, m0, kg (> 0).
        final_mass_kg: vehicle mass after the burn, mf, kg (> 0, <= m0).

    Returns:
        Delta-v, m/s.

    Raises:
        PhysicsError: non-positive exhaust velocity or masses, or final mass above initial.
    """
    u = _checked("exhaust_velocity_m_s", exhaust_velocity_m_s, "positive")
    m0, mf = _masses(initial_mass_kg, final_mass_kg)
    u, m0, mf = _broadcast(exhaust_velocity_m_s=u, initial_mass_kg=m0, final_mass_kg=mf)
    return np.asarray(u * _log_mass_ratio(m0, mf))


def vertical_delta_v_m_s(
    exhaust_velocity_m_s, initial_mass_kg, final_mass_kg, burn_time_s, gravity_m_s2=G0_M_S2
) -> np.ndarray:
    """Velocity gained in a vertical burn under constant gravity, no drag: dv = u ln(m0/mf) - g t.

    Sutton & Biblarz, ch. 4 (gravity loss of a vertical trajectory; edition not checked), built on the rocket
    equation of Tsiolkovsky (1903). The gravity loss g t does not depend on how the propellant is spent in
    time, only on how long the burn lasts. A negative result means thrust never beat weight on average; a
    vehicle standing on the ground would simply not have lifted off.

    Args:
        exhaust_velocity_m_s: effective exhaust velocity u, m/s (> 0).
        initial_mass_kg: vehicle mass before the burn, kg (> 0).
        final_mass_kg: vehicle mass after the burn, kg (> 0, <= initial).
        burn_time_s: duration of the burn t, s (>= 0).
        gravity_m_s2: local gravitational acceleration g, m/s^2 (>= 0); standard gravity by default.

    Returns:
        Upward velocity change, m/s.

    Raises:
        PhysicsError: a bad exhaust velocity or mass (see delta_v_m_s), a negative burn time or gravity.
    """
    t = _checked("burn_time_s", burn_time_s, "non-negative")
    g = _checked("gravity_m_s2", gravity_m_s2, "non-negative")
    ideal = delta_v_m_s(exhaust_velocity_m_s, initial_mass_kg, final_mass_kg)
    ideal, t, g = _broadcast(delta_v=ideal, burn_time_s=t, gravity_m_s2=g)
    return np.asarray(ideal - g * t)


def burn_time_s(propellant_mass_kg, mass_flow_kg_s) -> np.ndarray:
    """Time to spend a propellant mass at a constant mass flow: t = mp / mdot.

    Definition of mass flow (Sutton & Biblarz, ch. 2; edition not checked). Zero flow is an ordinary state
    on a test stand (valve shut), so it is not an error: with propellant left and no flow the result is
    +inf (never empties); with no propellant left the result is 0 s whatever the flow.

    Args:
        propellant_mass_kg: propellant mass to spend, kg (>= 0).
        mass_flow_kg_s: propellant mass flow, kg/s (>= 0).

    Returns:
        Burn time, s (0 to +inf).

    Raises:
        PhysicsError: a negative or non-finite mass or flow.
    """
    mp = _checked("propellant_mass_kg", propellant_mass_kg, "non-negative")
    mdot = _checked("mass_flow_kg_s", mass_flow_kg_s, "non-negative")
    mp, mdot = _broadcast(propellant_mass_kg=mp, mass_flow_kg_s=mdot)
    flowing = mdot > 0.0
    out = np.where(mp > 0.0, np.inf, 0.0)
    np.divide(mp, mdot, out=out, where=flowing)
    return np.asarray(out)


def hover_endurance_s(
    exhaust_velocity_m_s, initial_mass_kg, final_mass_kg, gravity_m_s2=G0_M_S2
) -> np.ndarray:
    """How long a vehicle can hover on its thrust while its mass falls from m0 to mf: t = (u/g) ln(m0/mf).

    Derivation (from Tsiolkovsky's momentum balance, 1903): in a throttled hover the thrust always equals
    the weight, mdot u = m g, where mdot = -dm/dt is the propellant flow. Hence dm/dt = -m g / u, so
    dm/m = -(g/u) dt; integrating from m0 at t = 0 to mf at t gives ln(mf/m0) = -(g/u) t, that is
    t = (u/g) ln(m0/mf). Equivalently, the hover spends the vehicle's whole delta-v u ln(m0/mf) on gravity
    loss g t (Sutton & Biblarz, ch. 4, with dv = 0; edition not checked). Assumes constant u and g and no
    drag; the flow falls exponentially as the vehicle lightens.

    Args:
        exhaust_velocity_m_s: effective exhaust velocity u, m/s (> 0).
        initial_mass_kg: vehicle mass at the start of the hover, kg (> 0).
        final_mass_kg: vehicle mass when the usable propellant is gone, kg (> 0, <= initial).
        gravity_m_s2: local gravitational acceleration g, m/s^2 (> 0).

    Returns:
        Hover time, s.

    Raises:
        PhysicsError: a bad exhaust velocity or mass (see delta_v_m_s), or gravity not positive.
    """
    g = _checked("gravity_m_s2", gravity_m_s2, "positive")
    dv = delta_v_m_s(exhaust_velocity_m_s, initial_mass_kg, final_mass_kg)
    dv, g = _broadcast(delta_v=dv, gravity_m_s2=g)
    return np.asarray(dv / g)


def mass_ratio_for_delta_v(exhaust_velocity_m_s, delta_v_m_s) -> np.ndarray:
    """Initial-over-final mass ratio needed for a delta-v: m0/mf = exp(dv/u) (Tsiolkovsky 1903, inverted).

    Args:
        exhaust_velocity_m_s: effective exhaust velocity u, m/s (> 0).
        delta_v_m_s: required velocity change, m/s (>= 0).

    Returns:
        m0/mf, dimensionless (>= 1).

    Raises:
        PhysicsError: exhaust velocity not positive, a negative delta-v, or a ratio too large for a float.
    """
    u = _checked("exhaust_velocity_m_s", exhaust_velocity_m_s, "positive")
    dv = _checked("delta_v_m_s", delta_v_m_s, "non-negative")
    u, dv = _broadcast(exhaust_velocity_m_s=u, delta_v_m_s=dv)
    with np.errstate(over="ignore"):
        ratio = np.exp(dv / u)
    _reject_overflow(ratio, "mass ratio")
    return np.asarray(ratio)


def propellant_for_delta_v_kg(exhaust_velocity_m_s, final_mass_kg, delta_v_m_s) -> np.ndarray:
    """Propellant needed to give a vehicle of final (dry) mass mf a delta-v: mp = mf (exp(dv/u) - 1).

    The rocket equation of Tsiolkovsky (1903) solved for m0 - mf (Sutton & Biblarz, ch. 4; edition not
    checked). Written with expm1 so small delta-v keeps its precision; exactly 0 for dv = 0.

    Args:
        exhaust_velocity_m_s: effective exhaust velocity u, m/s (> 0).
        final_mass_kg: vehicle mass after the burn (dry mass plus payload plus reserve), kg (> 0).
        delta_v_m_s: required velocity change, m/s (>= 0).

    Returns:
        Propellant mass, kg.

    Raises:
        PhysicsError: exhaust velocity or final mass not positive, a negative delta-v, or a propellant mass
            too large for a float.
    """
    u = _checked("exhaust_velocity_m_s", exhaust_velocity_m_s, "positive")
    mf = _checked("final_mass_kg", final_mass_kg, "positive")
    dv = _checked("delta_v_m_s", delta_v_m_s, "non-negative")
    u, mf, dv = _broadcast(exhaust_velocity_m_s=u, final_mass_kg=mf, delta_v_m_s=dv)
    with np.errstate(over="ignore"):
        mp = mf * np.expm1(dv / u)
    _reject_overflow(mp, "propellant mass")
    return np.asarray(mp)


def _reject_overflow(result: np.ndarray, what: str) -> None:
    if not np.all(np.isfinite(result)):
        raise PhysicsError(f"{what} overflows a float: delta_v_m_s is hundreds of times exhaust_velocity_m_s")


def thrust_from_mass_flow_n(mass_flow_kg_s, exhaust_velocity_m_s) -> np.ndarray:
    """Momentum thrust of a jet: F = mdot u (Sutton & Biblarz, ch. 2; edition not checked).

    With u the effective exhaust velocity this is the whole thrust, pressure thrust included.

    Args:
        mass_flow_kg_s: propellant mass flow, kg/s (>= 0).
        exhaust_velocity_m_s: (effective) exhaust velocity, m/s (>= 0).

    Returns:
        Thrust, N.

    Raises:
        PhysicsError: a negative or non-finite flow or velocity.
    """
    mdot = _checked("mass_flow_kg_s", mass_flow_kg_s, "non-negative")
    u = _checked("exhaust_velocity_m_s", exhaust_velocity_m_s, "non-negative")
    mdot, u = _broadcast(mass_flow_kg_s=mdot, exhaust_velocity_m_s=u)
    return np.asarray(mdot * u)


def jet_reaction_on_plate_n(mass_flow_kg_s, velocity_m_s, restitution) -> np.ndarray:
    """Force of a jet meeting a surface head-on: F = mdot u (1 + e).

    Steady-flow linear-momentum balance on a control volume around the surface (e.g. F. M. White, Fluid
    Mechanics, ch. 3, jets striking plates and vanes; edition not checked): the jet arrives with momentum
    flux mdot u and leaves along the axis with mdot e u the other way. e = 0: the stream is stopped (a flat
    plate that spreads it sideways), F = mdot u. e = 1: the stream is turned straight back at full speed
    (an ideal 180-degree cup), F = 2 mdot u. The surface is taken as fixed and gravity and friction on the
    stream as negligible.

    Args:
        mass_flow_kg_s: mass flow of the jet, kg/s (>= 0).
        velocity_m_s: speed of the jet where it meets the surface, m/s (>= 0).
        restitution: fraction e of the arrival speed the stream leaves with, straight back (0 to 1).

    Returns:
        Force on the surface along the jet, N.

    Raises:
        PhysicsError: a negative flow or speed, or e outside 0..1.
    """
    mdot = _checked("mass_flow_kg_s", mass_flow_kg_s, "non-negative")
    u = _checked("velocity_m_s", velocity_m_s, "non-negative")
    e = _checked("restitution", restitution, "non-negative")
    if np.any(e > 1.0):
        raise PhysicsError(f"restitution = {_first(e, e > 1.0)!r}: expected 0 to 1")
    mdot, u, e = _broadcast(mass_flow_kg_s=mdot, velocity_m_s=u, restitution=e)
    return np.asarray(mdot * u * (1.0 + e))


def effective_exhaust_velocity_m_s(isp_s) -> np.ndarray:
    """Effective exhaust velocity c = Isp g0 (Sutton & Biblarz, ch. 2; edition not checked).

    g0 is standard gravity (9.80665 m/s^2) whatever the local gravity: Isp in seconds is defined with it.

    Args:
        isp_s: specific impulse, s (>= 0).

    Returns:
        Effective exhaust velocity, m/s.

    Raises:
        PhysicsError: a negative or non-finite Isp.
    """
    return np.asarray(_checked("isp_s", isp_s, "non-negative") * G0_M_S2)


def specific_impulse_s(exhaust_velocity_m_s) -> np.ndarray:
    """Specific impulse Isp = c / g0 (Sutton & Biblarz, ch. 2; edition not checked).

    Args:
        exhaust_velocity_m_s: effective exhaust velocity, m/s (>= 0).

    Returns:
        Specific impulse, s.

    Raises:
        PhysicsError: a negative or non-finite velocity.
    """
    return np.asarray(_checked("exhaust_velocity_m_s", exhaust_velocity_m_s, "non-negative") / G0_M_S2)


def total_impulse_n_s(thrust_n, t_s) -> np.ndarray:
    """Total impulse of a sampled thrust record: I = integral of F dt, by the trapezoidal rule.

    Definition from Sutton & Biblarz, ch. 2 (edition not checked); the trapezoidal rule is exact for thrust
    that varies linearly between samples.

    Args:
        thrust_n: thrust samples, N; the last axis is time, so a (k, n) array gives k impulses.
        t_s: sample times, s, non-decreasing, shape (n,) or the shape of thrust_n.

    Returns:
        Total impulse, N s, with the shape of thrust_n minus its last axis (0-d for one record).
        A record of a single sample gives 0.

    Raises:
        PhysicsError: non-finite samples, times that go backwards, no samples, or shapes that do not match.
    """
    f = _checked("thrust_n", thrust_n)
    t = _checked("t_s", t_s)
    if f.ndim == 0 or t.ndim == 0:
        raise PhysicsError("thrust_n and t_s: expected arrays of samples along time, got a single number")
    if f.shape[-1] == 0:
        raise PhysicsError("thrust_n: expected at least one sample, got none")
    if t.shape[-1] != f.shape[-1]:
        raise PhysicsError(
            f"t_s has {t.shape[-1]} samples but thrust_n has {f.shape[-1]}: "
            "expected one time per thrust sample"
        )
    f, t = _broadcast(thrust_n=f, t_s=t)
    dt = np.diff(t, axis=-1)
    if np.any(dt < 0.0):
        index = int(np.argwhere(dt < 0.0)[0][-1])
        raise PhysicsError(f"t_s goes backwards after sample {index}: expected non-decreasing times")
    return np.asarray(np.sum(0.5 * (f[..., 1:] + f[..., :-1]) * dt, axis=-1))
