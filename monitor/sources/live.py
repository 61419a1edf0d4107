"""A live source: the rig's driver (serial lines, Modbus RTU, simulator) followed by channel calibration."""

from __future__ import annotations

from drivers import load_driver
from drivers.base import Driver
from monitor.calibration import Calibrator, parse_channels
from monitor.clock import Clock
from monitor.config import Rig
from monitor.errors import ConfigError
from monitor.samples import SourceReading
from monitor.sources.base import SampleSource


class LiveSource(SampleSource):
    """Reads raw batches from a driver and calibrates their good lines into SI channels."""

    live = True

    def __init__(self, driver: Driver, calibrator: Calibrator, rig_text: str = ""):
        self.driver = driver
        self.calibrator = calibrator
        self.channels = calibrator.specs
        self.rig_text = rig_text
        self._opened = False

    def open(self) -> None:
        if not self._opened:
            self.driver.open()
            self._opened = True

    def read(self, timeout_s: float = 0.05) -> SourceReading:
        raw = self.driver.read(timeout_s)
        return SourceReading(raw=raw, batch=self.calibrator.apply(raw, raw.missing))

    def close(self) -> None:
        if self._opened:
            self._opened = False
            self.driver.close()


def open_live_source(rig: Rig, clock: Clock, port: str | None = None, **options: object) -> LiveSource:
    """Build the live source the rig file describes (not yet opened).

    Args:
        rig: the loaded rig; its [source] table names the driver and its settings.
        clock: the monotonic clock that stamps every line; pass a RunClock so that times count from the
            start of the run.
        port: a device path or pyserial URL that overrides source.port.
        **options: driver-specific settings passed to its from_rig (the simulator's scenario, say).

    Raises:
        ConfigError: no [source] table, an unknown driver, or a channel that names a field the driver lacks.
        DriverUnavailableError: the driver's package is missing.
    """
    name = rig.source.get("driver")
    if name is None:
        raise ConfigError(
            "source.driver", None, "a [source] table naming the driver (serial_lines, modbus_rtu, simulated)", rig.source_path
        )
    if not isinstance(name, str):
        raise ConfigError("source.driver", name, "a driver name as a string", rig.source_path)
    driver_class = load_driver(name)
    driver = driver_class.from_rig(rig, clock, port, **options)
    specs = parse_channels(rig, driver.fields)
    return LiveSource(driver, Calibrator(specs, driver.fields), rig.text)
