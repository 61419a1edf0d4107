"""Time for everything that waits or stamps: a Clock protocol, the real monotonic clock, and a fake for tests."""

from __future__ import annotations

import time
from typing import Protocol


class Clock(Protocol):
    """Monotonic seconds and sleeping; passed in so that tests never wait on the wall."""

    def now(self) -> float: ...

    def sleep(self, seconds: float) -> None: ...


class MonotonicClock:
    """The host's monotonic clock (unaffected by wall-clock jumps)."""

    def now(self) -> float:
        return time.monotonic()

    def sleep(self, seconds: float) -> None:
        if seconds > 0.0:
            time.sleep(seconds)


class FakeClock:
    """A clock that moves only when told: sleep() advances it instantly."""

    def __init__(self, start_s: float = 0.0):
        self.t_s = start_s

    def now(self) -> float:
        return self.t_s

    def sleep(self, seconds: float) -> None:
        if seconds > 0.0:
            self.t_s += seconds

    def advance(self, seconds: float) -> None:
        self.t_s += seconds


class RunClock:
    """Seconds since a run started, read from another clock: the time axis of every sample and log row."""

    def __init__(self, clock: Clock):
        self.clock = clock
        self.start_s = clock.now()

    def now(self) -> float:
        return self.clock.now() - self.start_s

    def sleep(self, seconds: float) -> None:
        self.clock.sleep(seconds)

    def restart(self) -> None:
        self.start_s = self.clock.now()
