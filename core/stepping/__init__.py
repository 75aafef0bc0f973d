"""Time integration: a base class with the bookkeeping, one module per method."""

from .base import Integrator, Progress, step_times
from .theta import THETA_PRESETS, ThetaMethod, lambda_max

__all__ = ["Integrator", "Progress", "step_times", "ThetaMethod", "THETA_PRESETS", "lambda_max"]
