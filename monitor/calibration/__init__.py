"""Sensor channels: the rig file's [[channels]] tables, and the vectorised raw -> SI calibration of a batch.

A channel takes one driver field, maps each raw number to a value in the channel's `unit` (calibration),
then to SI by an affine map value_si = value * si_scale + si_offset. Every unit change ejecta makes here is
affine (bar gauge -> Pa absolute adds the rig's ambient pressure, C -> K adds 273.15, a standard-flow unit
-> kg/s multiplies by the reference density), and scale and offset come from pint through monitor.units,
or from monitor.physics.flow_units for standard-flow units. The format is documented in docs/channels.md.
"""

from monitor.calibration.calibrator import Calibrator, std_uncertainty
from monitor.calibration.kinds import (
    KINDS,
    LOOP_HIGH_MA,
    LOOP_LOW_MA,
    NAMUR_HIGH_MA,
    NAMUR_LOW_MA,
    ROLES,
    Calibration,
    Current420,
    Identity,
    Linear,
    Polynomial,
    Ratiometric,
    Table,
)
from monitor.calibration.specs import Accuracy, ChannelSpec, StandardFlow, parse_channels

__all__ = [
    "KINDS",
    "LOOP_HIGH_MA",
    "LOOP_LOW_MA",
    "NAMUR_HIGH_MA",
    "NAMUR_LOW_MA",
    "ROLES",
    "Accuracy",
    "Calibration",
    "Calibrator",
    "ChannelSpec",
    "Current420",
    "Identity",
    "Linear",
    "Polynomial",
    "Ratiometric",
    "StandardFlow",
    "Table",
    "parse_channels",
    "std_uncertainty",
]
