"""`ejecta predict`: the numbers follow from the physics core, the JSON is complete, bad input exits 2."""

import json
import math

import pytest

from monitor.cli import main
from monitor.config import load_rig
from monitor.physics import energy, nozzle, rocket
from monitor.physics.gas import gas_state, ideal_gamma, specific_gas_constant_j_kg_k
from monitor.predict import predict
from monitor.rigs import bundled_rig_names, resolve_rig
from monitor.units import G0_M_S2


@pytest.fixture(scope="module", params=["bench_nitrogen_1l", "hover_air_3l"])
def rig_and_prediction(request):
    rig = load_rig(resolve_rig(request.param))
    return rig, predict(rig)


def test_set_point_numbers_follow_from_the_nozzle_relations(rig_and_prediction):
    rig, p = rig_and_prediction
    # Regulator throttling is isenthalpic (Joule-Thomson), so the feed is colder than the tank for N2 and air.
    tank = gas_state(rig.gas, "real", pressure=rig.tank.fill_pressure_pa, temperature=rig.tank.fill_temperature_k)
    feed = gas_state(rig.gas, "real", pressure=rig.regulator.set_pressure_pa, enthalpy=tank.enthalpy_j_kg)
    assert p.feed_temperature_k == pytest.approx(float(feed.temperature_k))
    assert p.feed_temperature_k < rig.tank.fill_temperature_k
    flow = nozzle.choked_mass_flow_kg_s(
        rig.regulator.set_pressure_pa,
        feed.temperature_k,
        rig.nozzle.throat_area_m2,
        feed.gamma,
        specific_gas_constant_j_kg_k(rig.gas),
        rig.nozzle.discharge_coefficient,
    )
    assert p.mass_flow_kg_s == pytest.approx(float(flow) * rig.nozzle.count, rel=1e-9)
    assert p.isp_s == pytest.approx(p.thrust_n / (p.mass_flow_kg_s * G0_M_S2), rel=1e-9)
    assert p.thrust_n < p.thrust_vacuum_n  # ambient pressure only ever takes thrust away


def test_propellant_bookkeeping(rig_and_prediction):
    _, p = rig_and_prediction
    assert p.propellant_usable_kg + p.propellant_below_regulator_kg == pytest.approx(p.propellant_loaded_kg)
    assert 0 < p.propellant_residual_kg < p.propellant_below_regulator_kg
    assert 0 < p.regulator_dropout_s < p.flow_end_s
    assert p.total_impulse_regulated_n_s < p.total_impulse_n_s < p.total_impulse_vacuum_n_s
    # While regulated the thrust is nearly constant: impulse ~ thrust x time (within the feed-temperature drift).
    assert p.total_impulse_regulated_n_s == pytest.approx(p.thrust_n * p.regulator_dropout_s, rel=0.1)


def test_flight_numbers_are_tsiolkovsky(rig_and_prediction):
    rig, p = rig_and_prediction
    mf = p.initial_mass_kg - p.propellant_usable_kg
    assert p.delta_v_m_s == pytest.approx(p.exhaust_velocity_m_s * math.log(p.initial_mass_kg / mf), rel=1e-12)
    assert p.delta_v_vertical_m_s == pytest.approx(p.delta_v_m_s - G0_M_S2 * p.regulator_dropout_s, rel=1e-12)
    if rig.kind == "hover_platform":
        assert p.thrust_to_weight > 1
        assert p.hover_endurance_s == pytest.approx(
            float(rocket.hover_endurance_s(p.exhaust_velocity_m_s, p.initial_mass_kg, mf))
        )
    else:
        assert p.hover_endurance_s is None


def test_stored_energy_uses_brode_at_meop(rig_and_prediction):
    rig, p = rig_and_prediction
    g = ideal_gamma(rig.gas)
    brode = (rig.tank.meop_pa - rig.ambient_pressure_pa) * rig.tank.volume_m3 / (g - 1)  # Brode (1959)
    assert p.stored_energy_meop_brode_j == pytest.approx(brode, rel=1e-12)
    assert p.tnt_equivalent_kg == pytest.approx(brode / 4.184e6, rel=1e-12)  # 4.184 MJ/kg by definition
    assert p.stored_energy_isentropic_j < p.stored_energy_brode_j
    assert energy.TNT_SPECIFIC_ENERGY_J_KG == 4.184e6


def test_cli_text_has_every_figure_and_the_cautions(capsys):
    assert main(["predict", "hover_air_3l"]) == 0
    out = capsys.readouterr().out
    for label in (
        "mass flow",
        "thrust",
        "Isp",
        "regulator drop-out",
        "total impulse",
        "delta-v",
        "hover endurance",
        "Stored energy",
        "MEOP",
        "not a safety interlock",
        "relief device",
        "licensed",
    ):
        assert label in out, label


def test_cli_json_has_si_keys_for_each_bundled_rig(capsys):
    for name in bundled_rig_names():
        assert main(["predict", name, "--json"]) == 0
        data = json.loads(capsys.readouterr().out)
        for key in (
            "mass_flow_kg_s",
            "thrust_n",
            "isp_s",
            "isp_vacuum_s",
            "regulator_dropout_s",
            "flow_end_s",
            "total_impulse_n_s",
            "propellant_usable_kg",
            "delta_v_m_s",
            "stored_energy_brode_j",
        ):
            assert isinstance(data[key], float) and math.isfinite(data[key]), key


def test_cli_bad_rig_exits_2_with_the_key(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(resolve_rig("bench_nitrogen_1l").read_text().replace('volume = "1.0 L"', 'volume = "1.0"'))
    assert main(["predict", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "tank.volume" in err and "Traceback" not in err
    assert main(["predict", str(tmp_path / "missing.toml")]) == 2


def test_cli_reports_a_condensing_expansion_as_a_rig_problem(tmp_path, capsys):
    # An isentropic draw of air from 300 bar down to the regulator's drop-out cools it into the two-phase region
    # (CoolProp, Lemmon et al. 2000 air); predict must say so instead of guessing.
    text = resolve_rig("hover_air_3l").read_text()
    text = text.replace('expansion = "polytropic"', 'expansion = "isentropic"').replace("polytropic_exponent = 1.25", "")
    text = text.replace('fill_pressure = "280 bar gauge"', 'fill_pressure = "300 bar gauge"')
    bad = tmp_path / "cold.toml"
    bad.write_text(text)
    assert main(["predict", str(bad)]) == 2
    assert "two-phase" in capsys.readouterr().err
