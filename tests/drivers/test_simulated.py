"""The simulated rig: truth against the physics core, sensors against their transfer functions, faults in the lines."""

import copy
import dataclasses

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drivers.base import LineStatus
from drivers.line_parsing import parse_lines
from drivers.serial_lines import SerialLinesDriver
from drivers.sim_scenario import valve_open
from drivers.sim_sensors import decimals, inverse_calibration
from drivers.simulated import RigSimulator, SimulatedDriver, generate_lines, source_format
from monitor.calibration import Calibrator, parse_channels
from monitor.clock import FakeClock
from monitor.config import load_rig
from monitor.errors import ConfigError
from monitor.physics.tank import contents_kg, predict_blowdown
from monitor.predict import feed_system, tank_path
from monitor.rigs import resolve_rig

RIGS = ["bench_nitrogen_1l", "hover_air_3l"]


@pytest.fixture(scope="module")
def bench():
    return load_rig(resolve_rig("bench_nitrogen_1l"))


def _with(rig, **changes):
    """The rig with keys of its [simulation] table replaced (None removes a key)."""
    table = copy.deepcopy(rig.simulation)
    for key, value in changes.items():
        if value is None:
            table.pop(key, None)
        else:
            table[key] = value
    return dataclasses.replace(rig, simulation=table)


def _run(rig, duration_s, scenario=None):
    """Run a simulator; returns it, the truth and raw tables joined, and the sent lines with their times."""
    sim = RigSimulator(rig, scenario)
    blocks = list(sim.blocks(duration_s))
    truth = {k: np.concatenate([getattr(b.truth, k) for b in blocks]) for k in vars(blocks[0].truth)}
    raw = np.concatenate([b.raw for b in blocks])
    lines = [line for b in blocks for line in b.lines]
    return sim, truth, raw, lines, np.concatenate([b.t_s for b in blocks])


def _column(sim, name):
    return sim.format.columns.index(name)


def _calibrated(rig, lines, t_s):
    fmt = source_format(rig)
    raw = parse_lines(lines, t_s, fmt)
    return raw, Calibrator(parse_channels(rig, fmt.fields), fmt.fields).apply(raw)


# --- determinism and the physics ------------------------------------------------------------------------


def test_same_seed_same_lines_other_seed_other_noise(bench):
    first = [line for _, lines in generate_lines(bench, 3.0) for line in lines]
    again = [line for _, lines in generate_lines(bench, 3.0) for line in lines]
    other = [line for _, lines in generate_lines(_with(bench, seed=2), 3.0) for line in lines]
    assert len(first) == 3000 and first == again
    assert first != other
    assert [line.split(b",")[0] for line in first] == [line.split(b",")[0] for line in other]  # same device times


def test_block_sizes_do_not_change_the_lines(bench):
    whole = RigSimulator(bench, "sensor_trouble")
    cut = RigSimulator(bench, "sensor_trouble")
    lines_whole = [line for b in whole.blocks(3.5) for line in b.lines]
    lines_cut = [line for n in (330, 10, 1000, 660, 1000, 500) for line in cut.next_block(n).lines]  # whole 10 ms
    assert len(lines_whole) == 3500 and lines_whole == lines_cut


@pytest.fixture(scope="module", params=RIGS)
def continuous(request):
    rig = load_rig(resolve_rig(request.param))
    firing = _with(rig, pulses=[], valve_open=[["0 s", "100000 s"]], scenarios=None)
    blow = predict_blowdown(tank_path(rig), feed_system(rig))
    sim = RigSimulator(firing)
    for _ in sim.blocks(blow.flow_end_s):
        pass
    return rig, blow, sim


def test_continuous_firing_agrees_with_the_physics_core(continuous):
    # Reference: the physics core's own prediction of the same firing, monitor.physics.tank.predict_blowdown,
    # itself checked against closed-form blowdowns and an independent ODE integration (tests/physics/test_tank.py).
    # The simulator integrates the same tabulated physics in time, with a 20-30 ms feed-line lag.
    _, blow, sim = continuous
    assert sim.truth.total_impulse_n_s == pytest.approx(blow.total_impulse_n_s, rel=1e-3)
    assert sim.truth.propellant_used_kg == pytest.approx(blow.tank_mass_kg[0] - blow.residual_mass_kg, rel=1e-3)
    # Mass is conserved: what left the tank went out of the nozzle (the line's content is negligible by now).
    assert sim.truth.nozzle_mass_kg == pytest.approx(sim.truth.propellant_used_kg, rel=1e-3)


def test_steady_firing_matches_set_point_prediction(continuous):
    rig, blow, sim = continuous
    firing = _with(rig, pulses=[], valve_open=[["0 s", "100000 s"]], scenarios=None)
    _, truth, _, _, _ = _run(firing, 3.0)
    late = truth["t_s"] > 1.0
    # Sample by sample (once the feed line has filled), flow, thrust and tank pressure are those the physics
    # core predicts at the same tank mass (within the feed line's lag: 30 ms of 80 g/s is 2.4 g of tank mass).
    mass = truth["tank_mass_kg"][late]
    for name, key in (("mass_flow_kg_s", "mass_flow_kg_s"), ("thrust_n", "thrust_n"),
                      ("tank_pressure_pa", "tank_pressure_pa")):
        predicted = np.interp(mass, blow.tank_mass_kg[::-1], getattr(blow, key)[::-1])
        assert truth[name][late] == pytest.approx(predicted, rel=5e-4)
    assert truth["feed_pressure_pa"][late] == pytest.approx(rig.regulator.set_pressure_pa, rel=1e-6)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(start=st.floats(0.0, 1.0), on=st.floats(0.01, 0.8), off=st.floats(0.01, 0.8), count=st.integers(1, 4),
       leak_g_s=st.one_of(st.just(0.0), st.floats(0.01, 2.0)))
def test_mass_is_conserved_for_any_schedule(bench, start, on, off, count, leak_g_s):
    faults = [{"kind": "leak", "rate": f"{leak_g_s} g/s", "start": "0.3 s"}] if leak_g_s > 0 else []
    rig = _with(bench, valve_open=[], scenarios=None,
                pulses=[{"start": f"{start} s", "on": f"{on} s", "off": f"{off} s", "count": count}], faults=faults)
    sim = RigSimulator(rig)
    for _ in sim.blocks(start + count * (on + off) + 1.0):  # a second after the last pulse: the line has vented
        pass
    t = sim.truth
    assert t.propellant_used_kg == pytest.approx(t.nozzle_mass_kg + t.leaked_kg, rel=1e-6, abs=1e-12)
    assert t.leaked_kg == pytest.approx(leak_g_s * 1e-3 * (sim.time_s - 0.3), rel=1e-6, abs=1e-12)


def test_valve_schedule_merges_intervals():
    t = np.array([0.0, 0.99, 1.0, 1.5, 2.0, 2.5, 3.0])
    opened = valve_open(t, ((1.0, 2.0), (2.5, 3.0)))
    assert opened.tolist() == [False, False, True, True, False, True, False]


# --- sensors --------------------------------------------------------------------------------------------


def test_sensor_transfer_functions(bench):
    specs = {s.name: (i, s) for i, s in enumerate(parse_channels(bench))}
    current = inverse_calibration(specs["tank_pressure"][1], "k")
    # IEC 60381-1 live-zero signal (from memory): 4 mA at the lower range value, 20 mA at the upper, linear.
    assert current(np.array([0.0, 150.0, 300.0])).tolist() == pytest.approx([4.0, 12.0, 20.0])
    volts = inverse_calibration(specs["feed_pressure"][1], "k")
    # Ratiometric transducer, datasheet convention (common practice, no source): 10 %-90 % of a 5 V supply.
    assert volts(np.array([0.0, 5.0, 10.0])).tolist() == pytest.approx([0.5, 2.5, 4.5])
    assert decimals(0.001) == 3 and decimals(0.25) == 2 and decimals(1.0) == 0 and decimals(0.0002) == 4


def test_lines_carry_quantised_noisy_raw_values_that_calibrate_back(bench):
    sim, truth, raw, lines, t_s = _run(bench, 20.0)
    mA = raw[:, _column(sim, "P_tank_mA")]
    assert np.allclose(mA * 1000.0, np.round(mA * 1000.0))  # resolution 0.001 mA
    tc = raw[:, _column(sim, "T_tank_C")]
    assert np.allclose(tc * 4.0, np.round(tc * 4.0))  # resolution 0.25 C
    quiet = (truth["t_s"] > 0.5) & (truth["t_s"] < 1.9)
    assert np.std(mA[quiet]) == pytest.approx(0.004, rel=0.2)  # the stated noise
    batch = _calibrated(bench, lines, t_s)[1]
    # Calibrated back to SI, the readings agree with the truth within the channels' stated accuracy.
    u_tank = 0.0025 * 300e5
    assert np.mean(batch.values["tank_pressure"][quiet]) == pytest.approx(np.mean(truth["tank_pressure_pa"][quiet]),
                                                                        abs=u_tank)
    assert np.mean(batch.values["feed_pressure"][quiet]) == pytest.approx(bench.ambient_pressure_pa, abs=0.005 * 10e5)
    # Tare: the load cell's zero offset is removed; in the 10 s burn the thrust equals the truth.
    burn = (truth["t_s"] > 19.0) & (truth["t_s"] < 27.0)
    assert np.nanmean(batch.values["thrust"][burn]) == pytest.approx(np.mean(truth["thrust_n"][burn]), abs=0.01)
    assert batch.values["valve"][burn].tolist() == [1.0] * int(burn.sum())


def test_flow_meter_reads_slpm_at_its_reference(bench):
    sim, truth, raw, _, _ = _run(bench, 27.0)
    burn = (truth["t_s"] > 20.0) & (truth["t_s"] < 27.0)
    slpm = np.mean(raw[burn, _column(sim, "flow_slpm")])
    # Nitrogen at 0 C and 101.325 kPa: 1.2506 kg/m^3 (CRC Handbook of Chemistry and Physics, density of gases;
    # from memory). One SLPM at that reference is 1.2506e-3 / 60 kg/s.
    assert slpm == pytest.approx(np.mean(truth["mass_flow_kg_s"][burn]) / (1.2506e-3 / 60.0), rel=2e-3)


def test_first_order_lags(bench):
    rig = _with(bench, sensors={"mass_flow": {"lag": "0.3 s"}, "tank_temperature": {"lag": "2 s"}})
    sim, truth, raw, _, _ = _run(rig, 28.0)
    flow = raw[:, _column(sim, "flow_slpm")]
    t = truth["t_s"]
    # A first-order sensor driven by the nozzle flow: y' = (x - y) / tau, integrated here independently
    # (exact step response per sample, a textbook result) and compared with what the meter sent.
    tau, dt = 0.3, 1e-3
    x = truth["mass_flow_kg_s"] / (1.2506e-3 / 60.0)
    a = np.exp(-dt / tau)
    y = np.empty_like(x)
    y[0] = x[0]
    for k in range(1, x.size):
        y[k] = a * y[k - 1] + (1 - a) * x[k]
    assert np.max(np.abs(flow - y)) < 0.05 * np.max(x)
    i = np.searchsorted(t, 18.0 + tau)  # one time constant into the burn: 1 - 1/e of the step (within the line lag)
    assert flow[i] / np.mean(flow[(t > 26) & (t < 27.9)]) == pytest.approx(1 - np.exp(-1), abs=0.04)


# --- faults ---------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def trouble(bench):
    return _run(bench, 32.0, "sensor_trouble")


@pytest.fixture(scope="module")
def leaky(bench):
    return _run(bench, 45.0, "leak_and_dropout")


def test_stuck_sensor_repeats_its_last_reading(trouble):
    sim, truth, raw, _, _ = trouble
    tc = raw[:, _column(sim, "T_tank_C")]
    after = truth["t_s"] >= 10.0
    assert np.unique(tc[after]).size == 1 and tc[after][0] == tc[~after][-1]
    assert np.ptp(truth["tank_temperature_k"][after]) > 5.0  # while the gas really cooled in the burn


def test_dropout_sends_nan_or_an_empty_field(leaky, bench):
    sim, truth, raw, lines, t_s = leaky
    j = _column(sim, "flow_slpm")
    gone = (truth["t_s"] >= 20.0) & (truth["t_s"] < 24.0)
    assert np.isnan(raw[gone, j]).all() and np.isfinite(raw[~gone, j]).all()
    assert all(line.split(b",")[j] == b"nan" for line, g in zip(lines, gone) if g)
    fault = {"kind": "dropout", "channel": "mass_flow", "start": "1 s", "duration": "0.5 s", "send": "empty"}
    _, truth2, _, lines2, t2 = _run(_with(bench, faults=[fault]), 2.0)
    gone2 = (truth2["t_s"] >= 1.0) & (truth2["t_s"] < 1.5)
    assert all(line.split(b",")[j] == b"" for line, g in zip(lines2, gone2) if g)
    raw2 = parse_lines(lines2, t2, source_format(bench))
    assert (raw2.status[gone2] == LineStatus.BAD_NUMBER).all() and (raw2.status[~gone2] == LineStatus.OK).all()


def test_spikes_appear_at_about_their_rate(bench):
    fault = {"kind": "spikes", "channel": "thrust", "rate": "20 /s", "size": 0.8, "start": "2 s"}
    sim, truth, raw, _, _ = _run(_with(bench, pulses=[], valve_open=[], faults=[fault]), 12.0)
    jump = raw[:, _column(sim, "load_N")] - 1.85  # the valve stays shut: zero thrust plus the cell's offset
    spikes = np.abs(jump) > 0.4  # size 0.8 N against 0.003 N of noise
    assert not spikes[truth["t_s"] < 2.0].any()
    # Poisson with mean 20 /s x 10 s = 200, standard deviation 14: within 3.5 of them.
    assert 150 <= np.count_nonzero(spikes) <= 250
    assert np.abs(jump[spikes]) == pytest.approx(np.full(np.count_nonzero(spikes), 0.8), abs=0.02)
    assert (jump[spikes] > 0).any() and (jump[spikes] < 0).any()


def test_leak_drains_the_closed_tank_at_its_rate(leaky, bench):
    sim, truth, raw, lines, t_s = leaky
    quiet = (truth["t_s"] > 37.0) & (truth["t_s"] < 45.0)  # valve closed since 28 s, thermocouple settled
    assert not truth["valve_open"][quiet].any()
    slope = np.polyfit(truth["t_s"][quiet], truth["tank_mass_kg"][quiet], 1)[0]
    assert slope == pytest.approx(-0.15e-3, rel=1e-6)
    # From the lines alone: the tank's contents from measured pressure and temperature (CoolProp real gas).
    batch = _calibrated(bench, lines, t_s)[1]
    pick = np.flatnonzero(quiet)[::20]
    mass = contents_kg("nitrogen", batch.values["tank_pressure"][pick], batch.values["tank_temperature"][pick],
                       bench.tank.volume_m3)
    assert np.polyfit(truth["t_s"][pick], mass, 1)[0] == pytest.approx(-0.15e-3, rel=0.1)


def test_link_loss_leaves_a_gap_in_device_time(trouble):
    sim, truth, raw, lines, t_s = trouble
    t_ms = np.array([int(line.split(b",")[0]) for line in lines])
    seq = np.array([int(line.split(b",")[1]) for line in lines])
    steps = np.diff(t_ms)
    assert sorted(set(steps.tolist())) == [1, 1501]
    assert t_ms[np.flatnonzero(steps == 1501)[0]] == 11999
    assert np.diff(seq).tolist() == steps.tolist()  # the device kept counting
    assert len(lines) == truth["t_s"].size - 1500


def test_regulator_droop_lowers_feed_pressure_and_thrust(trouble, bench):
    sim, truth, raw, lines, t_s = trouble
    # 0.3 bar/s from 20 s: 4.5 bar gauge at 25 s, floored at 3 bar gauge.
    at = np.searchsorted(truth["t_s"], 25.0)
    assert truth["set_pressure_pa"][at] == pytest.approx(4.5e5 + bench.ambient_pressure_pa)
    assert truth["set_pressure_pa"][-1] == pytest.approx(3e5 + bench.ambient_pressure_pa)
    batch = _calibrated(bench, lines, t_s)[1]
    sent_t = t_s
    window = (sent_t > 24.9) & (sent_t < 25.1)
    assert np.nanmean(batch.values["feed_pressure"][window]) == pytest.approx(4.5e5 + bench.ambient_pressure_pa,
                                                                            abs=0.005 * 10e5 + 0.02e5)
    before = truth["thrust_n"][(truth["t_s"] > 19) & (truth["t_s"] < 20)].mean()
    assert truth["thrust_n"][at] < 0.8 * before


# --- the in-process driver ------------------------------------------------------------------------------


def test_driver_paces_lines_on_the_clock(bench):
    clock = FakeClock(50.0)
    driver = SimulatedDriver.from_rig(bench, clock, scenario="sensor_trouble")
    assert isinstance(driver, SimulatedDriver) and driver.fields == source_format(bench).fields
    with driver:
        first = driver.read(0.0)
        assert len(first) == 1 and first.events[0].kind == "connected"
        waited = driver.read(0.5)  # the next line is 1 ms away: the read sleeps that long on the clock
        assert len(waited) == 1 and clock.now() == pytest.approx(50.001)
        clock.advance(12.5)
        raw = driver.read(0.0)
        assert len(raw) == 12000 - 2 and (raw.status == LineStatus.OK).all()
        assert np.allclose(raw.t_s, 50.0 + raw.device_time_s)  # stamped when due
        clock.advance(2.0)
        raw = driver.read(0.0)
        assert [e.kind for e in raw.events] == ["gap"]  # the link loss, seen as over a serial port
    calibrator = Calibrator(parse_channels(bench, driver.fields), driver.fields)
    assert np.isfinite(calibrator.apply(raw).values["tank_pressure"]).all()


def test_driver_waits_out_a_link_loss_and_ends(bench):
    clock = FakeClock()
    driver = SimulatedDriver(RigSimulator(bench, "sensor_trouble"), clock, speed=2.0, duration_s=14.0)
    with driver:
        clock.advance(6.0)  # 12 s of device time
        assert len(driver.read(0.0)) == 12000  # 0 to 11.999 s: the link is lost from 12 s to 13.5 s
        assert len(driver.read(0.5)) == 0  # nothing until 13.5 s: the whole timeout passes
        assert clock.now() == pytest.approx(6.5)
        clock.advance(1.0)  # 15 s of device time, past the end of the run at 14 s
        raw = driver.read(0.0)
        assert len(raw) == 500 and [e.kind for e in raw.events] == ["gap", "lost"]
        raw = driver.read(10.0)
        assert len(raw) == 0 and raw.events == []
        assert clock.now() == pytest.approx(7.5 + 10.0)


def test_driver_with_a_port_reads_it_with_the_serial_driver(bench):
    driver = SimulatedDriver.from_rig(bench, FakeClock(), port="loop://")
    assert isinstance(driver, SerialLinesDriver) and driver.fields == source_format(bench).fields


# --- the [simulation] table -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("change", "key", "expected"),
    [
        ({"sample_rate": "0.1 Hz"}, "simulation.sample_rate", "1 Hz"),
        ({"sample_rate": 1000}, "simulation.sample_rate", "kHz"),
        ({"seed": -1}, "simulation.seed", "whole number"),
        ({"duration": "10"}, "simulation.duration", "unit"),
        ({"colour": "red"}, "simulation.colour", "no such key"),
        ({"scenario": "nope"}, "simulation.scenario", "leak_and_dropout"),
        ({"pulses": [{"start": "1 s", "on": "1 s", "off": "1 s", "count": 0}]}, "simulation.pulses[0].count", "1"),
        ({"pulses": [{"start": "1 s", "on": "1 s"}]}, "simulation.pulses[0].off", "required"),
        ({"valve_open": [["3 s", "2 s"]]}, "simulation.valve_open[0]", "before the close"),
        ({"sensors": {"flow": {"noise": 1.0}}}, "simulation.sensors.flow", "mass_flow"),
        ({"sensors": {"thrust": {"noise": -1.0}}}, "simulation.sensors.thrust.noise", "0"),
        ({"faults": [{"kind": "leak", "rate": "1 g/s", "start": "1 s"}, {"kind": "stuck", "channel": "thrust",
                                                                          "start": "-1 s"}]},
         "simulation.faults[1].start", "zero or more"),
        ({"faults": [{"kind": "melt", "start": "1 s"}]}, "simulation.faults[0].kind", "dropout"),
        ({"faults": [{"kind": "stuck", "channel": "thrust", "start": "1 s", "size": 2}]},
         "simulation.faults[0].size", "channel, start"),
        ({"faults": [{"kind": "dropout", "channel": "x", "start": "1 s", "duration": "1 s"}]},
         "simulation.faults[0].channel", "tank_pressure"),
        ({"faults": [{"kind": "dropout", "channel": "thrust", "start": "1 s", "duration": "1 s", "send": "0"}]},
         "simulation.faults[0].send", "empty"),
        ({"faults": [{"kind": "spikes", "channel": "thrust", "rate": "2 m", "size": 1.0}]},
         "simulation.faults[0].rate", "/s"),
        ({"faults": [{"kind": "spikes", "channel": "thrust", "rate": "2 /s", "size": 0}]},
         "simulation.faults[0].size", "non-zero"),
        ({"faults": [{"kind": "leak", "rate": "2 SLPM", "start": "1 s"}]}, "simulation.faults[0].rate", "mass_flow"),
        ({"faults": [{"kind": "droop", "start": "1 s"}]}, "simulation.faults[0].rate", "set_point"),
        ({"faults": [{"kind": "droop", "start": "1 s", "set_point": "3 bar"}]}, "simulation.faults[0].set_point",
         "gauge"),
        ({"faults": [{"kind": "link_loss", "start": "1 s", "duration": "0 s"}]}, "simulation.faults[0].duration",
         "positive"),
    ],
)
def test_mistakes_name_key_value_and_expectation(bench, change, key, expected):
    with pytest.raises(ConfigError) as info:
        RigSimulator(_with(bench, **change))
    assert info.value.key == key
    assert expected in str(info.value)


def test_scenario_mistakes_and_unknown_names(bench):
    scenarios = copy.deepcopy(bench.simulation["scenarios"])
    scenarios["leak_and_dropout"]["faults"][0]["start"] = "soon"
    with pytest.raises(ConfigError) as info:
        RigSimulator(_with(bench, scenarios=scenarios))
    assert info.value.key == "simulation.scenarios.leak_and_dropout.faults[0].start"
    scenarios = {"x": {"sample_rate": "2 kHz"}}
    with pytest.raises(ConfigError) as info:
        RigSimulator(_with(bench, scenarios=scenarios))
    assert info.value.key == "simulation.scenarios.x.sample_rate"
    with pytest.raises(ConfigError) as info:
        RigSimulator(bench, "no_such_scenario")
    assert info.value.key == "scenario" and "sensor_trouble" in str(info.value)


def test_source_must_be_text_lines_with_columns(bench):
    with pytest.raises(ConfigError) as info:
        RigSimulator(dataclasses.replace(bench, source={**bench.source, "driver": "modbus_rtu"}))
    assert info.value.key == "source.driver"
    source = {k: v for k, v in bench.source.items() if k != "columns"}
    with pytest.raises(ConfigError) as info:
        RigSimulator(dataclasses.replace(bench, source={**source, "header": True}))
    assert info.value.key == "source.columns"
    channels = tuple(c for c in bench.channels if c["name"] != "valve")
    with pytest.raises(ConfigError) as info:
        RigSimulator(dataclasses.replace(bench, channels=channels))
    assert info.value.key == "source.columns" and "valve" in str(info.value)


def test_other_line_layouts(bench):
    for change, check in [
        ({"layout": "whitespace", "checksum": "xor8"}, lambda line: b" " in line and b"*" in line),
        ({"layout": "pairs", "line_ending": "crlf"}, lambda line: line.startswith(b"t_ms=0,")),
    ]:
        rig = dataclasses.replace(bench, source={**bench.source, **change})
        t_s, lines = next(generate_lines(rig, 0.5))
        assert check(lines[0])
        raw = parse_lines(lines, t_s, source_format(rig))
        assert (raw.status == LineStatus.OK).all() and raw.device_time_s[-1] == pytest.approx(0.499)
