"""A monitoring session: acquisition, engine and recorder on a worker thread; immutable snapshots for the screen.

The screen never blocks acquisition: the worker reads the source, runs the pipeline (recorder, link health,
engine) and publishes a Snapshot at most every `publish_s`; the UI takes the newest one whenever it redraws.
Operator actions (acknowledge, shelve, pause, seek, speed) are queued and carried out on the worker thread,
so the engine is only ever touched by one thread.
"""

from __future__ import annotations

import math
import queue
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from monitor.clock import Clock
from monitor.config import Rig
from monitor.engine import Engine, EngineState
from monitor.health import HealthSnapshot, LinkHealth
from monitor.pipeline import ListenerFailure, Pipeline
from monitor.sources.base import SampleSource
from monitor.sources.replay import ReplaySource


@dataclass(frozen=True)
class ReplayPosition:
    """Where a replay stands: log time, its span, speed and whether it is paused or finished."""

    position_s: float
    start_s: float
    end_s: float
    speed: float
    paused: bool
    finished: bool


@dataclass(frozen=True)
class Snapshot:
    """Everything a screen shows at one moment; built on the worker thread, never changed afterwards."""

    t_s: float  # run time the snapshot describes, s
    mode: str  # "live", "replay" or "demo"
    rig: Rig
    engine: EngineState
    health: HealthSnapshot
    trends: tuple  # (times, {signal: values}) over the trend window
    recording_path: Path | None
    recording_rows: int
    replay: ReplayPosition | None
    failures: tuple[ListenerFailure, ...]
    stopped: bool = False
    notes: tuple[str, ...] = field(default_factory=tuple)


class Session:
    """Runs a source through recorder, link health and engine on a worker thread.

    Args:
        rig: the rig the data belong to.
        source: a LiveSource (opened by start()) or a ReplaySource.
        clock: the run clock for live sources (times since the run started); replay uses its own position.
        mode: "live", "replay" or "demo", shown on screen.
        writer: the run-log writer (live runs), or None.
        publish_s: the shortest time between two snapshots, s.
        trend_span_s: how much history the snapshot's trends carry, s.
        min_step_s: the shortest time between two reads (wall clock), so that each batch carries enough data
            to keep the per-batch cost of the engine small; 0 reads as fast as data come.
    """

    def __init__(
        self,
        rig: Rig,
        source: SampleSource,
        clock: Clock,
        mode: str,
        writer=None,
        publish_s: float = 0.05,
        trend_span_s: float = 60.0,
        min_step_s: float = 0.0,
    ):
        self.rig = rig
        self.source = source
        self.clock = clock
        self.mode = mode
        self.writer = writer
        self.publish_s = publish_s
        self.trend_span_s = trend_span_s
        self.min_step_s = min_step_s  # a step costs a few ms whatever its size: let data gather for at least this
        self.health = LinkHealth(source.channels)
        self.engine = Engine(rig, source.channels, writer=writer)
        listeners = ([writer] if writer is not None else []) + [self.health, self.engine]
        self.pipeline = Pipeline(source, listeners, clock)
        self._actions: queue.SimpleQueue[Callable[[], None]] = queue.SimpleQueue()
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._snapshot: Snapshot | None = None
        self._notes: list[str] = []
        self._last_publish = -math.inf

    # --- lifecycle ----------------------------------------------------------------------------------------
    def start(self) -> None:
        """Open the source and start the worker thread."""
        self.source.open()
        self._publish(force=True)
        self._thread = threading.Thread(target=self._run, name="ejecta-acquisition", daemon=True)
        self._thread.start()

    def stop(self, timeout_s: float = 5.0) -> None:
        """Stop the worker, stop every listener (the recorder flushes and closes) and close the source."""
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout_s)
        else:
            self._finish()

    @property
    def running(self) -> bool:
        return self._thread is not None and self._thread.is_alive()

    def snapshot(self) -> Snapshot | None:
        """The newest snapshot (thread-safe: a reference read)."""
        return self._snapshot

    # --- operator actions (queued for the worker) ---------------------------------------------------------
    def acknowledge(self, name: str) -> None:
        self._actions.put(lambda: self.engine.acknowledge(name, self.now_s()))

    def acknowledge_all(self) -> None:
        self._actions.put(lambda: self.engine.acknowledge_all(self.now_s()))

    def shelve(self, name: str, duration_s: float) -> None:
        self._actions.put(lambda: self._guarded(lambda: self.engine.shelve(name, duration_s, self.now_s())))

    def unshelve(self, name: str) -> None:
        self._actions.put(lambda: self._guarded(lambda: self.engine.unshelve(name, self.now_s())))

    def toggle_pause(self) -> None:
        if isinstance(self.source, ReplaySource):
            pacer = self.source.pacer
            self._actions.put(pacer.resume if pacer.paused else pacer.pause)

    def set_speed(self, speed: float) -> None:
        if isinstance(self.source, ReplaySource):
            self._actions.put(lambda: self.source.pacer.set_speed(speed))

    def seek_by(self, delta_s: float) -> None:
        """Jump forward (or back: the engine then sees time go back and holds it; a note says so)."""
        if isinstance(self.source, ReplaySource):
            self._actions.put(lambda: self._seek(self.source.position_s + delta_s))

    def step(self, rows: int = 1) -> None:
        if isinstance(self.source, ReplaySource):
            self._actions.put(lambda: self._deliver(self.source.step(rows)))

    def pump(self, timeout_s: float = 0.0) -> Snapshot | None:
        """One turn of the worker's loop on the caller's thread, then a fresh snapshot.

        For tests and tools that drive a session step by step (on a FakeClock) instead of start()ing its
        thread; the source is opened on the first call. Never use it while the worker thread runs.

        Args:
            timeout_s: how long the source may wait for data, s (on the session's clock).

        Returns:
            The snapshot published by this turn.
        """
        if self.running:
            raise RuntimeError("Session.pump() drives a session without its worker thread; this one was started")
        self.source.open()
        while True:
            try:
                self._actions.get_nowait()()
            except queue.Empty:
                break
        read_at_s = self.now_s()
        self.pipeline.step(timeout_s)
        if not self.pipeline.finished:
            self.engine.advance_to(self._judged_until(read_at_s))
        self._publish(force=True)
        return self._snapshot

    # --- worker -------------------------------------------------------------------------------------------
    def now_s(self) -> float:
        """Run time now: the run clock (live) or the replay position."""
        if isinstance(self.source, ReplaySource):
            return self.source.delivered_s  # everything up to here has been handed to the engine
        return self.clock.now()

    def _judged_until(self, read_at_s: float) -> float:
        """How far silences may be judged after a read: a replay, to what it has delivered; a live source, to
        the moment the read began (not to now: samples that came due while a long batch was being processed
        are not read yet, and judging past them would call every channel stale)."""
        return self.now_s() if isinstance(self.source, ReplaySource) else read_at_s

    def _run(self) -> None:
        try:
            while not self._stop.is_set():
                began = time.monotonic()
                while True:
                    try:
                        self._actions.get_nowait()()
                    except queue.Empty:
                        break
                read_at_s = self.now_s()  # every sample due by now is in the coming read
                self.pipeline.step(0.05)
                if not self.pipeline.finished:
                    self.engine.advance_to(self._judged_until(read_at_s))
                self._publish()
                if self.pipeline.finished:
                    self._stop.wait(0.05)  # a finished replay stays on screen; actions still work
                else:
                    self._stop.wait(max(0.0, self.min_step_s - (time.monotonic() - began)))
        finally:
            self._finish()

    def _finish(self) -> None:
        if getattr(self, "_finished", False):
            return
        self._finished = True
        self.pipeline.stop()
        self.source.close()
        self._publish(force=True, stopped=True)

    def _deliver(self, reading) -> None:
        if reading is not None:
            for listener in self.pipeline.listeners:
                listener.on_reading(reading)

    def _seek(self, position_s: float) -> None:
        if position_s < self.source.position_s:
            self._notes.append("seeking back: the estimates and alerts carry on from where they were")
        self.source.seek(position_s)

    def _guarded(self, action: Callable[[], None]) -> None:
        from monitor.errors import MonitorError

        try:
            action()
        except MonitorError as exc:
            self._notes.append(str(exc))

    def _publish(self, force: bool = False, stopped: bool = False) -> None:
        now = self.clock.now()
        if not force and now - self._last_publish < self.publish_s:
            return
        self._last_publish = now
        run_now = self.now_s()
        replay = None
        if isinstance(self.source, ReplaySource):
            p = self.source.pacer
            replay = ReplayPosition(
                min(p.position_s(), self.source.end_s),
                self.source.start_s,
                self.source.end_s,
                p.speed,
                p.paused,
                self.pipeline.finished,
            )
        self._snapshot = Snapshot(
            t_s=run_now,
            mode=self.mode,
            rig=self.rig,
            engine=self.engine.state(),
            health=self.health.snapshot(run_now),
            trends=self.engine.trends.window(self.trend_span_s),
            recording_path=None if self.writer is None else self.writer.path,
            recording_rows=0 if self.writer is None else self.writer.rows,
            replay=replay,
            failures=tuple(self.pipeline.failures[-5:]),
            stopped=stopped,
            notes=tuple(self._notes[-3:]),
        )
