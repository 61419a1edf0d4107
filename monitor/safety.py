"""The cautions ejecta shows wherever pressurised gas is involved, in one place so every screen says the same."""

from __future__ import annotations

MONITOR_NOT_INTERLOCK = (
    "ejecta is a monitor, not a safety interlock: it cannot close a valve or vent a tank, and a crashed "
    "laptop, a pulled cable or a missed alert must never be able to hurt anyone."
)

GENERAL_CAUTIONS: tuple[str, ...] = (
    "Pressurised gas can kill. A ruptured vessel or a whipping hose releases its stored energy at once.",
    "Never fill above the MEOP. Vessels, valves, hoses and fittings must be rated for it and the vessel "
    "proof-tested; a relief device set at or below the MEOP protects every part that can be isolated.",
    "Stay out of the line of fire of the bottle, the nozzle and every fitting while the system is under "
    "pressure. Never approach or touch an article during a test; vent it and confirm zero pressure first.",
    MONITOR_NOT_INTERLOCK,
    "Local pressure-equipment regulations and qualified, licensed practice decide what is safe; follow "
    "them over anything ejecta shows.",
)


def stored_energy_line(energy_j: float, tnt_kg: float, where: str) -> str:
    """One line stating a vessel's stored energy and its TNT equivalent."""
    return (
        f"Stored energy {where}: {energy_j / 1e3:,.1f} kJ (Brode), about {tnt_kg * 1e3:,.1f} g TNT equivalent "
        "(4.184 MJ/kg)."
    )
