"""The one interface the pipeline reads from, whether the data are live or recorded."""

from __future__ import annotations

from abc import ABC, abstractmethod

from monitor.samples import SourceReading


class SampleSource(ABC):
    """An iterator of SourceReadings and a context manager.

    read() returns what arrived since the last call (possibly an empty reading) within timeout_s, or None
    when the source has ended for good (the end of a recorded run). A live source never ends by itself.
    """

    channels: tuple = ()  # ChannelSpec of each calibrated channel, in column order
    live: bool = True
    rig_text: str = ""

    def __enter__(self) -> "SampleSource":
        self.open()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __iter__(self):
        while (reading := self.read()) is not None:
            yield reading

    def open(self) -> None:
        """Open the underlying link or file."""

    @abstractmethod
    def read(self, timeout_s: float = 0.05) -> SourceReading | None: ...

    def close(self) -> None:
        """Release the link or file; safe to call twice."""
