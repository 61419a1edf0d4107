"""What a rig will do before it is fired: set-point performance, blowdown, propellant, delta-v, stored energy.

Pure: takes a Rig, returns a Prediction of plain numbers in SI units; the CLI formats it.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from monitor.config import Rig
from monitor.physics import energy, rocket
from monitor.physics.gas import gas_state, ideal_gamma
from monitor.physics.tank import Blowdown, FeedSystem, TankPath, predict_blowdown
from monitor.units import G0_M_S2


@dataclass(frozen=True)
class Prediction:
    """Predicted performance of one rig; every field is SI and named with its unit."""

    rig_name: str
    rig_kind: str
    gas: str
    gas_model: str
    # At the regulator set point, full tank:
    feed_pressure_pa: float
    feed_temperature_k: float
    mass_flow_kg_s: float
    thrust_n: float
    thrust_vacuum_n: float
    isp_s: float
    isp_vacuum_s: float
    exhaust_velocity_m_s: float  # effective, at the ambient pressure
    exit_mach: float
    exit_pressure_pa: float
    flow_separation_likely: bool
    # Propellant and blowdown (continuous firing):
    propellant_loaded_kg: float
    propellant_usable_kg: float  # expelled while the regulator holds its set point
    propellant_below_regulator_kg: float  # left when the regulator drops out
    propellant_residual_kg: float  # left when the flow stops
    regulator_dropout_s: float
    flow_end_s: float
    total_impulse_regulated_n_s: float
    total_impulse_n_s: float  # to the end of flow, at the ambient pressure
    total_impulse_vacuum_n_s: float
    # Flight (vehicle = dry mass + propellant):
    initial_mass_kg: float
    thrust_to_weight: float  # at the set point, full tank
    delta_v_m_s: float  # free space, usable propellant, Tsiolkovsky at the set-point exhaust velocity
    delta_v_vertical_m_s: float  # the same minus g0 * time to regulator drop-out
    hover_endurance_s: float | None  # only for a hovering platform; 0 when thrust < weight
    required_delta_v_m_s: float | None
    required_hover_time_s: float | None
    # Stored energy at fill pressure and at MEOP:
    fill_pressure_pa: float
    meop_pa: float
    proof_pressure_pa: float | None
    stored_energy_brode_j: float
    stored_energy_isentropic_j: float
    stored_energy_meop_brode_j: float
    tnt_equivalent_kg: float  # of the Brode energy at MEOP, the larger of the two expressions

    def to_dict(self) -> dict[str, object]:
        """Plain dict for JSON: keys carry their SI unit."""
        return asdict(self)


def tank_path(rig: Rig) -> TankPath:
    """The rig's tank as a TankPath starting from its fill state."""
    return TankPath(
        gas=rig.gas,
        volume_m3=rig.tank.volume_m3,
        initial_pressure_pa=rig.tank.fill_pressure_pa,
        initial_temperature_k=rig.tank.fill_temperature_k,
        expansion=rig.tank.expansion,
        polytropic_exponent=rig.tank.polytropic_exponent,
        model=rig.gas_model,
    )


def feed_system(rig: Rig) -> FeedSystem:
    """The rig's regulator and nozzles as a FeedSystem."""
    n = rig.nozzle
    return FeedSystem(
        set_pressure_pa=rig.regulator.set_pressure_pa,
        min_inlet_pressure_pa=rig.regulator.min_inlet_pressure_pa,
        throat_area_m2=n.throat_area_m2,
        exit_area_m2=n.exit_area_m2,
        ambient_pressure_pa=rig.ambient_pressure_pa,
        nozzle_count=n.count,
        discharge_coefficient=n.discharge_coefficient,
        divergence_half_angle_rad=n.divergence_half_angle_rad,
        thrust_efficiency=n.thrust_efficiency,
    )


def predict(rig: Rig, blowdown: Blowdown | None = None) -> Prediction:
    """Predict a rig's performance from its rig file (continuous firing from a full tank).

    Raises:
        PhysicsError: a state the gas model cannot give (e.g. the expansion path condenses the gas).
    """
    path, feed = tank_path(rig), feed_system(rig)
    blow = blowdown if blowdown is not None else predict_blowdown(path, feed)
    start = path.initial_state()
    throttled = gas_state(rig.gas, rig.gas_model, pressure=feed.set_pressure_pa, enthalpy=start.enthalpy_j_kg)
    perf = feed.nozzle_performance(rig.gas, throttled)
    count = feed.nozzle_count
    mdot, thrust, thrust_vac = (float(x) * count for x in (perf.mass_flow_kg_s, perf.thrust_n, perf.thrust_vacuum_n))
    u = float(perf.effective_exhaust_velocity_m_s)
    loaded = float(blow.tank_mass_kg[0])
    m0 = rig.vehicle.dry_mass_kg + loaded
    m_dropout = m0 - blow.usable_mass_kg
    dv = float(rocket.delta_v_m_s(u, m0, m_dropout))
    dv_vertical = float(rocket.vertical_delta_v_m_s(u, m0, m_dropout, blow.regulator_dropout_s))
    hover = None
    if rig.kind == "hover_platform":
        hover = float(rocket.hover_endurance_s(u, m0, m_dropout)) if thrust >= m0 * G0_M_S2 else 0.0
    gamma = ideal_gamma(rig.gas)
    t = rig.tank
    regulated = blow.regulated
    impulse_reg = float(np.trapezoid(blow.thrust_n[regulated], blow.time_s[regulated]))
    return Prediction(
        rig_name=rig.name,
        rig_kind=rig.kind,
        gas=rig.gas,
        gas_model=rig.gas_model,
        feed_pressure_pa=feed.set_pressure_pa,
        feed_temperature_k=float(throttled.temperature_k),
        mass_flow_kg_s=mdot,
        thrust_n=thrust,
        thrust_vacuum_n=thrust_vac,
        isp_s=float(perf.isp_s),
        isp_vacuum_s=float(perf.isp_vacuum_s),
        exhaust_velocity_m_s=u,
        exit_mach=float(perf.exit_mach),
        exit_pressure_pa=float(perf.exit_pressure_pa),
        flow_separation_likely=bool(perf.separation_likely),
        propellant_loaded_kg=loaded,
        propellant_usable_kg=blow.usable_mass_kg,
        propellant_below_regulator_kg=loaded - blow.usable_mass_kg,
        propellant_residual_kg=blow.residual_mass_kg,
        regulator_dropout_s=blow.regulator_dropout_s,
        flow_end_s=blow.flow_end_s,
        total_impulse_regulated_n_s=impulse_reg,
        total_impulse_n_s=blow.total_impulse_n_s,
        total_impulse_vacuum_n_s=blow.total_impulse_vacuum_n_s,
        initial_mass_kg=m0,
        thrust_to_weight=thrust / (m0 * G0_M_S2),
        delta_v_m_s=dv,
        delta_v_vertical_m_s=dv_vertical,
        hover_endurance_s=hover,
        required_delta_v_m_s=rig.vehicle.required_delta_v_m_s,
        required_hover_time_s=rig.vehicle.required_hover_time_s,
        fill_pressure_pa=t.fill_pressure_pa,
        meop_pa=t.meop_pa,
        proof_pressure_pa=t.proof_pressure_pa,
        stored_energy_brode_j=float(energy.brode_energy_j(t.fill_pressure_pa, rig.ambient_pressure_pa, t.volume_m3, gamma)),
        stored_energy_isentropic_j=float(
            energy.isentropic_expansion_energy_j(t.fill_pressure_pa, rig.ambient_pressure_pa, t.volume_m3, gamma)
        ),
        stored_energy_meop_brode_j=float(energy.brode_energy_j(t.meop_pa, rig.ambient_pressure_pa, t.volume_m3, gamma)),
        tnt_equivalent_kg=float(
            energy.tnt_equivalent_kg(energy.brode_energy_j(t.meop_pa, rig.ambient_pressure_pa, t.volume_m3, gamma))
        ),
    )
