"""Estimation with no chemistry in it: any model mapping a parameter matrix (m, p) to
predictions (m, n). Least squares with intervals and identifiability, model comparison, and
posterior sampling."""

from __future__ import annotations

from kinfit.estimate.problem import ErrorModel, Problem, Space

__all__ = ["Problem", "Space", "ErrorModel"]
