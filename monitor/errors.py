"""One exception tree for ejecta; every message names the key, channel, URL or file at fault."""

from __future__ import annotations


class MonitorError(Exception):
    """Base of every error ejecta raises on purpose; the CLI turns these into messages, never tracebacks."""

    exit_code = 1


class ConfigError(MonitorError, ValueError):
    """A rig file or command-line setting is wrong.

    Example scenarios: a missing key, a pressure without a unit, a regulator set point above the
    tank's fill pressure, an unknown gas name. The message names the key, the value and what was expected.
    """

    exit_code = 2

    def __init__(self, key: str, value: object, expected: str, source: str | None = None):
        self.key = key
        self.value = value
        self.expected = expected
        self.source = source
        where = f"{source}: " if source else ""
        super().__init__(f"{where}{key} = {value!r}: expected {expected}")

    def __reduce__(self):
        return (type(self), (self.key, self.value, self.expected, self.source))


class PhysicsError(MonitorError, ValueError):
    """A physics function was asked for a state its model cannot give.

    Example scenarios: an unknown gas, a temperature below the gas's melting line, an area ratio below 1,
    a negative mass.
    """


class DriverUnavailableError(MonitorError):
    """A driver was asked for that is not known, or whose optional package is missing."""

    exit_code = 2


class SourceError(MonitorError):
    """A data source cannot be opened or has failed.

    Example scenarios: a serial port that does not exist, a device unplugged mid-run, a Modbus slave
    that does not answer.
    """

    exit_code = 3


class LogFormatError(MonitorError):
    """A run log cannot be read: not one of ours, a newer format version, or damaged beyond the header."""

    exit_code = 4
