"""The [source] table of a serial-lines rig: how a device writes its lines and how the port is set up."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from monitor.errors import ConfigError
from monitor.units import parse_quantity

__all__ = ["LineFormat"]

_SOURCE_KEYS = ("driver", "port", "baud", "parity", "stop_bits", "line_ending", "layout", "columns", "header",
                "device_time_field", "device_time_unit", "sequence_field", "sequence_modulo", "checksum",
                "max_line_bytes")


def _valid_name(name: object) -> bool:
    """A column name: printable ASCII without spaces, ',', '=' or '*', and not itself a number."""
    return (isinstance(name, str) and name != "" and all("!" <= c <= "~" and c not in ",=*" for c in name)
            and _number(name) is None)


def _number(token: str) -> float | None:
    """The float a token spells (nan and inf included), or None; digit separators ('_') are refused."""
    if not token or "_" in token:
        return None
    try:
        return float(token)
    except ValueError:
        return None


@dataclass(frozen=True)
class LineFormat:
    """How a device writes its lines and how the port is set up: the [source] table of a serial_lines rig.

    Build it with from_source_table; direct construction runs the same checks. stop_bits is 1, 1.5 or 2;
    device_time_unit is s, ms or us and is required exactly when device_time_field is given.
    """

    port: str | None = None
    baud: int = 115200
    parity: str = "none"
    stop_bits: float = 1.0
    line_ending: str = "lf"
    layout: str = "csv"
    columns: tuple[str, ...] | None = None
    header: bool = False
    device_time_field: str | None = None
    device_time_unit: str | None = None
    sequence_field: str | None = None
    sequence_modulo: int | None = None
    checksum: str = "none"
    max_line_bytes: int = 512
    source_path: str | None = field(default=None, compare=False, repr=False)

    @classmethod
    def from_source_table(cls, table: dict[str, Any], source_path: str | None = None) -> "LineFormat":
        """Check the rig's [source] table and build the format.

        Raises:
            ConfigError: an unknown key, or any key's value of the wrong type or out of range (the message
                names the key, the value and what was expected).
        """
        if not isinstance(table, dict):
            raise ConfigError("source", table, "a table ([source])", source_path)
        for key, value in table.items():
            if key not in _SOURCE_KEYS:
                raise ConfigError(f"source.{key}", value, "no such key for the serial_lines driver (a typo?); "
                                  "known keys: " + ", ".join(_SOURCE_KEYS), source_path)
        if table.get("driver", "serial_lines") != "serial_lines":
            raise ConfigError("source.driver", table["driver"], "'serial_lines' for this driver", source_path)
        return cls(**{k: v for k, v in table.items() if k != "driver"}, source_path=source_path)

    def _fail(self, key: str, value: object, expected: str) -> None:
        raise ConfigError(f"source.{key}", value, expected, self.source_path)

    def _choice(self, key: str, options: tuple[str, ...]) -> None:
        if getattr(self, key) not in options:
            self._fail(key, getattr(self, key), "one of " + ", ".join(repr(o) for o in options))

    def __post_init__(self) -> None:
        if self.port is not None and (not isinstance(self.port, str) or not self.port.strip()):
            self._fail("port", self.port, "a device path or a pyserial URL, as a non-empty string")
        if isinstance(self.baud, bool) or not isinstance(self.baud, int) or not 50 <= self.baud <= 12_000_000:
            self._fail("baud", self.baud, "a whole number of bits per second from 50 to 12000000")
        self._choice("parity", ("none", "even", "odd"))
        if isinstance(self.stop_bits, bool) or self.stop_bits not in (1, 1.5, 2):
            self._fail("stop_bits", self.stop_bits, "1, 1.5 or 2")
        object.__setattr__(self, "stop_bits", float(self.stop_bits))
        self._choice("line_ending", ("lf", "crlf", "cr"))
        self._choice("layout", ("csv", "whitespace", "pairs"))
        self._choice("checksum", ("none", "xor8"))
        if not isinstance(self.header, bool):
            self._fail("header", self.header, "true or false")
        self._check_columns()
        mbytes = self.max_line_bytes
        if isinstance(mbytes, bool) or not isinstance(mbytes, int) or not 16 <= mbytes <= 65536:
            self._fail("max_line_bytes", mbytes, "a whole number of bytes from 16 to 65536")

    def _check_columns(self) -> None:
        cols = self.columns
        if cols is not None:
            if not isinstance(cols, (list, tuple)) or not cols or not all(_valid_name(c) for c in cols):
                self._fail("columns", cols, "a non-empty list of names (printable, no spaces, ',', '=' or '*', "
                           "not numbers)")
            if len(set(cols)) != len(cols):
                self._fail("columns", cols, "names that appear once each")
            object.__setattr__(self, "columns", tuple(cols))
        if self.layout == "pairs" and self.header:
            self._fail("header", self.header, "false with layout = 'pairs' (each pair names its field)")
        if cols is None and not self.header:
            self._fail("columns", None, "the list of field names (or header = true to read them from the device)")
        for key in ("device_time_field", "sequence_field"):
            name = getattr(self, key)
            if name is not None and (not _valid_name(name) or (cols is not None and name not in cols)):
                self._fail(key, name, "one of the columns" if cols is not None else "a column name")
        if self.device_time_field is not None and self.device_time_field == self.sequence_field:
            self._fail("sequence_field", self.sequence_field, "a column other than device_time_field")
        if self.device_time_field is None:
            if self.device_time_unit is not None:
                self._fail("device_time_unit", self.device_time_unit, "no unit unless device_time_field is set")
        else:
            self._choice("device_time_unit", ("s", "ms", "us"))
        modulo = self.sequence_modulo
        if modulo is not None and (isinstance(modulo, bool) or not isinstance(modulo, int) or modulo < 2
                                   or self.sequence_field is None):
            self._fail("sequence_modulo", modulo, "a whole number of at least 2 (the counter's wrap, e.g. "
                       "65536), and only with sequence_field")
        if cols is not None and not self.fields:
            self._fail("columns", cols, "at least one column besides device_time_field and sequence_field")

    @property
    def fields(self) -> tuple[str, ...]:
        """The value fields in column order (the columns without device time and sequence); () if from a header."""
        return self.value_fields(self.columns or ())

    def value_fields(self, names: tuple[str, ...]) -> tuple[str, ...]:
        return tuple(n for n in names if n not in (self.device_time_field, self.sequence_field))

    @property
    def device_time_scale_s(self) -> float:
        """Seconds per count of the device time field (1.0 when there is none)."""
        if self.device_time_unit is None:
            return 1.0
        return parse_quantity(f"1 {self.device_time_unit}", "time", "source.device_time_unit", self.source_path)
