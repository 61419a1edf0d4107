"""The Modbus RTU rig-file table: registers and their decoding, port settings, and the grouping of registers
into as few read requests as possible. No I/O (the driver is drivers.modbus_rtu)."""

from __future__ import annotations

import math
import re
import struct
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import pint
from pymodbus.pdu.register_message import ReadHoldingRegistersRequest

from monitor.config import RigTable
from monitor.errors import ConfigError
from monitor.units import UREG

# Register type -> (registers it spans, struct format of the big-endian bytes).
REGISTER_TYPES: dict[str, tuple[int, str]] = {
    "int16": (1, ">h"),
    "uint16": (1, ">H"),
    "int32": (2, ">i"),
    "uint32": (2, ">I"),
    "float32": (2, ">f"),
}
WORD_ORDERS = ("big", "little")
PARITIES = ("none", "even", "odd")
TABLES = ("holding", "input")
# Quantity of registers one read may ask for (Modbus Application Protocol V1.1b3, 6.3/6.4: 1 to 125).
MAX_REGISTERS_PER_REQUEST = ReadHoldingRegistersRequest.MAX_COUNT
_FIELD_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")


def _is_word(value: object) -> bool:
    return isinstance(value, int) and not isinstance(value, bool) and 0 <= value <= 0xFFFF


def decode_registers(registers: Sequence[int], type: str, word_order: str = "big") -> float:
    """The number held in one or two 16-bit Modbus registers.

    Each register is sent high byte first (Modbus Application Protocol V1.1b3, 4.2: big-endian data items).
    Which register of a 32-bit pair holds the high word is not set by Modbus; devices differ, hence
    word_order. float32 is IEEE 754-2008 binary32; int16/int32 are two's complement.

    Args:
        registers: the register values as read, each 0..65535; one for 16-bit types, two for 32-bit ones.
        type: int16 | uint16 | int32 | uint32 | float32.
        word_order: "big" (first register holds the high word) or "little" (first holds the low word).

    Returns:
        The value as a float (NaN or inf when a float32 on the wire is one).

    Raises:
        ValueError: unknown type or word order, wrong number of registers, or a register out of 0..65535.
    """
    if type not in REGISTER_TYPES:
        raise ValueError(f"type = {type!r}: expected one of {', '.join(REGISTER_TYPES)}")
    if word_order not in WORD_ORDERS:
        raise ValueError(f"word_order = {word_order!r}: expected 'big' or 'little'")
    count, fmt = REGISTER_TYPES[type]
    words = list(registers)
    if len(words) != count or not all(_is_word(w) for w in words):
        raise ValueError(f"registers = {registers!r}: expected {count} integer(s) from 0 to 65535 for {type}")
    if word_order == "little":
        words.reverse()
    return float(struct.unpack(fmt, struct.pack(f">{count}H", *words))[0])


@dataclass(frozen=True)
class RegisterSpec:
    """One value read from a unit: where it lives, how to decode it, and its scaling raw * scale + offset."""

    field: str
    unit_id: int
    table: str  # "holding" | "input"
    address: int  # zero-based, as on the wire
    type: str
    word_order: str
    scale: float
    offset: float

    @property
    def count(self) -> int:
        return REGISTER_TYPES[self.type][0]


@dataclass(frozen=True)
class ReadRequest:
    """One read of contiguous registers of one unit and table; members index ModbusRtuConfig.registers."""

    unit_id: int
    table: str
    address: int
    count: int
    members: tuple[int, ...]


@dataclass(frozen=True)
class ModbusRtuConfig:
    """The [source] table of a Modbus RTU rig, checked; times in seconds."""

    port: str
    baud: int
    parity: str  # none | even | odd
    stop_bits: int
    poll_period_s: float
    timeout_s: float
    registers: tuple[RegisterSpec, ...]
    lost_after_polls: int = 3  # consecutive failed polls before a "lost" event
    source_path: str | None = None

    @property
    def fields(self) -> tuple[str, ...]:
        return tuple(r.field for r in self.registers)

    @property
    def char_time_s(self) -> float:
        """Time one character takes on the line: start bit, 8 data bits, parity bit if any, stop bits."""
        bits = 1 + 8 + (0 if self.parity == "none" else 1) + self.stop_bits
        return bits / self.baud

    @property
    def frame_gap_s(self) -> float:
        """Silence kept before each request: 3.5 character times, fixed at 1.75 ms above 19200 baud.

        Source: MODBUS over Serial Line Specification and Implementation Guide V1.02, 2.5.1.1 (from memory).
        """
        return 3.5 * self.char_time_s if self.baud <= 19200 else 1.75e-3

    @classmethod
    def from_source_table(cls, table: dict[str, Any], source_path: str | None = None) -> "ModbusRtuConfig":
        """Check a [source] table whose driver is "modbus_rtu".

        Raises:
            ConfigError: naming the key (e.g. "source.registers[1].type", registers counted from 0), the
                value and what was expected, for any missing, unknown or wrong key.
        """
        t = RigTable(table, "source", source_path)
        t.choice("driver", ("modbus_rtu",))
        port = t.raw("port")
        if not isinstance(port, str) or not port.strip():
            raise ConfigError(t.key("port"), port, "a serial device path or pyserial URL", source_path)
        baud = _integer(t, "baud", 19200, 50, 4_000_000)
        parity = t.choice("parity", PARITIES, "even")
        stop_bits = _integer(t, "stop_bits", 1, 1, 2)
        rate_hz = _rate_hz(t, "poll_rate", "10 Hz")
        timeout_s = t.quantity("timeout", "time", "0.1 s")
        if timeout_s > 10.0:
            raise ConfigError(t.key("timeout"), t.data["timeout"], "a time from 0 to 10 s", t.source)
        tables = t.raw("registers")
        if not isinstance(tables, list) or not tables or not all(isinstance(x, dict) for x in tables):
            raise ConfigError(t.key("registers"), tables, "one or more [[source.registers]] tables", t.source)
        registers: list[RegisterSpec] = []
        for index, raw in enumerate(tables):
            spec = _register(RigTable(raw, f"source.registers[{index}]", source_path))
            if spec.field in (r.field for r in registers):
                key = f"source.registers[{index}].field"
                raise ConfigError(key, spec.field, "a field name no other register uses", source_path)
            registers.append(spec)
        t.finish()
        return cls(
            port=port.strip(),
            baud=baud,
            parity=parity,
            stop_bits=stop_bits,
            poll_period_s=1.0 / rate_hz,
            timeout_s=timeout_s,
            registers=tuple(registers),
            source_path=source_path,
        )


def _integer(t: RigTable, name: str, default: Any, low: int, high: int) -> int:
    value = t.raw(name, default)
    if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
        raise ConfigError(t.key(name), value, f"a whole number from {low} to {high}", t.source)
    return value


def _finite(t: RigTable, name: str, default: float) -> float:
    value = t.raw(name, default)
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ConfigError(t.key(name), value, "a finite number", t.source)
    return float(value)


def _rate_hz(t: RigTable, name: str, default: str) -> float:
    value = t.raw(name, default)
    if not isinstance(value, str):
        raise ConfigError(t.key(name), value, "a rate with its unit, as a string such as '20 Hz'", t.source)
    try:
        rate_hz = float(UREG.Quantity(value.strip()).to("hertz").magnitude)
    except (pint.errors.PintError, ValueError, TypeError, AttributeError, AssertionError) as exc:
        raise ConfigError(t.key(name), value, f"a rate such as '20 Hz' ({exc})", t.source) from exc
    if not (math.isfinite(rate_hz) and 0.0 < rate_hz <= 1000.0):
        raise ConfigError(t.key(name), value, "a rate above 0 and at most 1000 Hz", t.source)
    return rate_hz


def _register(t: RigTable) -> RegisterSpec:
    name = t.raw("field")
    if not isinstance(name, str) or not _FIELD_NAME.match(name):
        raise ConfigError(t.key("field"), name, "a name of letters, digits and '_', like 'P_tank'", t.source)
    type_ = t.choice("type", tuple(REGISTER_TYPES))
    count = REGISTER_TYPES[type_][0]
    address = _integer(t, "address", ..., 0, 0xFFFF - (count - 1))
    spec = RegisterSpec(
        field=name,
        unit_id=_integer(t, "unit_id", ..., 1, 247),  # 0 is broadcast (no answer), 248-255 reserved
        table=t.choice("table", TABLES, "holding"),
        address=address,
        type=type_,
        word_order=t.choice("word_order", WORD_ORDERS, "big"),
        scale=_finite(t, "scale", 1.0),
        offset=_finite(t, "offset", 0.0),
    )
    if spec.scale == 0.0:
        raise ConfigError(t.key("scale"), t.data["scale"], "a finite, non-zero factor", t.source)
    t.finish()
    return spec


def plan_requests(registers: Sequence[RegisterSpec], max_count: int = MAX_REGISTERS_PER_REQUEST) -> tuple[ReadRequest, ...]:
    """Group registers of one unit and table that touch or overlap into single reads of at most max_count.

    Gaps are never bridged: a register between two wanted ones may not exist on the device, and reading it
    would make the unit answer with an exception instead of the values.
    """

    def place(i: int) -> tuple[int, str, int]:
        return registers[i].unit_id, registers[i].table, registers[i].address

    order = sorted(range(len(registers)), key=place)
    plan: list[ReadRequest] = []
    for i in order:
        r = registers[i]
        last = plan[-1] if plan else None
        if (
            last is not None
            and (last.unit_id, last.table) == (r.unit_id, r.table)
            and r.address <= last.address + last.count
            and max(last.address + last.count, r.address + r.count) - last.address <= max_count
        ):
            end = max(last.address + last.count, r.address + r.count)
            plan[-1] = ReadRequest(r.unit_id, r.table, last.address, end - last.address, (*last.members, i))
        else:
            plan.append(ReadRequest(r.unit_id, r.table, r.address, r.count, (i,)))
    return tuple(plan)
