"""Modbus RTU driver: register decoding, the [source] table, request grouping, and polls over real ptys.

The end-to-end tests join two pseudo-terminals with a relay thread (the "cable"): the driver opens one, a
pymodbus ModbusSerialServer (an independent Modbus RTU slave implementation) opens the other. The relay can
go silent (a unit that stops answering) or lose the driver's end (a USB adapter pulled out); the server's
trace_packet hook corrupts one byte of an answer on its way out (a CRC error). Every wait is bounded.
"""

from __future__ import annotations

import asyncio
import math
import os
import select
import threading
import tomllib
import tty

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from pymodbus.client import ModbusSerialClient
from pymodbus.framer import FramerType
from pymodbus.server import ModbusSerialServer
from pymodbus.simulator import DataType, SimData, SimDevice
from rig_texts import MINIMAL_RIG

from drivers import DRIVERS, load_driver
from drivers.base import LineStatus
from drivers.modbus_config import ModbusRtuConfig, RegisterSpec, decode_registers, plan_requests
from drivers.modbus_rtu import ModbusRtuDriver
from monitor.clock import FakeClock
from monitor.config import parse_rig
from monitor.errors import ConfigError, SourceError

# ---------------------------------------------------------------------------------------------------------
# Decoding. Bit patterns of IEEE 754-2008 binary32 (section 3.4: 1 sign bit, 8-bit exponent biased by 127,
# 23-bit fraction), worked by hand from that layout:
#   10.0  = +1.25 * 2^3  -> exponent 130 = 1000 0010b, fraction .01b -> 0x41200000
#   1.0   = +1.0  * 2^0  -> exponent 127 = 0111 1111b                -> 0x3F800000
#   -100.0 = -1.5625 * 2^6 -> sign 1, exponent 133 = 1000 0101b, fraction .1001b -> 0xC2C80000
#   +inf: exponent all ones, fraction 0 -> 0x7F800000
#   quiet NaN: exponent all ones, fraction MSB set -> 0x7FC00000
# Integers are two's complement (int16 0xFFFF = -1, 0x8000 = -32768).
# Each register is sent high byte first (Modbus Application Protocol V1.1b3, section 4.2).
# ---------------------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("registers", "kind", "order", "expected"),
    [
        ([0x4120, 0x0000], "float32", "big", 10.0),  # IEEE 754-2008 binary32, 0x41200000
        ([0x3F80, 0x0000], "float32", "big", 1.0),  # IEEE 754-2008 binary32, 0x3F800000
        ([0xC2C8, 0x0000], "float32", "big", -100.0),  # IEEE 754-2008 binary32, 0xC2C80000
        ([0x0000, 0x4120], "float32", "little", 10.0),  # same pattern, low word first
        ([0x0000, 0xC2C8], "float32", "little", -100.0),
        ([0xFFFF], "int16", "big", -1.0),  # two's complement
        ([0x8000], "int16", "big", -32768.0),
        ([0x7FFF], "int16", "big", 32767.0),
        ([0xFFFF], "uint16", "big", 65535.0),
        ([0xFFFF], "int16", "little", -1.0),  # word order means nothing for one register
        ([0xFFFF, 0xFFFE], "int32", "big", -2.0),  # 0xFFFFFFFE two's complement
        ([0xFFFE, 0xFFFF], "int32", "little", -2.0),
        ([0x0001, 0x0000], "uint32", "big", 65536.0),  # 0x00010000
        ([0x0000, 0x0001], "uint32", "little", 65536.0),
        ([0xFFFF, 0xFFFF], "uint32", "big", 4294967295.0),
        ([0x8000, 0x0000], "int32", "big", -2147483648.0),
    ],
)
def test_decode_known_bit_patterns(registers, kind, order, expected):
    assert decode_registers(registers, kind, order) == expected


def test_decode_non_finite_float32_is_passed_on():
    # IEEE 754-2008 binary32: 0x7F800000 = +inf, 0xFF800000 = -inf, 0x7FC00000 = quiet NaN
    assert decode_registers([0x7F80, 0x0000], "float32", "big") == math.inf
    assert decode_registers([0xFF80, 0x0000], "float32", "big") == -math.inf
    assert math.isnan(decode_registers([0x7FC0, 0x0000], "float32", "big"))


@pytest.mark.parametrize(
    ("registers", "kind", "order", "word"),
    [
        ([0x4120], "float32", "big", "registers"),
        ([0x4120, 0, 0], "float32", "big", "registers"),
        ([0x10000], "uint16", "big", "registers"),
        ([-1], "int16", "big", "registers"),
        ([True], "uint16", "big", "registers"),
        ([1], "float64", "big", "type"),
        ([1], "uint16", "middle", "word_order"),
    ],
)
def test_decode_rejects_wrong_arguments(registers, kind, order, word):
    with pytest.raises(ValueError, match=word):
        decode_registers(registers, kind, order)


_WORD = st.integers(0, 0xFFFF)
_REFERENCE_TYPES = {
    "int16": ModbusSerialClient.DATATYPE.INT16, "uint16": ModbusSerialClient.DATATYPE.UINT16,
    "int32": ModbusSerialClient.DATATYPE.INT32, "uint32": ModbusSerialClient.DATATYPE.UINT32,
    "float32": ModbusSerialClient.DATATYPE.FLOAT32,
}


@given(kind=st.sampled_from(sorted(_REFERENCE_TYPES)), order=st.sampled_from(["big", "little"]),
       words=st.lists(_WORD, min_size=2, max_size=2))
def test_decode_agrees_with_pymodbus_reference(kind, order, words):
    # Reference library: pymodbus ModbusClientMixin.convert_from_registers (same word_order meaning).
    words = words[: 1 if kind.endswith("16") else 2]
    ours = decode_registers(words, kind, order)
    reference = float(ModbusSerialClient.convert_from_registers(words, _REFERENCE_TYPES[kind], order))
    assert ours == reference or (math.isnan(ours) and math.isnan(reference))


# ---------------------------------------------------------------------------------------------------------
# The [source] table
# ---------------------------------------------------------------------------------------------------------

RIG_SOURCE = """
[source]
driver = "modbus_rtu"
port = "/dev/ttyUSB0"
baud = 19200
parity = "even"
stop_bits = 1
poll_rate = "20 Hz"
timeout = "0.1 s"
[[source.registers]]
field = "P_tank"
unit_id = 1
table = "holding"
address = 0
type = "float32"
word_order = "big"
scale = 1.0
offset = 0.0
[[source.registers]]
field = "flow"
unit_id = 2
table = "input"
address = 7
type = "uint16"
scale = 0.01
"""


def _source(text: str = RIG_SOURCE) -> dict:
    return tomllib.loads(text)["source"]


def test_config_reads_the_documented_table():
    config = ModbusRtuConfig.from_source_table(_source(), "rig.toml")
    assert config.port == "/dev/ttyUSB0"
    assert (config.baud, config.parity, config.stop_bits) == (19200, "even", 1)
    assert config.poll_period_s == pytest.approx(0.05)  # 1 / 20 Hz
    assert config.timeout_s == pytest.approx(0.1)
    assert config.fields == ("P_tank", "flow")
    assert config.registers[0] == RegisterSpec("P_tank", 1, "holding", 0, "float32", "big", 1.0, 0.0)
    assert config.registers[1] == RegisterSpec("flow", 2, "input", 7, "uint16", "big", 0.01, 0.0)


def test_frame_gap_is_three_and_a_half_characters():
    # MODBUS over Serial Line V1.02, 2.5.1.1 (from memory): 3.5 character times; 11-bit characters
    # (start, 8 data, parity, stop): 3.5 * 11 / 19200 = 2.005 ms; fixed 1.75 ms above 19200 baud.
    config = ModbusRtuConfig.from_source_table(_source(), None)
    assert config.frame_gap_s == pytest.approx(3.5 * 11 / 19200)
    fast = ModbusRtuConfig.from_source_table(_source(RIG_SOURCE.replace("baud = 19200", "baud = 115200")))
    assert fast.frame_gap_s == pytest.approx(1.75e-3)


@pytest.mark.parametrize(
    ("old", "new", "key", "value"),
    [
        ('type = "uint16"', 'type = "float64"', "source.registers[1].type", "float64"),
        ('type = "uint16"', 'type = "uint16"\nbogus = 3', "source.registers[1].bogus", 3),
        ('stop_bits = 1', 'stop_bits = 1\nspeed = 3', "source.speed", 3),
        ('word_order = "big"', 'word_order = "middle"', "source.registers[0].word_order", "middle"),
        ('unit_id = 2', 'unit_id = 0', "source.registers[1].unit_id", 0),
        ('unit_id = 2', 'unit_id = 248', "source.registers[1].unit_id", 248),
        ('unit_id = 2', 'unit_id = "2"', "source.registers[1].unit_id", "2"),
        ('address = 0', 'address = 65535', "source.registers[0].address", 65535),  # float32 needs 2
        ('address = 7', 'address = -1', "source.registers[1].address", -1),
        ('table = "input"', 'table = "coil"', "source.registers[1].table", "coil"),
        ('field = "flow"', 'field = "P_tank"', "source.registers[1].field", "P_tank"),
        ('field = "flow"', 'field = "flow rate"', "source.registers[1].field", "flow rate"),
        ('scale = 0.01', 'scale = 0.0', "source.registers[1].scale", 0.0),
        ('scale = 0.01', 'scale = inf', "source.registers[1].scale", math.inf),
        ('offset = 0.0', 'offset = "1"', "source.registers[0].offset", "1"),
        ('poll_rate = "20 Hz"', 'poll_rate = "20"', "source.poll_rate", "20"),
        ('poll_rate = "20 Hz"', 'poll_rate = "20 m"', "source.poll_rate", "20 m"),
        ('poll_rate = "20 Hz"', 'poll_rate = 20', "source.poll_rate", 20),
        ('poll_rate = "20 Hz"', 'poll_rate = "0 Hz"', "source.poll_rate", "0 Hz"),
        ('timeout = "0.1 s"', 'timeout = 0.1', "source.timeout", 0.1),
        ('timeout = "0.1 s"', 'timeout = "30 s"', "source.timeout", "30 s"),
        ('parity = "even"', 'parity = "mark"', "source.parity", "mark"),
        ('stop_bits = 1', 'stop_bits = 3', "source.stop_bits", 3),
        ('baud = 19200', 'baud = 19200.5', "source.baud", 19200.5),
        ('driver = "modbus_rtu"', 'driver = "serial_lines"', "source.driver", "serial_lines"),
        ('port = "/dev/ttyUSB0"', 'port = ""', "source.port", ""),
    ],
)
def test_config_errors_name_key_value_and_expectation(old, new, key, value):
    assert old in RIG_SOURCE
    with pytest.raises(ConfigError) as info:
        ModbusRtuConfig.from_source_table(_source(RIG_SOURCE.replace(old, new, 1)), "rig.toml")
    err = info.value
    assert err.key == key
    assert err.value == value or (isinstance(value, float) and math.isinf(value) and math.isinf(err.value))
    assert err.expected and "rig.toml" in str(err)


def test_config_needs_registers_and_a_port():
    table = _source()
    del table["registers"]
    with pytest.raises(ConfigError, match="source.registers"):
        ModbusRtuConfig.from_source_table(table)
    table = _source()
    table["registers"] = []
    with pytest.raises(ConfigError, match="source.registers"):
        ModbusRtuConfig.from_source_table(table)
    table = _source()
    del table["port"]
    with pytest.raises(ConfigError, match="source.port"):
        ModbusRtuConfig.from_source_table(table)


def test_driver_is_registered():
    assert DRIVERS["modbus_rtu"] == ("drivers.modbus_rtu", "ModbusRtuDriver")
    assert load_driver("modbus_rtu") is ModbusRtuDriver





def test_from_rig_reads_source_and_port_overrides_it():
    rig = parse_rig(MINIMAL_RIG + RIG_SOURCE, "rig.toml")
    driver = ModbusRtuDriver.from_rig(rig, FakeClock(0.0))
    assert driver.config.port == "/dev/ttyUSB0" and driver.fields == ("P_tank", "flow")
    assert len(driver.requests) == 2  # two units
    assert ModbusRtuDriver.from_rig(rig, FakeClock(0.0), port="loop://").config.port == "loop://"
    with pytest.raises(ConfigError, match="source.registers\\[0\\].type"):
        ModbusRtuDriver.from_rig(parse_rig(MINIMAL_RIG + RIG_SOURCE.replace("float32", "real"), "rig.toml"),
                                 FakeClock(0.0))


# ---------------------------------------------------------------------------------------------------------
# Grouping registers into requests
# ---------------------------------------------------------------------------------------------------------


def _spec(field, address, kind="uint16", unit=1, table="holding"):
    return RegisterSpec(field, unit, table, address, kind, "big", 1.0, 0.0)


def test_contiguous_registers_of_one_unit_and_table_share_a_request():
    specs = [
        _spec("c", 4, "int16"), _spec("a", 0, "float32"), _spec("b", 2, "float32"),  # 0..4 -> one read
        _spec("d", 8, "uint16"),  # gap at 5..7: its own read
        _spec("e", 0, "uint16", table="input"),  # other table
        _spec("f", 1, "uint16", unit=2),  # other unit
        _spec("g", 1, "uint16"),  # overlaps "a": same read
    ]
    plan = plan_requests(specs)
    assert [(r.unit_id, r.table, r.address, r.count) for r in plan] == [
        (1, "holding", 0, 5), (1, "holding", 8, 1), (1, "input", 0, 1), (2, "holding", 1, 1),
    ]
    assert sorted(plan[0].members) == [0, 1, 2, 6]


def test_requests_respect_the_125_register_limit():
    # Modbus Application Protocol V1.1b3, 6.3: a read asks for 1 to 125 registers.
    specs = [_spec(f"r{i}", 2 * i, "float32") for i in range(100)]  # 200 contiguous registers
    plan = plan_requests(specs)
    assert [(r.address, r.count) for r in plan] == [(0, 124), (124, 76)]
    assert sum(len(r.members) for r in plan) == 100


# ---------------------------------------------------------------------------------------------------------
# Real pseudo-terminals: a relay as the cable, pymodbus's serial server as the slave
# ---------------------------------------------------------------------------------------------------------


def _pty() -> tuple[int, int, str]:
    master, slave = os.openpty()
    tty.setraw(slave)  # no echo or line editing before pyserial configures it
    return master, slave, os.ttyname(slave)


class Cable:
    """Copies bytes between the driver's pty and the slave's pty; can go silent or lose the driver's end."""

    def __init__(self, tmp_path):
        self.link = tmp_path / "ttyRIG"  # the driver opens this symlink, so its end can be replaced
        self.driver_master, self._driver_slave, path = _pty()
        self.link.symlink_to(path)
        self.device_master, self._device_slave, self.device_path = _pty()
        self.silent = False  # drop everything the slave sends
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.is_set():
            with self._lock:
                ends = [fd for fd in (self.driver_master, self.device_master) if fd is not None]
            readable, _, _ = select.select(ends, [], [], 0.01)
            for fd in readable:
                with self._lock:
                    try:
                        data = os.read(fd, 4096)
                    except OSError:
                        continue
                    if fd == self.device_master and self.driver_master is not None and not self.silent:
                        os.write(self.driver_master, data)
                    elif fd == self.driver_master:
                        os.write(self.device_master, data)

    def unplug_driver_end(self) -> None:
        with self._lock:
            os.close(self.driver_master)
            os.close(self._driver_slave)
            self.driver_master = self._driver_slave = None
            self.link.unlink()

    def plug_driver_end(self) -> None:
        master, slave, path = _pty()
        with self._lock:
            self.driver_master, self._driver_slave = master, slave
            self.link.symlink_to(path)

    def close(self) -> None:
        self._stop.set()
        self._thread.join(timeout=2.0)
        with self._lock:
            for fd in (self.driver_master, self._driver_slave, self.device_master, self._device_slave):
                if fd is not None:
                    os.close(fd)


class Slave:
    """pymodbus's RTU serial server on its own asyncio loop in a thread."""

    def __init__(self, port_path: str, device: SimDevice):
        self.corrupt_answers = 0  # flip one data byte in this many of the next answers
        self._loop = asyncio.new_event_loop()
        self._ready = threading.Event()
        self._server: ModbusSerialServer | None = None
        serve = self._serve(port_path, device)
        self._thread = threading.Thread(target=self._loop.run_until_complete, args=(serve,), daemon=True)
        self._thread.start()
        assert self._ready.wait(5.0), "pymodbus serial server did not start"

    def _trace(self, sending: bool, packet: bytes) -> bytes:
        if sending and self.corrupt_answers > 0 and len(packet) > 5:
            self.corrupt_answers -= 1
            return packet[:3] + bytes([packet[3] ^ 0xFF]) + packet[4:]  # first data byte: CRC no longer fits
        return packet

    async def _serve(self, port_path: str, device: SimDevice) -> None:
        # Parity "N" here: this kernel refuses a second tcsetattr with PARENB on a pty (EINVAL), which
        # pymodbus's transport does after opening. A pty carries bytes, not bits, so the driver's "even"
        # setting on the other end changes nothing on the wire.
        self._server = ModbusSerialServer(device, framer=FramerType.RTU, port=port_path, baudrate=19200,
                                          parity="N", stopbits=1, trace_packet=self._trace)
        await self._server.serve_forever(background=True)
        self._ready.set()
        await self._server.serving

    def close(self) -> None:
        if self._server is not None:
            asyncio.run_coroutine_threadsafe(self._server.shutdown(), self._loop).result(timeout=5.0)
        self._thread.join(timeout=5.0)
        if not self._thread.is_alive():
            self._loop.close()


def _device() -> SimDevice:
    bits = SimData(0, values=[False] * 16, datatype=DataType.BITS)
    bits2 = SimData(0, values=[False] * 16, datatype=DataType.BITS)
    holding = [
        # 0-1: 10.0 high word first; 2-3: 1.0 low word first; 4: int16 -1 (IEEE 754 / two's complement above)
        SimData(0, values=[0x4120, 0x0000, 0x0000, 0x3F80, 0xFFFF], datatype=DataType.REGISTERS),
        SimData(8, values=-100.0, datatype=DataType.FLOAT32),  # encoded by pymodbus itself
    ]
    inputs = [SimData(0, values=[1234], datatype=DataType.REGISTERS)]
    return SimDevice(id=1, simdata=([bits], [bits2], holding, inputs))


RIG_REGISTERS = """
[[source.registers]]
field = "P_tank"
unit_id = 1
address = 0
type = "float32"
[[source.registers]]
field = "P_feed"
unit_id = 1
address = 2
type = "float32"
word_order = "little"
[[source.registers]]
field = "T_code"
unit_id = 1
address = 4
type = "int16"
[[source.registers]]
field = "load"
unit_id = 1
address = 8
type = "float32"
scale = 9.80665e-3
offset = 0.5
[[source.registers]]
field = "flow"
unit_id = 1
table = "input"
address = 0
type = "uint16"
scale = 0.01
"""


# A register the test device does not have: every read of it gets exception 02 (illegal data address).
NOWHERE_REGISTER = """
[[source.registers]]
field = "nowhere"
unit_id = 1
address = 300
type = "uint16"
"""


def _source_text(port: str, extra_registers: str = "", rate: str = "20 Hz") -> str:
    return f"""
[source]
driver = "modbus_rtu"
port = "{port}"
baud = 19200
parity = "even"
poll_rate = "{rate}"
timeout = "0.1 s"
{RIG_REGISTERS}{extra_registers}
"""


def _config(port: str, extra_registers: str = "", rate: str = "20 Hz") -> ModbusRtuConfig:
    text = _source_text(port, extra_registers, rate)
    return ModbusRtuConfig.from_source_table(tomllib.loads(text)["source"], "rig.toml")


def _rig_text(port: str, extra_registers: str = "") -> str:
    """A whole rig reading _config's registers: tank pressure from P_tank, and a channel `spare` from the
    register named `nowhere` when extra_registers lists it."""
    channels = """
[[channels]]
name = "tank_pressure"
role = "tank_pressure"
field = "P_tank"
unit = "bar gauge"
calibration = { kind = "identity" }
"""
    if "nowhere" in extra_registers:
        channels += """
[[channels]]
name = "spare"
field = "nowhere"
unit = "1"
calibration = { kind = "identity" }
"""
    return MINIMAL_RIG + _source_text(port, extra_registers) + channels


@pytest.fixture
def line(tmp_path):
    cable = Cable(tmp_path)
    slave = Slave(cable.device_path, _device())
    try:
        yield cable, slave
    finally:
        slave.close()
        cable.close()


def _read_rows(driver, polls: int, timeout_s: float = 0.05, batches: list | None = None):
    """Call read() until `polls` rows came back (bounded), returning (rows, events) gathered; the RawBatches
    themselves are appended to `batches` when given."""
    t, lines, status, values, events = [], [], [], [], []
    for _ in range(polls * 20):
        batch = driver.read(timeout_s)
        if batches is not None and len(batch):
            batches.append(batch)
        t.extend(batch.t_s)
        lines.extend(batch.lines)
        status.extend(batch.status)
        values.extend(batch.values)
        events.extend(batch.events)
        if len(lines) >= polls:
            break
    return np.array(t), lines, np.array(status), np.array(values), events


def test_reads_known_registers_over_a_pty(line):
    cable, _slave = line
    clock = FakeClock(100.0)
    with ModbusRtuDriver(_config(str(cable.link)), clock) as driver:
        assert len(driver.requests) == 3  # hr0..4, hr8..9, ir0
        t, lines, status, values, events = _read_rows(driver, 3)
    assert list(status) == [LineStatus.OK] * 3
    assert driver.fields == ("P_tank", "P_feed", "T_code", "load", "flow")
    expected = [10.0, 1.0, -1.0, -100.0 * 9.80665e-3 + 0.5, 12.34]
    np.testing.assert_allclose(values, [expected] * 3, rtol=1e-6)
    assert lines[0] == (b"u1 hr0=0x4120,0x0000,0x0000,0x3F80,0xFFFF u1 hr8=0xC2C8,0x0000 u1 ir0=0x04D2")
    # 20 Hz on the injected clock: one poll every 0.05 s
    np.testing.assert_allclose(np.diff(t), 0.05, atol=1e-9)
    assert [e.kind for e in events] == ["connected"]
    assert driver.stats.polls == driver.stats.answered_polls == 3


def test_read_waits_on_the_clock_and_returns_nothing_before_the_next_poll(line):
    cable, _slave = line
    clock = FakeClock(0.0)
    with ModbusRtuDriver(_config(str(cable.link), rate="1 Hz"), clock) as driver:
        first = driver.read(0.05)
        assert len(first) == 1
        start = clock.now()
        empty = driver.read(0.2)
        assert len(empty) == 0 and clock.now() == pytest.approx(start + 0.2)
        for _ in range(10):
            if len(driver.read(0.2)):
                break
        assert clock.now() == pytest.approx(first.t_s[0] + 1.0)  # next poll exactly one period later


def test_silent_unit_gives_no_response_rows_then_lost_then_connected(line):
    cable, _slave = line
    clock = FakeClock(0.0)
    with ModbusRtuDriver(_config(str(cable.link)), clock) as driver:
        _, _, status, _, events = _read_rows(driver, 1)
        assert list(status) == [LineStatus.OK] and [e.kind for e in events] == ["connected"]
        cable.silent = True
        _, lines, status, values, events = _read_rows(driver, 4)
        assert list(status) == [LineStatus.NO_RESPONSE] * 4
        assert np.isnan(values).all()
        assert lines[0] == b"u1 hr0=no_response u1 hr8=no_response u1 ir0=no_response"
        assert [e.kind for e in events] == ["lost"]  # after the 3rd failed poll, once
        cable.silent = False
        _, _, status, _, events = _read_rows(driver, 1)
        assert list(status) == [LineStatus.OK] and [e.kind for e in events] == ["connected"]
    assert driver.stats.no_response == 12


def test_corrupted_answer_is_counted_not_raised(line):
    cable, slave = line
    with ModbusRtuDriver(_config(str(cable.link)), FakeClock(0.0)) as driver:
        _read_rows(driver, 1)
        slave.corrupt_answers = 1
        batches: list = []
        _, lines, status, values, _ = _read_rows(driver, 2, batches=batches)
    # The first request (hr0..4: P_tank, P_feed, T_code) came back corrupted; the other two were good, so the
    # row is good with those three fields missing, and the next poll is whole again.
    assert list(status) == [LineStatus.OK, LineStatus.OK]
    # unit 01, function 03, 10 bytes, then 0x41 with all bits flipped (0xBE): the bytes as they came are kept
    assert lines[0].startswith(b"u1 hr0=crc_error:01030abe200000")
    assert np.isnan(values[0][:3]).all() and values[0][4] == pytest.approx(12.34) and values[1][0] == 10.0
    missing = np.vstack([b.missing if b.missing is not None else np.zeros((len(b), 5), bool) for b in batches])
    assert missing.tolist() == [[True, True, True, False, False], [False] * 5]
    assert driver.stats.crc_errors == 1 and driver.stats.partial_polls == 1 and driver.stats.answered_polls == 2


def test_a_unit_that_always_refuses_leaves_the_other_fields_flowing(line):
    cable, _slave = line
    config = _config(str(cable.link), NOWHERE_REGISTER)
    with ModbusRtuDriver(config, FakeClock(0.0)) as driver:
        batches: list = []
        _, lines, status, values, events = _read_rows(driver, 3, batches=batches)
    assert list(status) == [LineStatus.OK] * 3  # the other requests answered: the rows are good
    # Modbus Application Protocol V1.1b3, 7: exception code 02 = ILLEGAL DATA ADDRESS, function 0x83
    assert b"u1 hr300=exception_02:0183" in lines[0]
    assert b"u1 hr0=0x4120" in lines[0]  # what did arrive stays in the record
    nowhere = config.fields.index("nowhere")
    assert np.isnan(values[:, nowhere]).all() and values[:, 0].tolist() == [10.0] * 3
    assert all(b.missing[:, nowhere].all() and b.missing.sum() == len(b) for b in batches)
    assert driver.stats.exception_responses == 3 and driver.stats.partial_polls == 3
    assert [e.kind for e in events] == ["connected"]  # the link is up: units answer


def test_a_missing_field_calibrates_to_missing_and_the_rest_to_values(line):
    """Through the live source: the field of the refusing request is flagged MISSING, the others are good."""
    from monitor.calibration import Calibrator, parse_channels
    from monitor.samples import Quality
    from monitor.sources.live import LiveSource

    cable, _slave = line
    rig = parse_rig(_rig_text(str(cable.link), NOWHERE_REGISTER), "rig.toml")
    driver = ModbusRtuDriver.from_rig(rig, FakeClock(0.0))
    channels = parse_channels(rig, driver.fields)
    source = LiveSource(driver, Calibrator(channels, driver.fields), rig.text)
    with source:
        readings = [source.read(0.05) for _ in range(20)]
    batches = [r.batch for r in readings if r is not None and len(r.batch)]
    assert batches
    for batch in batches:
        assert (batch.quality["spare"] == Quality.MISSING).all() and np.isnan(batch.values["spare"]).all()
        assert (batch.quality["tank_pressure"] == 0).all() and np.isfinite(batch.values["tank_pressure"]).all()


def test_port_that_disappears_is_reopened_at_most_every_half_second(line):
    cable, _slave = line
    clock = FakeClock(0.0)
    with ModbusRtuDriver(_config(str(cable.link)), clock) as driver:
        _read_rows(driver, 1)
        cable.unplug_driver_end()
        lost_at = clock.now()
        events, rows = [], []
        for _ in range(60):  # 3 s on the fake clock
            batch = driver.read(0.05)
            events.extend(batch.events)
            rows.extend(batch.status)
        assert driver.stats.port_failures == 1
        assert [e.kind for e in events] == ["lost"]
        assert list(rows) == [LineStatus.NO_RESPONSE]  # the poll that met the dead port; then none
        elapsed = clock.now() - lost_at
        assert 1 <= driver.stats.reopen_attempts <= elapsed / 0.5 + 1
        cable.plug_driver_end()
        _, _, status, _, events = _read_rows(driver, 2)
        assert [e.kind for e in events] == ["reconnecting", "connected"]
        assert list(status) == [LineStatus.OK] * 2


def test_port_that_cannot_be_opened_at_first_raises_source_error(tmp_path):
    missing = str(tmp_path / "ttyNOPE")
    driver = ModbusRtuDriver(_config(missing), FakeClock(0.0))
    with pytest.raises(SourceError, match="ttyNOPE"):
        driver.open()
