"""Time integration: a base class with the bookkeeping, one module per method."""

from heatsoak.core.solve.stepping.base import Integrator, Progress, step_times
from heatsoak.core.solve.stepping.theta import THETA_PRESETS, ThetaMethod, lambda_max

__all__ = ["Integrator", "Progress", "step_times", "ThetaMethod", "THETA_PRESETS", "lambda_max"]
