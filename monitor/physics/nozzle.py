"""Isentropic quasi-one-dimensional nozzle relations for a calorically perfect gas: flow, thrust, Isp.

Sources: NACA Report 1135 (Ames Research Staff, 1953), "Equations, tables, and charts for compressible
flow", for the isentropic relations, the area-Mach relation and the normal-shock pressure ratio; Sutton &
Biblarz, Rocket Propulsion Elements, ch. 3, for mass flow, thrust, the thrust coefficient, c*, the
divergence factor of a conical nozzle and the Summerfield separation criterion.

The gas is ideal with constant gamma and R. For a real-gas feed (a tank at several hundred bar) the common
practice, followed here, is to pass the gamma and R of the stagnation state. Every function takes floats or
numpy arrays in SI units, broadcasts them, and returns arrays of the broadcast shape (0-d for scalars).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from monitor.errors import PhysicsError
from monitor.physics.checks import checked as _checked
from monitor.units import G0_M_S2

# Summerfield criterion: flow separates from the wall once the full-flowing exit pressure falls below
# about 0.4 of ambient (Sutton & Biblarz, ch. 3; a rule of thumb, common practice).
SUMMERFIELD_SEPARATION_RATIO = 0.4
_MAX_BISECTIONS = 200


def _gamma(gamma) -> np.ndarray:
    return _checked("gamma", gamma, "a finite ratio of specific heats above 1", lambda a: a > 1.0)


def _nonnegative(name: str, value, unit: str) -> np.ndarray:
    return _checked(name, value, f"a finite value of zero or more, {unit}", lambda a: a >= 0.0)


def _positive(name: str, value, unit: str) -> np.ndarray:
    return _checked(name, value, f"a finite value above zero, {unit}", lambda a: a > 0.0)


def _fraction(name: str, value) -> np.ndarray:
    return _checked(name, value, "a finite value in (0, 1]", lambda a: (a > 0.0) & (a <= 1.0))


def _stagnation_term(mach, g):
    return 1.0 + 0.5 * (g - 1.0) * np.square(mach)


def _flow_factor(g):
    """(2/(g+1))^((g+1)/(2(g-1))): the choked-flow factor (Sutton & Biblarz, ch. 3)."""
    return (2.0 / (g + 1.0)) ** ((g + 1.0) / (2.0 * (g - 1.0)))


def critical_pressure_ratio(gamma) -> np.ndarray:
    """Sonic-throat pressure ratio p*/p0 = (2/(g+1))^(g/(g-1)) (NACA Report 1135)."""
    g = _gamma(gamma)
    return (2.0 / (g + 1.0)) ** (g / (g - 1.0))


def pressure_ratio(mach, gamma) -> np.ndarray:
    """Static over stagnation pressure p/p0 = (1 + (g-1)/2 M^2)^(-g/(g-1)) (NACA Report 1135)."""
    g = _gamma(gamma)
    m = _nonnegative("mach", mach, "dimensionless")
    return _stagnation_term(m, g) ** (-g / (g - 1.0))


def temperature_ratio(mach, gamma) -> np.ndarray:
    """Static over stagnation temperature T/T0 = 1/(1 + (g-1)/2 M^2) (NACA Report 1135)."""
    g = _gamma(gamma)
    return 1.0 / _stagnation_term(_nonnegative("mach", mach, "dimensionless"), g)


def density_ratio(mach, gamma) -> np.ndarray:
    """Static over stagnation density rho/rho0 = (1 + (g-1)/2 M^2)^(-1/(g-1)) (NACA Report 1135)."""
    g = _gamma(gamma)
    return _stagnation_term(_nonnegative("mach", mach, "dimensionless"), g) ** (-1.0 / (g - 1.0))


def area_ratio(mach, gamma) -> np.ndarray:
    """Area over sonic area A/A* = (1/M) [2/(g+1) (1 + (g-1)/2 M^2)]^((g+1)/(2(g-1))) (NACA Report 1135).

    Raises:
        PhysicsError: gamma <= 1, or a Mach number that is not positive and finite.
    """
    g = _gamma(gamma)
    m = _positive("mach", mach, "dimensionless")
    return (2.0 / (g + 1.0) * _stagnation_term(m, g)) ** ((g + 1.0) / (2.0 * (g - 1.0))) / m


def _log_area_ratio(log_mach, g):
    """ln(A/A*) as a function of ln M, free of overflow for any Mach number."""
    log_term = np.logaddexp(0.0, np.log(0.5 * (g - 1.0)) + 2.0 * log_mach)
    return -log_mach + (g + 1.0) / (2.0 * (g - 1.0)) * (np.log(2.0 / (g + 1.0)) + log_term)


def _solve_area_mach(ratio: np.ndarray, g: np.ndarray, supersonic: bool) -> np.ndarray:
    """Vectorised bisection on ln M; A/A* has its minimum, 1, at M = 1 and grows without bound either side."""
    target = np.log(ratio)
    far = np.full(ratio.shape, 1.0 if supersonic else -1.0)
    while np.any(short := _log_area_ratio(far, g) < target):
        far = np.where(short, 2.0 * far, far)
    near = np.zeros(ratio.shape)  # ln M = 0: A/A* = 1 <= target; far: A/A* >= target
    for _ in range(_MAX_BISECTIONS):
        mid = 0.5 * (near + far)
        below = _log_area_ratio(mid, g) < target
        near, far = np.where(below, mid, near), np.where(below, far, mid)
        if np.all(np.abs(far - near) <= 1e-15 * np.maximum(1.0, np.abs(near))):
            break
    return np.where(ratio == 1.0, 1.0, np.exp(0.5 * (near + far)))


def mach_from_area_ratio(area_ratio, gamma, supersonic: bool = True) -> np.ndarray:
    """Mach number from A/A* by inverting the area-Mach relation (NACA Report 1135).

    Solved by bisection on ln M, bracketed on the chosen branch for every element at once, so the root is
    found for any area ratio and gamma, without overflow, to about 1e-15 relative.

    Args:
        area_ratio: A/A*, 1 or more (dimensionless).
        gamma: ratio of specific heats, above 1.
        supersonic: True for the supersonic branch (M >= 1), False for the subsonic one (M <= 1).

    Returns:
        Mach number (dimensionless); exactly 1 where the area ratio is 1.

    Raises:
        PhysicsError: an area ratio below 1 or non-finite, or gamma <= 1.
    """
    ratio = _checked("area_ratio", area_ratio, "A/A* of 1 or more (finite)", lambda a: a >= 1.0)
    ratio, g = np.broadcast_arrays(ratio, _gamma(gamma))
    return _solve_area_mach(ratio, g, bool(supersonic))


def _mach_from_pressure_ratio(ratio, g):
    return np.sqrt(np.maximum(2.0 / (g - 1.0) * (ratio ** (-(g - 1.0) / g) - 1.0), 0.0))


def mach_from_pressure_ratio(p_over_p0, gamma) -> np.ndarray:
    """Mach number from p/p0, M = sqrt(2/(g-1) [(p/p0)^(-(g-1)/g) - 1]) (NACA Report 1135, inverted).

    Raises:
        PhysicsError: p/p0 outside (0, 1] or non-finite, or gamma <= 1.
    """
    g = _gamma(gamma)
    ratio = _checked("p_over_p0", p_over_p0, "a pressure ratio in (0, 1]", lambda a: (a > 0.0) & (a <= 1.0))
    return _mach_from_pressure_ratio(ratio, g)


def _choked_flow(p0, t0, area, g, r):
    return area * p0 * np.sqrt(g / (r * t0)) * _flow_factor(g)


def choked_mass_flow_kg_s(stagnation_pressure_pa, stagnation_temperature_k, throat_area_m2, gamma,
                          gas_constant_j_kg_k, discharge_coefficient=1.0) -> np.ndarray:
    """Mass flow through a sonic throat, mdot = Cd At p0 sqrt(g/(R T0)) (2/(g+1))^((g+1)/(2(g-1))).

    Source: Sutton & Biblarz, ch. 3. Args are absolute stagnation pressure (Pa), stagnation
    temperature (K), throat area (m^2), gamma, specific gas constant (J/(kg K)) and the discharge
    coefficient (in (0, 1]). Returns kg/s. Raises PhysicsError on any value out of range or non-finite.
    """
    p0 = _nonnegative("stagnation_pressure_pa", stagnation_pressure_pa, "Pa absolute")
    t0 = _positive("stagnation_temperature_k", stagnation_temperature_k, "K")
    area = _nonnegative("throat_area_m2", throat_area_m2, "m^2")
    r = _positive("gas_constant_j_kg_k", gas_constant_j_kg_k, "J/(kg K)")
    cd = _fraction("discharge_coefficient", discharge_coefficient)
    return cd * _choked_flow(p0, t0, area, _gamma(gamma), r)


def orifice_mass_flow_kg_s(stagnation_pressure_pa, stagnation_temperature_k, back_pressure_pa,
                           throat_area_m2, gamma, gas_constant_j_kg_k,
                           discharge_coefficient=1.0) -> np.ndarray:
    """Isentropic flow through a restriction into a back pressure, choked or not (Sutton & Biblarz, ch. 3).

    Choked (pb/p0 <= p*/p0): as choked_mass_flow_kg_s. Subsonic: mdot = Cd A p0 sqrt(2g/((g-1) R T0)
    [(pb/p0)^(2/g) - (pb/p0)^((g+1)/g)]), which meets the choked value at the critical ratio. No flow for
    pb >= p0 (reverse flow is not modelled). Pressures absolute in Pa, T0 in K, area in m^2, R in J/(kg K).

    Returns:
        Mass flow, kg/s.

    Raises:
        PhysicsError: a negative or non-finite pressure or area, T0 or R not positive, gamma <= 1,
            or a discharge coefficient outside (0, 1].
    """
    p0 = _nonnegative("stagnation_pressure_pa", stagnation_pressure_pa, "Pa absolute")
    t0 = _positive("stagnation_temperature_k", stagnation_temperature_k, "K")
    pb = _nonnegative("back_pressure_pa", back_pressure_pa, "Pa absolute")
    area = _nonnegative("throat_area_m2", throat_area_m2, "m^2")
    g = _gamma(gamma)
    r = _positive("gas_constant_j_kg_k", gas_constant_j_kg_k, "J/(kg K)")
    cd = _fraction("discharge_coefficient", discharge_coefficient)
    with np.errstate(over="ignore"):  # pb over a vanishing p0 is inf: no flow, as intended
        ratio = np.divide(pb, p0, out=np.full(np.broadcast(pb, p0).shape, np.inf), where=p0 > 0.0)
    critical = (2.0 / (g + 1.0)) ** (g / (g - 1.0))
    x = np.clip(ratio, critical, 1.0)
    subsonic = area * p0 * np.sqrt(2.0 * g / ((g - 1.0) * r * t0) * (x ** (2.0 / g) - x ** ((g + 1.0) / g)))
    flow = np.where(ratio <= critical, _choked_flow(p0, t0, area, g, r), subsonic)
    return cd * np.where(ratio >= 1.0, 0.0, flow)


def characteristic_velocity_m_s(stagnation_temperature_k, gamma, gas_constant_j_kg_k) -> np.ndarray:
    """c* = p0 At / mdot = sqrt(R T0 / g) / (2/(g+1))^((g+1)/(2(g-1))), m/s (Sutton & Biblarz, ch. 3).

    T0 in K, R in J/(kg K). Raises PhysicsError on T0 or R not positive, or gamma <= 1.
    """
    t0 = _positive("stagnation_temperature_k", stagnation_temperature_k, "K")
    g = _gamma(gamma)
    r = _positive("gas_constant_j_kg_k", gas_constant_j_kg_k, "J/(kg K)")
    return np.sqrt(r * t0 / g) / _flow_factor(g)


def divergence_factor(half_angle_rad) -> np.ndarray:
    """Momentum factor of a conical nozzle, lambda = (1 + cos a)/2 (Sutton & Biblarz, ch. 3).

    Raises:
        PhysicsError: a half-angle outside [0, pi/2) rad or non-finite.
    """
    a = _checked("half_angle_rad", half_angle_rad, "an angle in [0, pi/2) rad",
                 lambda x: (x >= 0.0) & (x < 0.5 * np.pi))
    return 0.5 * (1.0 + np.cos(a))


def thrust_coefficient(gamma, area_ratio, ambient_over_chamber_pressure) -> np.ndarray:
    """Ideal thrust coefficient Cf = F/(p0 At) of a full-flowing nozzle (Sutton & Biblarz, ch. 3).

    Cf = sqrt(2g^2/(g-1) (2/(g+1))^((g+1)/(g-1)) [1 - (pe/p0)^((g-1)/g)]) + (pe/p0 - pa/p0) Ae/At, with
    pe/p0 from the supersonic solution of the area ratio. Valid while no shock stands inside the nozzle;
    nozzle_performance handles the other regimes.

    Args:
        gamma: ratio of specific heats, above 1.
        area_ratio: exit over throat area Ae/At, 1 or more.
        ambient_over_chamber_pressure: pa/p0, zero or more (0 for vacuum).

    Returns:
        Cf (dimensionless).

    Raises:
        PhysicsError: gamma <= 1, an area ratio below 1, a negative or non-finite pressure ratio.
    """
    g = _gamma(gamma)
    eps = _checked("area_ratio", area_ratio, "Ae/At of 1 or more (finite)", lambda a: a >= 1.0)
    ambient = _nonnegative("ambient_over_chamber_pressure", ambient_over_chamber_pressure, "dimensionless")
    exit_ratio = _stagnation_term(mach_from_area_ratio(eps, g), g) ** (-g / (g - 1.0))
    momentum = 2.0 * g**2 / (g - 1.0) * _flow_factor(g) ** 2 * (1.0 - exit_ratio ** ((g - 1.0) / g))
    return np.sqrt(momentum) + (exit_ratio - ambient) * eps


@dataclass(frozen=True)
class NozzlePerformance:
    """Operating point(s) of a nozzle; every field is an array of the broadcast shape, SI units."""

    mass_flow_kg_s: np.ndarray
    exit_mach: np.ndarray
    exit_pressure_pa: np.ndarray
    exit_temperature_k: np.ndarray
    exit_velocity_m_s: np.ndarray
    thrust_vacuum_n: np.ndarray
    thrust_n: np.ndarray  # at the given ambient pressure
    thrust_coefficient_vacuum: np.ndarray  # thrust_vacuum_n / (p0 At), losses included
    thrust_coefficient: np.ndarray  # thrust_n / (p0 At), losses included
    characteristic_velocity_m_s: np.ndarray
    isp_vacuum_s: np.ndarray
    isp_s: np.ndarray
    effective_exhaust_velocity_m_s: np.ndarray  # thrust_n / mass flow, 0 without flow
    choked: np.ndarray  # bool: sonic throat
    separation_likely: np.ndarray  # bool: Summerfield criterion met


def _safe_ratio(numerator, denominator):
    return np.divide(numerator, denominator, out=np.zeros(np.shape(numerator)), where=denominator > 0.0)


def nozzle_performance(stagnation_pressure_pa, stagnation_temperature_k, gamma, gas_constant_j_kg_k,
                       throat_area_m2, exit_area_m2, ambient_pressure_pa, discharge_coefficient=1.0,
                       divergence_half_angle_rad=0.0, thrust_efficiency=1.0) -> NozzlePerformance:
    """Flow, exit state, thrust and Isp of a converging-diverging nozzle in every quasi-1-D regime.

    Model (NACA Report 1135 relations; Sutton & Biblarz, ch. 3, for thrust), with r = pa/p0:
      * r >= 1: no forward flow, zero thrust (reverse flow is not modelled).
      * r above the subsonic-exit ratio of Ae/At: throat not choked, subsonic isentropic flow through the
        whole nozzle, exit pressure = pa, mass flow from the exit area with the subsonic relation.
      * r between that and the ratio that puts a normal shock at the exit: throat choked, a normal shock
        stands in the divergent part; the exit is subsonic at pe = pa, its Mach number fixed by mass flow
        and the lower stagnation pressure behind the shock (closed form, T0 unchanged).
      * lower r: supersonic exit at the isentropic pe (over- or under-expanded).
    The exit state is that of the ideal geometry; the discharge coefficient scales the mass flow. Thrust is
    F = efficiency (lambda mdot ve + (pe - pa) Ae) with lambda = (1 + cos a)/2 in every regime; it is
    continuous in p0 across the regime boundaries for lambda = 1 (with lambda < 1 a step of (1 - lambda)
    mdot (u1 - u2) remains where the shock leaves the exit). separation_likely flags a choked nozzle whose
    full-flowing exit pressure is below 0.4 pa (Summerfield); the real thrust then departs from this model.
    gamma and R are those of the stagnation state (common practice for real-gas feeds).

    Args:
        stagnation_pressure_pa: absolute stagnation (chamber) pressure, Pa, zero or more.
        stagnation_temperature_k: stagnation temperature, K.
        gamma: ratio of specific heats, above 1.
        gas_constant_j_kg_k: specific gas constant, J/(kg K).
        throat_area_m2: geometric throat area, m^2, above zero.
        exit_area_m2: exit area, m^2, not below the throat area.
        ambient_pressure_pa: absolute ambient pressure, Pa, zero or more (0 for vacuum).
        discharge_coefficient: actual over ideal mass flow, in (0, 1].
        divergence_half_angle_rad: conical divergence half-angle, rad, in [0, pi/2).
        thrust_efficiency: remaining thrust losses as a factor, in (0, 1].

    Returns:
        NozzlePerformance; Isp uses G0_M_S2 and is 0 where there is no flow.

    Raises:
        PhysicsError: any argument out of range or non-finite, or an exit area below the throat area.
    """
    p0 = _nonnegative("stagnation_pressure_pa", stagnation_pressure_pa, "Pa absolute")
    t0 = _positive("stagnation_temperature_k", stagnation_temperature_k, "K")
    g = _gamma(gamma)
    r = _positive("gas_constant_j_kg_k", gas_constant_j_kg_k, "J/(kg K)")
    at = _positive("throat_area_m2", throat_area_m2, "m^2")
    ae = _positive("exit_area_m2", exit_area_m2, "m^2")
    pa = _nonnegative("ambient_pressure_pa", ambient_pressure_pa, "Pa absolute")
    cd = _fraction("discharge_coefficient", discharge_coefficient)
    lam = divergence_factor(divergence_half_angle_rad)
    eff = _fraction("thrust_efficiency", thrust_efficiency)
    p0, t0, g, r, at, ae, pa, cd, lam, eff = np.broadcast_arrays(p0, t0, g, r, at, ae, pa, cd, lam, eff)
    eps = ae / at
    if np.any(eps < 1.0):
        bad = int(np.flatnonzero(eps < 1.0)[0])
        raise PhysicsError(
            f"exit_area_m2 = {float(ae.flat[bad])!r}: expected at least "
            f"throat_area_m2 = {float(at.flat[bad])!r}"
        )

    m_sup = mach_from_area_ratio(eps, g, supersonic=True)
    m_sub = mach_from_area_ratio(eps, g, supersonic=False)
    pr_sup = _stagnation_term(m_sup, g) ** (-g / (g - 1.0))
    pr_sub = _stagnation_term(m_sub, g) ** (-g / (g - 1.0))
    shock_rise = (2.0 * g * m_sup**2 - (g - 1.0)) / (g + 1.0)  # normal-shock p2/p1, NACA Report 1135
    with np.errstate(over="ignore"):  # pa over a vanishing p0 is inf: no flow, as intended
        ratio = np.divide(pa, p0, out=np.full(p0.shape, np.inf), where=p0 > 0.0)

    flowing = ratio < 1.0
    choked = flowing & (ratio <= pr_sub)
    supersonic_exit = flowing & (ratio <= pr_sup * shock_rise)
    shock_inside = choked & ~supersonic_exit

    # Shock in the nozzle: pe Ae Me sqrt(1 + (g-1)/2 Me^2) = p0 At K, solved for Me^2 in stable form.
    q_sq = np.square(_safe_ratio(p0 * at * _flow_factor(g), np.where(shock_inside, pa * ae, 0.0)))
    me_shock = np.sqrt(2.0 * q_sq / (1.0 + np.sqrt(1.0 + 2.0 * (g - 1.0) * q_sq)))
    me_subsonic = _mach_from_pressure_ratio(np.clip(ratio, np.finfo(float).tiny, 1.0), g)
    exit_mach = np.select([supersonic_exit, shock_inside, flowing], [m_sup, me_shock, me_subsonic], 0.0)
    exit_pressure = np.where(supersonic_exit, pr_sup * p0, pa)
    exit_temperature = t0 / _stagnation_term(exit_mach, g)
    exit_velocity = exit_mach * np.sqrt(g * r * exit_temperature)
    ideal_choked = _choked_flow(p0, t0, at, g, r)
    unchoked = exit_pressure / (r * exit_temperature) * exit_velocity * ae
    mass_flow = cd * np.where(choked, ideal_choked, np.where(flowing, unchoked, 0.0))
    thrust = eff * (lam * mass_flow * exit_velocity + (exit_pressure - pa) * ae)

    ve_vacuum = m_sup * np.sqrt(g * r * t0 / _stagnation_term(m_sup, g))
    thrust_vacuum = eff * (lam * cd * ideal_choked * ve_vacuum + pr_sup * p0 * ae)
    c_eff = _safe_ratio(thrust, mass_flow)
    return NozzlePerformance(
        mass_flow_kg_s=mass_flow,
        exit_mach=exit_mach,
        exit_pressure_pa=exit_pressure,
        exit_temperature_k=exit_temperature,
        exit_velocity_m_s=exit_velocity,
        thrust_vacuum_n=thrust_vacuum,
        thrust_n=thrust,
        thrust_coefficient_vacuum=_safe_ratio(thrust_vacuum, p0 * at),
        thrust_coefficient=_safe_ratio(thrust, p0 * at),
        characteristic_velocity_m_s=np.sqrt(r * t0 / g) / _flow_factor(g),
        isp_vacuum_s=_safe_ratio(thrust_vacuum, cd * ideal_choked) / G0_M_S2,
        isp_s=c_eff / G0_M_S2,
        effective_exhaust_velocity_m_s=c_eff,
        choked=choked,
        separation_likely=choked & (pr_sup * p0 < SUMMERFIELD_SEPARATION_RATIO * pa),
    )
