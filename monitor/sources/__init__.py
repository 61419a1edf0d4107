"""Where samples come from: live drivers with calibration, or a recorded run played back at any pace."""
