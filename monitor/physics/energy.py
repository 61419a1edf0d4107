"""Stored energy of a pressurised gas vessel and its TNT equivalent, for the burst-hazard caution.

Two estimates of the energy a vessel releases if it bursts, both for an ideal gas of constant gamma:
  * Brode (1959), "Blast wave from a spherical charge": the internal energy above ambient,
    E = (p - pa) V / (gamma - 1). It is the larger, conservative figure.
  * ASME PCC-2, Article 501 (pneumatic testing): the work of an isentropic expansion to ambient,
    E = p V / (gamma - 1) [1 - (pa/p)^((gamma - 1)/gamma)];
    for gamma = 1.4 it reads 2.5 p V [1 - (pa/p)^0.2857].
Pressures are absolute, in Pa. A vessel at or below ambient stores no expansion energy in these models
(the implosion hazard of a vessel below ambient is not covered), so both return 0 there.
Every function takes floats or numpy arrays and returns arrays of the broadcast shape (0-d for scalars).
"""

from __future__ import annotations

import numpy as np

from monitor.physics.checks import checked as _checked

# Conventional definition of the TNT equivalent: 1 kg of TNT releases 4.184 MJ (1 kcal/g, thermochemical).
TNT_SPECIFIC_ENERGY_J_KG = 4.184e6


def _inputs(pressure_pa, ambient_pressure_pa, volume_m3, gamma):
    expect_pressure = "a finite absolute pressure of zero or more, Pa"
    p = _checked("pressure_pa", pressure_pa, expect_pressure, lambda a: a >= 0.0)
    pa = _checked("ambient_pressure_pa", ambient_pressure_pa, expect_pressure, lambda a: a >= 0.0)
    v = _checked("volume_m3", volume_m3, "a finite volume of zero or more, m^3", lambda a: a >= 0.0)
    g = _checked("gamma", gamma, "a finite ratio of specific heats above 1", lambda a: a > 1.0)
    return p, pa, v, g


def brode_energy_j(pressure_pa, ambient_pressure_pa, volume_m3, gamma) -> np.ndarray:
    """Brode energy E = (p - pa) V / (gamma - 1) (Brode 1959, "Blast wave from a spherical charge").

    Args:
        pressure_pa: absolute gas pressure in the vessel, Pa.
        ambient_pressure_pa: absolute ambient pressure, Pa.
        volume_m3: gas volume of the vessel, m^3.
        gamma: ratio of specific heats of the gas, above 1.

    Returns:
        Energy, J; 0 where the vessel is at or below ambient.

    Raises:
        PhysicsError: a negative or non-finite pressure or volume, or gamma <= 1.
    """
    p, pa, v, g = _inputs(pressure_pa, ambient_pressure_pa, volume_m3, gamma)
    return np.maximum(p - pa, 0.0) * v / (g - 1.0)


def isentropic_expansion_energy_j(pressure_pa, ambient_pressure_pa, volume_m3, gamma) -> np.ndarray:
    """Isentropic expansion work E = p V/(gamma-1) [1 - (pa/p)^((gamma-1)/gamma)] (ASME PCC-2, Article 501).

    Args:
        pressure_pa: absolute gas pressure in the vessel, Pa.
        ambient_pressure_pa: absolute ambient pressure, Pa (0 expands to vacuum).
        volume_m3: gas volume of the vessel, m^3.
        gamma: ratio of specific heats of the gas, above 1.

    Returns:
        Energy, J; 0 where the vessel is at or below ambient.

    Raises:
        PhysicsError: a negative or non-finite pressure or volume, or gamma <= 1.
    """
    p, pa, v, g = _inputs(pressure_pa, ambient_pressure_pa, volume_m3, gamma)
    above = p > pa
    ratio = np.divide(pa, p, out=np.ones(np.broadcast(pa, p).shape), where=above)
    energy = p * v / (g - 1.0) * (1.0 - ratio ** ((g - 1.0) / g))
    return np.where(above, energy, 0.0)


def tnt_equivalent_kg(energy_j) -> np.ndarray:
    """TNT-equivalent mass, energy / TNT_SPECIFIC_ENERGY_J_KG, kg (1 kg TNT = 4.184 MJ by convention).

    Raises:
        PhysicsError: a negative or non-finite energy.
    """
    energy = _checked("energy_j", energy_j, "a finite energy of zero or more, J", lambda a: a >= 0.0)
    return energy / TNT_SPECIFIC_ENERGY_J_KG
