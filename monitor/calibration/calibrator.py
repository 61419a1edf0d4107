"""The Calibrator: good rows of raw batches to SI channel values with Quality flags; per-sample uncertainty."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from monitor.errors import ConfigError, PhysicsError
from monitor.physics.uncertainty import sensor_std_uncertainty
from monitor.samples import Batch, Quality

if TYPE_CHECKING:
    from drivers.base import RawBatch

from monitor.calibration.specs import ChannelSpec, _columns


class Calibrator:
    """Turns the good rows of RawBatches into Batches of SI channel values with Quality flags.

    Per sample and channel: a NaN or inf field is NON_FINITE (MISSING instead where the caller's `missing`
    mask says the field was absent from its line); a raw value outside the calibration's range (4-20 mA
    beyond NAMUR NE 43, outside a table) or a calibrated value that is not finite is OUT_OF_RANGE, and so is
    a value outside valid_range. Any flagged sample is NaN in values.

    Tare (stateful): a channel with tare_samples = N subtracts the mean of its first N usable samples (finite
    and within the calibration's range) from every later sample. Until the N-th has arrived there is no zero
    to subtract, so the channel's otherwise good samples up to and including it are flagged TARING (NaN):
    an untared thrust must not reach the impulse integral. reset_tare starts the count again.
    """

    def __init__(self, specs: tuple[ChannelSpec, ...], fields: tuple[str, ...]):
        """Build the calibrator with no tare measured yet.

        Args:
            specs: the channels, from parse_channels.
            fields: the driver's field names, in column order.

        Raises:
            ConfigError: a channel's field is not among fields, or two channels share a name.
        """
        self.specs = tuple(specs)
        names = [s.name for s in self.specs]
        for index, name in enumerate(names):
            if name in names[:index]:
                raise ConfigError(f"channels[{index}].name", name, "a name not used by another channel")
        self.fields = tuple(fields)
        self._columns = {self.fields: _columns(self.specs, self.fields)}
        self._tare_sum = {s.name: 0.0 for s in self.specs}
        self._tare_count = {s.name: 0 for s in self.specs}
        self._tare_offset: dict[str, float | None] = {s.name: None for s in self.specs}

    @property
    def channels(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.specs)

    def tare_offset_si(self, name: str) -> float | None:
        """The zero subtracted from channel `name`, SI unit, or None while it is still being measured."""
        return self._tare_offset[name]

    def reset_tare(self, name: str | None = None) -> None:
        """Measure the zero of one channel (or of all, with None) again from the next good samples."""
        for n in self.channels if name is None else (name,):
            self._tare_sum[n], self._tare_count[n], self._tare_offset[n] = 0.0, 0, None

    def apply(self, raw: RawBatch, missing: np.ndarray | None = None) -> Batch:
        """Calibrate the rows of raw whose status is OK, one numpy pass per channel.

        Args:
            raw: a driver's batch; its fields may differ from the constructor's (a header read later).
            missing: optional (lines, fields) bool array, True where a field was absent from its line.

        Returns:
            Batch with one sample per good row: t_s, values (SI, NaN where flagged), quality (uint8),
            device_time_s and sequence of those rows.

        Raises:
            ConfigError: raw has good rows and lacks a field a channel needs.
        """
        ok = raw.ok
        t_s = np.asarray(raw.t_s)[ok]
        device = None if raw.device_time_s is None else np.asarray(raw.device_time_s)[ok]
        sequence = None if raw.sequence is None else np.asarray(raw.sequence)[ok]
        if t_s.size == 0:
            empty = Batch.empty(self.channels)
            return Batch(t_s=t_s, values=empty.values, quality=empty.quality, device_time_s=device, sequence=sequence)
        fields = tuple(raw.fields)
        if fields not in self._columns:
            self._columns[fields] = _columns(self.specs, fields)
        columns = self._columns[fields]
        block = np.asarray(raw.values, dtype=float)[ok][:, columns]
        absent = None if missing is None else np.asarray(missing, dtype=bool)[ok][:, columns]
        values: dict[str, np.ndarray] = {}
        quality: dict[str, np.ndarray] = {}
        for k, spec in enumerate(self.specs):
            values[spec.name], quality[spec.name] = self._channel(spec, block[:, k], None if absent is None else absent[:, k])
        return Batch(t_s=t_s, values=values, quality=quality, device_time_s=device, sequence=sequence)

    def _channel(self, spec: ChannelSpec, raw: np.ndarray, absent: np.ndarray | None):
        with np.errstate(all="ignore"):
            finite = np.isfinite(raw)
            value, outside = spec.calibration.apply(raw)
            si = value * spec.si_scale + spec.si_offset
        flags = np.zeros(raw.shape, dtype=np.uint8)
        if absent is None:
            flags[~finite] = Quality.NON_FINITE
        else:
            flags[~finite & absent] = Quality.MISSING
            flags[~finite & ~absent] = Quality.NON_FINITE
        usable = finite & ~outside & np.isfinite(si)
        flags[finite & ~usable] |= np.uint8(Quality.OUT_OF_RANGE)
        if spec.tare_samples:
            si, taring = self._tare(spec, si, usable)
            flags[taring & (flags == 0)] = Quality.TARING
        low, high = spec.valid_range_si
        flags[usable & ((si < low) | (si > high))] |= np.uint8(Quality.OUT_OF_RANGE)
        return np.where(flags == 0, si, np.nan), flags

    def _tare(self, spec: ChannelSpec, si: np.ndarray, usable: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        name, taring = spec.name, np.zeros(si.shape, dtype=bool)
        if self._tare_offset[name] is None:
            take = np.flatnonzero(usable)[: spec.tare_samples - self._tare_count[name]]
            self._tare_sum[name] += float(si[take].sum())
            self._tare_count[name] += int(take.size)
            if self._tare_count[name] < spec.tare_samples:
                taring[:] = True
                return si, taring
            self._tare_offset[name] = self._tare_sum[name] / spec.tare_samples
            taring[: take[-1] + 1] = True
        return si - self._tare_offset[name], taring


def std_uncertainty(spec: ChannelSpec, values_si: np.ndarray) -> np.ndarray:
    """Per-sample standard uncertainty of a channel's SI values from its datasheet accuracy.

    Uses monitor.physics.uncertainty.sensor_std_uncertainty (GUM 4.3.7 rectangular, or 4.3.3 normal k = 2).
    "% of reading" is taken of the reading in the sensor's own frame, values_si - si_offset: a gauge
    sensor's gauge pressure, a Celsius sensor's Celsius temperature (in SI-sized units).

    Args:
        spec: the channel.
        values_si: calibrated values, SI unit of spec.quantity; NaN samples (flagged bad) give NaN.

    Returns:
        Standard uncertainty u (k = 1), SI unit of spec.quantity, same shape as values_si.

    Raises:
        PhysicsError: the channel's table has no accuracy.
    """
    if spec.accuracy is None:
        raise PhysicsError(
            f"channel {spec.name!r}: accuracy = None: expected an accuracy table in its [[channels]] entry to give an uncertainty"
        )
    values = np.asarray(values_si, dtype=float)
    good = np.isfinite(values)
    a = spec.accuracy
    terms = (a.percent_of_reading, a.percent_of_full_scale, a.full_scale, a.absolute, a.distribution)
    if good.all():  # the usual case: no gather and scatter of the good samples
        return sensor_std_uncertainty(values - spec.si_offset, *terms)  # type: ignore[arg-type]
    out = np.full(values.shape, np.nan)
    out[good] = sensor_std_uncertainty(values[good] - spec.si_offset, *terms)  # type: ignore[arg-type]
    return out
