"""Fan-out of source readings to listeners (recorder, link health, engine), collecting their failures."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol, runtime_checkable

from monitor.clock import Clock
from monitor.samples import SourceReading
from monitor.sources.base import SampleSource


@runtime_checkable
class Listener(Protocol):
    """Anything that consumes readings: on_reading for each one, stop once at the end."""

    def on_reading(self, reading: SourceReading) -> None: ...

    def stop(self) -> None: ...


@dataclass(frozen=True)
class ListenerFailure:
    """A listener raised: which one, when, and what it said. Kept for the status line and the report."""

    listener: str
    t_s: float
    message: str


class Pipeline:
    """Reads a source and hands every reading to each listener in order.

    A listener that raises does not stop the others or the acquisition: the failure is kept in `failures`
    (bounded) and the listener goes on receiving readings, because losing the recording over a display bug
    would be the worse outcome. Listeners with a tick(now_s) method get it after every read, so the recorder
    flushes on time even when no data arrive.
    """

    MAX_FAILURES = 1000

    def __init__(self, source: SampleSource, listeners: list[object], clock: Clock):
        self.source = source
        self.listeners = list(listeners)
        self.clock = clock
        self.failures: list[ListenerFailure] = []
        self.readings = 0
        self.finished = False

    def step(self, timeout_s: float = 0.05) -> SourceReading | None:
        """Read once and fan out; returns the reading, or None once the source has ended."""
        if self.finished:
            return None
        reading = self.source.read(timeout_s)
        now = self.clock.now()
        if reading is None:
            self.finished = True
        else:
            self.readings += 1
            for listener in self.listeners:
                self._call(listener, "on_reading", now, reading)
        for listener in self.listeners:
            if hasattr(listener, "tick"):
                self._call(listener, "tick", now, now)
        return reading

    def run(self, max_steps: int | None = None, timeout_s: float = 0.05) -> None:
        """Step until the source ends (or max_steps)."""
        steps = 0
        while not self.finished and (max_steps is None or steps < max_steps):
            self.step(timeout_s)
            steps += 1

    def stop(self) -> None:
        """Stop every listener (the recorder flushes and closes); safe to call twice."""
        now = self.clock.now()
        for listener in self.listeners:
            self._call(listener, "stop", now)
        self.listeners = []

    def _call(self, listener: object, method: str, now: float, *args: object) -> None:
        try:
            getattr(listener, method)(*args)
        except Exception as exc:  # noqa: BLE001 - one listener must not take down acquisition or recording
            if len(self.failures) < self.MAX_FAILURES:
                name = type(listener).__name__
                self.failures.append(ListenerFailure(name, now, f"{method}: {type(exc).__name__}: {exc}"))
