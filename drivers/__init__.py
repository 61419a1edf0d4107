"""Sensor drivers: each turns bytes from one kind of instrument link into timestamped raw readings.

DRIVERS maps a driver name to (module, class); the module is imported only when that driver is asked for,
so an optional dependency (a Modbus library, say) is needed only by the driver that uses it.
"""

from __future__ import annotations

import importlib

from monitor.errors import DriverUnavailableError

DRIVERS: dict[str, tuple[str, str]] = {
    "modbus_rtu": ("drivers.modbus_rtu", "ModbusRtuDriver"),
    "serial_lines": ("drivers.serial_lines", "SerialLinesDriver"),
    "simulated": ("drivers.simulated", "SimulatedDriver"),
}


def load_driver(name: str) -> type:
    """The driver class registered under `name`.

    Raises:
        DriverUnavailableError: no such driver, or its module (or a package it needs) cannot be imported.
    """
    try:
        module_name, class_name = DRIVERS[name]
    except KeyError:
        raise DriverUnavailableError(f"unknown driver {name!r}: expected one of {', '.join(sorted(DRIVERS))}") from None
    try:
        module = importlib.import_module(module_name)
    except ImportError as exc:
        raise DriverUnavailableError(f"driver {name!r} cannot load: {exc} (is its package installed?)") from exc
    return getattr(module, class_name)
