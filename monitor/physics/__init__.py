"""Pure physics: functions on floats or numpy arrays in SI units, with no I/O and no clock."""
