"""Streaming estimators: calibrated batches in; thrust, Isp, propellant gauges, leak, reserve and projections out.

Estimator(rig, channels, settings).update(batch) -> Signals gives every estimate per sample (with standard
uncertainties); .state() gives the latest values as an EstimateState. docs/estimates.md explains each number.
"""

from monitor.estimators.estimator import Estimator
from monitor.estimators.settings import EstimationSettings, parse_estimation
from monitor.estimators.state import ESTIMATES, WITH_STD, EstimateState

__all__ = ["ESTIMATES", "WITH_STD", "EstimateState", "EstimationSettings", "Estimator", "parse_estimation"]
