"""Modbus RTU driver: polls holding and input registers of serial units and turns each poll into one raw row.

Framing, CRC and PDU encoding come from pymodbus (FramerRTU, DecodePDU, the read-register requests); the
serial port is pyserial's. This module adds poll pacing on the injected clock, partial polls and link-loss
bookkeeping; the rig-file table, register decoding and request planning are in drivers.modbus_config.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

import numpy as np
import serial
from pymodbus.framer import FramerRTU
from pymodbus.pdu import DecodePDU
from pymodbus.pdu.register_message import ReadHoldingRegistersRequest, ReadInputRegistersRequest
from serial.serialutil import Timeout

from drivers.base import Driver, LineStatus, RawBatch
from drivers.modbus_config import ModbusRtuConfig, ReadRequest, decode_registers, plan_requests
from monitor.clock import Clock
from monitor.config import Rig
from monitor.errors import ConfigError, SourceError
from monitor.samples import LinkEvent

try:  # pyserial lets termios.error through from tcflush/tcsetattr on POSIX ports
    import termios

    _PORT_ERRORS: tuple[type[Exception], ...] = (serial.SerialException, OSError, termios.error)
except ImportError:  # pragma: no cover - not POSIX
    _PORT_ERRORS = (serial.SerialException, OSError)

_PARITY = {"none": serial.PARITY_NONE, "even": serial.PARITY_EVEN, "odd": serial.PARITY_ODD}
_TABLE_CODE = {"holding": "hr", "input": "ir"}
_REQUEST_CLASS = {"holding": ReadHoldingRegistersRequest, "input": ReadInputRegistersRequest}
REOPEN_INTERVAL_S = 0.5  # a vanished port is tried again at most this often
_READ_SLICE_S = 0.005  # the port's own read timeout; the per-request deadline is kept by a pyserial Timeout
_Outcome = tuple[LineStatus, "list[int] | None", bytes]  # status, registers (None if bad), record text
_Row = tuple[float, bytes, LineStatus, np.ndarray, np.ndarray]  # t_s, record, status, values, missing mask


@dataclass
class ModbusLinkStats:
    """Running counts of what happened on the line since the driver was built."""

    polls: int = 0
    answered_polls: int = 0  # polls in which every request got a good answer
    partial_polls: int = 0  # polls in which some requests got a good answer and some did not
    no_response: int = 0  # requests that got nothing back
    crc_errors: int = 0  # answers whose CRC did not match
    exception_responses: int = 0  # answers that were Modbus exceptions (illegal address, device failure, ...)
    malformed: int = 0  # answers cut short, from another unit, or not the registers asked for
    port_failures: int = 0
    reopen_attempts: int = 0


class ModbusRtuDriver(Driver):
    """Polls every configured register once per poll period; one RawBatch row per poll.

    A row's line is a text record of what came off the wire, e.g. b"u1 hr0=0x4120,0x0000 u2 ir4=no_response".
    A row is OK when at least one request of the poll got a good answer: the fields of the requests that
    failed are NaN and marked in the row's `missing` mask, so one faulty unit does not blind the others.
    When no request got a good answer, the row's status is that of the first failure (NO_RESPONSE: nothing
    came back; GARBAGE: bad CRC, exception response, or malformed) and all its values are NaN. A poll waits
    at most (timeout + the answer's time on the wire) per request.
    """

    def __init__(self, config: ModbusRtuConfig, clock: Clock):
        self.config = config
        self.fields = config.fields
        self.requests = plan_requests(config.registers)
        self.stats = ModbusLinkStats()
        self._clock = clock
        self._decoder = DecodePDU(False)
        self._framer = FramerRTU(self._decoder)
        self._port: Any = None
        self._opened_once = False
        self._next_poll_s = 0.0
        self._next_reopen_s = 0.0
        self._failed_polls = 0
        self._link = "unknown"  # unknown | up | lost
        self._events: list[LinkEvent] = []

    @classmethod
    def from_rig(cls, rig: Rig, clock: Clock, port: str | None = None) -> "ModbusRtuDriver":
        """Build the driver from the rig's [source] table; `port` (device path or pyserial URL) overrides it.

        Raises:
            ConfigError: the [source] table is wrong (the message names the key), or `port` is empty.
        """
        config = ModbusRtuConfig.from_source_table(rig.source, rig.source_path)
        if port is not None:
            if not isinstance(port, str) or not port.strip():
                raise ConfigError("port", port, "a serial device path or pyserial URL")
            config = dataclasses.replace(config, port=port.strip())
        return cls(config, clock)

    def _open_port(self) -> Any:
        c = self.config
        return serial.serial_for_url(
            c.port,
            baudrate=c.baud,
            bytesize=serial.EIGHTBITS,
            parity=_PARITY[c.parity],
            stopbits=c.stop_bits,
            timeout=_READ_SLICE_S,
            write_timeout=c.timeout_s,
            exclusive=True,
        )

    def _open(self) -> None:
        if self._port is not None:
            return
        try:
            self._port = self._open_port()
        except (*_PORT_ERRORS, ValueError) as exc:
            raise SourceError(f"Modbus RTU port {self.config.port!r} cannot be opened: {exc}") from exc
        self._opened_once = True
        self._next_poll_s = self._clock.now()

    def _close(self) -> None:
        self._drop_port()

    def _drop_port(self) -> None:
        port, self._port = self._port, None
        if port is not None:
            try:
                port.close()
            except _PORT_ERRORS:
                pass

    def _read(self, timeout_s: float) -> RawBatch:
        if not self._opened_once:
            self._open()
        now = self._clock.now()
        deadline = now + max(timeout_s, 0.0)
        while True:
            if self._port is None and now >= self._next_reopen_s - 1e-9:
                self._try_reopen(now)
            if self._port is not None and now >= self._next_poll_s - 1e-9:
                return self._batch([self._poll()])
            wake = self._next_poll_s if self._port is not None else self._next_reopen_s
            if now >= deadline:
                return self._batch([])
            self._clock.sleep(min(wake, deadline) - now)
            now = self._clock.now()

    def _batch(self, rows: list[_Row]) -> RawBatch:
        events, self._events = self._events, []
        if not rows:
            return RawBatch.empty(self.fields, events)
        missing = np.vstack([r[4] for r in rows])
        return RawBatch(
            t_s=np.array([r[0] for r in rows], dtype=float),
            lines=[r[1] for r in rows],
            status=np.array([r[2] for r in rows], dtype=np.uint8),
            fields=self.fields,
            values=np.vstack([r[3] for r in rows]),
            events=events,
            missing=missing if missing.any() else None,
        )

    def _poll(self) -> _Row:
        values = np.full(len(self.fields), np.nan)
        missing = np.zeros(len(self.fields), dtype=bool)
        parts: list[bytes] = []
        failure: LineStatus | None = None
        answered = 0
        silent: list[int] = []
        for request in self.requests:
            if self._port is None:
                outcome, registers, text = LineStatus.NO_RESPONSE, None, b"not_sent"
            else:
                outcome, registers, text = self._transact(request)
            parts.append(f"u{request.unit_id} {_TABLE_CODE[request.table]}{request.address}=".encode() + text)
            if registers is None:
                failure = outcome if failure is None else failure
                silent.append(request.unit_id)
                missing[list(request.members)] = True
                continue
            answered += 1
            for i in request.members:
                spec = self.config.registers[i]
                start = spec.address - request.address
                raw = decode_registers(registers[start : start + spec.count], spec.type, spec.word_order)
                values[i] = raw * spec.scale + spec.offset
        t_s = self._clock.now()
        # Keep the cadence; after a slow poll or a late caller, poll again at once but never in a burst.
        self._next_poll_s = max(self._next_poll_s + self.config.poll_period_s, t_s)
        status = LineStatus.OK if answered else failure
        self._account(status, failure is not None, t_s, silent)
        if status != LineStatus.OK:
            values[:] = np.nan
            missing[:] = False  # a bad row has no fields at all
        return t_s, b" ".join(parts), status, values, missing

    def _account(self, status: LineStatus, partial: bool, t_s: float, silent: list[int]) -> None:
        self.stats.polls += 1
        if status == LineStatus.OK:
            if partial:
                self.stats.partial_polls += 1
            else:
                self.stats.answered_polls += 1
            self._failed_polls = 0
            if self._link != "up":
                self._link = "up"
                detail = f"Modbus units answering on {self.config.port}"
                self._events.append(LinkEvent(t_s, "connected", detail))
            return
        self._failed_polls += 1
        if self._failed_polls >= self.config.lost_after_polls and self._link != "lost":
            self._link = "lost"
            units = ", ".join(str(u) for u in sorted(set(silent)))
            detail = f"unit(s) {units} on {self.config.port}: {self._failed_polls} polls in a row failed"
            self._events.append(LinkEvent(t_s, "lost", detail))

    def _transact(self, request: ReadRequest) -> _Outcome:
        """Send one read and wait for its answer; (status, registers or None, text for the raw record)."""
        kind = _REQUEST_CLASS[request.table]
        pdu = kind(address=request.address, count=request.count, dev_id=request.unit_id)
        frame = self._framer.buildFrame(pdu)
        expected_bytes = 5 + 2 * request.count  # unit, function, byte count, data, CRC
        self._clock.sleep(self.config.frame_gap_s)
        try:
            self._port.reset_input_buffer()  # a late answer to an earlier request must not pass for this one
            self._port.write(frame)
            received = self._receive(expected_bytes)
        except serial.SerialTimeoutException:
            self.stats.no_response += 1
            return LineStatus.NO_RESPONSE, None, b"write_timeout"
        except _PORT_ERRORS as exc:
            self._port_failed(exc)
            return LineStatus.NO_RESPONSE, None, b"port_error"
        return self._interpret(request, pdu.function_code, received)

    def _receive(self, expected_bytes: int) -> bytes:
        timer = Timeout(self.config.timeout_s + expected_bytes * self.config.char_time_s)
        received = bytearray()
        while True:
            chunk = self._port.read(max(1, self._port.in_waiting))
            received += chunk
            if chunk and self._framer.decode(bytes(received))[0]:
                return bytes(received)
            if timer.expired() or len(received) >= FramerRTU.MAX_SIZE:
                return bytes(received)

    def _interpret(self, request: ReadRequest, function_code: int, received: bytes) -> _Outcome:
        if not received:
            self.stats.no_response += 1
            return LineStatus.NO_RESPONSE, None, b"no_response"
        wire = received.hex().encode()
        used, unit_id, _tid, pdu_bytes = self._framer.decode(received)
        if not used:
            self.stats.malformed += 1
            return LineStatus.GARBAGE, None, b"cut_short:" + wire
        if not pdu_bytes:
            self.stats.crc_errors += 1
            return LineStatus.GARBAGE, None, b"crc_error:" + wire
        answer = self._decoder.decode(pdu_bytes) if unit_id == request.unit_id else None
        if answer is not None and answer.isError():
            self.stats.exception_responses += 1
            return LineStatus.GARBAGE, None, f"exception_{answer.exception_code:02x}:".encode() + wire
        if answer is None or answer.function_code != function_code or len(answer.registers) != request.count:
            self.stats.malformed += 1
            return LineStatus.GARBAGE, None, b"unexpected:" + wire
        registers = [int(r) for r in answer.registers]
        return LineStatus.OK, registers, ",".join(f"0x{r:04X}" for r in registers).encode()

    def _port_failed(self, exc: Exception) -> None:
        self._drop_port()
        self.stats.port_failures += 1
        now = self._clock.now()
        self._next_reopen_s = now + REOPEN_INTERVAL_S
        if self._link != "lost":
            self._link = "lost"
            detail = f"port {self.config.port} failed ({exc}); reopening every {REOPEN_INTERVAL_S:g} s"
            self._events.append(LinkEvent(now, "lost", detail))

    def _try_reopen(self, now: float) -> None:
        self._next_reopen_s = now + REOPEN_INTERVAL_S
        self.stats.reopen_attempts += 1
        try:
            self._port = self._open_port()
        except (*_PORT_ERRORS, ValueError):
            return
        self._next_poll_s = now
        detail = f"port {self.config.port} reopened; waiting for an answer"
        self._events.append(LinkEvent(now, "reconnecting", detail))
