"""The [estimation] table: kept raw by the rig loader, checked by parse_estimation with errors that name the key."""

from __future__ import annotations

import pytest
from rig_texts import MINIMAL_RIG

from monitor.config import parse_rig
from monitor.errors import ConfigError
from monitor.estimators import EstimationSettings, parse_estimation
from monitor.estimators.settings import DEFAULT_MASS_FLOW_LAG_S, DEFAULT_TEMPERATURE_LAG_S
from monitor.units import G0_M_S2

GOOD = MINIMAL_RIG


def _settings(table: str) -> EstimationSettings:
    return parse_estimation(parse_rig(GOOD + "[estimation]\n" + table, "rig.toml"))


def test_the_rig_loader_keeps_the_table_raw():
    rig = parse_rig(GOOD + '[estimation]\nleak_window = "20 s"\n', "x.toml")
    assert rig.estimation == {"leak_window": "20 s"}
    assert parse_rig(GOOD).estimation == {}
    with pytest.raises(ConfigError) as info:
        parse_rig(GOOD.replace("format = 1", "format = 1\nestimation = 3"), "x.toml")
    assert info.value.key == "estimation" and "a table" in str(info.value)


def test_defaults_without_a_table():
    s = parse_estimation(parse_rig(GOOD))
    assert s.exhaust_velocity_m_s is None and s.exhaust_velocity_std_m_s == 0.0
    assert s.filter_cutoff_hz == 10.0 and s.sample_rate_hz is None and s.block_s == pytest.approx(0.02)
    assert s.leak_window_s == 10.0 and s.leak_coverage == 3.0 and s.leak_threshold_kg_s == pytest.approx(2e-5)
    assert s.temperature_lag_s == DEFAULT_TEMPERATURE_LAG_S and s.mass_flow_lag_s == DEFAULT_MASS_FLOW_LAG_S
    assert s.reserve_kg == 0.0 and s.reserve_fraction == 0.0


def test_values_in_their_units():
    s = _settings('isp = "55 s"\nisp_uncertainty = "2 s"\nfilter_cutoff = "25 Hz"\nsample_rate = "2 kHz"\n'
                  'block = "50 ms"\nleak_window = "1 min"\nleak_threshold = "0.1 g/s"\nreserve = "10 %"\n'
                  'tank_volume_uncertainty = "5 mL"\ndry_mass_uncertainty = "20 g"\n'
                  'discharge_coefficient_uncertainty = 0.01\ntemperature_lag = "4 s"\nmass_flow_lag = "0 s"\n')
    # Isp in seconds times standard gravity (CGPM 1901: g0 = 9.80665 m/s^2) is the exhaust velocity.
    assert s.exhaust_velocity_m_s == pytest.approx(55 * G0_M_S2) and s.exhaust_velocity_std_m_s == pytest.approx(2 * G0_M_S2)
    assert (s.filter_cutoff_hz, s.sample_rate_hz, s.block_s, s.leak_window_s) == pytest.approx((25, 2000, 0.05, 60))
    assert s.leak_threshold_kg_s == pytest.approx(1e-4) and s.reserve_fraction == pytest.approx(0.1)
    assert s.tank_volume_std_m3 == pytest.approx(5e-6) and s.dry_mass_std_kg == pytest.approx(0.02)
    assert s.temperature_lag_s == 4.0 and s.mass_flow_lag_s == 0.0
    u = _settings('exhaust_velocity = "540 m/s"\nexhaust_velocity_uncertainty = "15 m/s"\nreserve = "5 g"\n')
    assert (u.exhaust_velocity_m_s, u.exhaust_velocity_std_m_s, u.reserve_kg) == pytest.approx((540, 15, 0.005))


@pytest.mark.parametrize(("table", "key", "expected"), [
    ('isp = "55 s"\n', "estimation.isp_uncertainty", "uncertainty"),
    ('exhaust_velocity = "540 m/s"\n', "estimation.exhaust_velocity_uncertainty", "uncertainty"),
    ('isp = "55 s"\nisp_uncertainty = "1 s"\nexhaust_velocity = "nozzle"\n', "estimation.isp", "not both"),
    ('exhaust_velocity = "fast"\n', "estimation.exhaust_velocity", "velocity"),
    ('exhaust_velocity = 540\n', "estimation.exhaust_velocity", "nozzle"),
    ('isp_uncertainty = "1 s"\n', "estimation.isp_uncertainty", "nozzle"),
    ('filter_cutoff = "10"\n', "estimation.filter_cutoff", "Hz"),
    ('leak_window = "-3 s"\n', "estimation.leak_window", "above"),
    ('leak_window = "50 ms"\n', "estimation.leak_window", "five blocks"),
    ('leak_coverage = 30\n', "estimation.leak_coverage", "0 to 10"),
    ('reserve = "120 %"\n', "estimation.reserve", "percentage"),
    ('reserve = "5 bar"\n', "estimation.reserve", "mass"),
    ('leak_windw = "5 s"\n', "estimation.leak_windw", "typo"),
])
def test_mistakes_name_key_and_expectation(table, key, expected):
    with pytest.raises(ConfigError) as info:
        _settings(table)
    assert info.value.key == key
    assert expected in str(info.value)
