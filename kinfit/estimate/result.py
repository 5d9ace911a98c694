"""The immutable outcome of a least-squares fit (:class:`Estimate`)."""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.errors import StudyError
from kinfit.estimate.statistics import FitStatistics

__all__ = ["Estimate"]


# --------------------------------------------------------------------------------------------
# the result
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True, slots=True)
class Estimate:
    """Immutable outcome of :func:`fit_problem` (numpy arrays are read-only).

    Attributes
    ----------
    names : tuple of str
        Parameter names, in column order.
    transforms : tuple of str
        ``"none"`` or ``"log"`` per parameter (as in the problem's :class:`Space`).
    x : ndarray, shape (p,)
        Estimates, physical units.
    x_internal : ndarray, shape (p,)
        Estimates in internal (optimiser) coordinates.
    x_start : ndarray, shape (p,)
        Physical start of the run that gave the best optimum.
    converged : bool
        The optimiser met a convergence test, the final point is stationary (every free
        Jacobian column is nearly orthogonal to the weighted residuals, |cos| <=
        ``STATIONARITY_TOL``), the reweighting cycles settled, and the final point is not a
        failed prediction. (An exact fit, weighted residual norm below 1e-10 of the data's,
        counts as stationary.)
    status : int
        scipy ``least_squares`` status of the final solve (1-4 converged, 0 evaluation limit).
    message : str
        Optimiser message, with kinfit's notes appended.
    method : str
        ``"trf"``, ``"dogbox"`` or ``"lm"``.
    nfev, njev : int
        Function and Jacobian evaluations of the best run (all reweighting cycles).
    n_obs, n_params, dof : int
        n, p and n - p.
    observed, fitted, residuals : ndarray, shape (n,)
        y, f(x) and y - f(x).
    fit_weights : ndarray, shape (n,)
        Weights W of the final least-squares stage (the user's weights for the constant model).
    sse : float
        ``sum(W r^2)``, the weighted residual sum of squares that was minimised.
    jacobian : ndarray, shape (n, p)
        ``d f / d x`` at the estimate, physical units (central differences or analytic).
    covariance, correlation : ndarray, shape (p, p)
        Linearised ``sigma^2 (J' W J)^{-1}`` and its correlation matrix (NaN when singular).
    stderr : ndarray, shape (p,)
        Square roots of the covariance diagonal.
    sigma : float
        ``sqrt(sse / dof)``: residual standard deviation (constant model) or dof-corrected
        leading error scale.
    error_model : str
        ``"constant"``, ``"proportional"`` or ``"combined"``.
    scale_names : tuple of str
        Names of the error-scale parameters.
    scale, scale_ml : ndarray, shape (len(scale_names),)
        Error scales, dof-corrected and maximum likelihood.
    statistics : FitStatistics
        SSE, sigma, ln L, AIC, AICc, BIC (see :mod:`kinfit.estimate.statistics`).
    rank : int
        Numerical rank of the weighted Jacobian.
    n_starts : int
        Starts refined by the optimiser (the given start plus the chosen design points).
    n_screened : int
        Design points evaluated in the screening call.
    n_distinct_optima : int
        Distinct optima among the refined starts that ended at a computable point.
    optima_sse : ndarray
        ``sum(w r^2)`` (the user's weights) of each distinct optimum, best first.
    n_penalised : int
        Predictions that failed during the whole fit (screening, every start, Jacobians).
    penalty_reasons : tuple of str
        Distinct failure reasons with counts.
    at_bound, unmoved : ndarray of bool, shape (p,)
        Parameter on (or within tolerance of) a bound; parameter that did not move from its
        start (relative change below ``UNMOVED_RTOL``).
    irls_cycles : int
        Weighted least-squares stages of the best run (1 for the constant model).
    seed : int or None
        Seed of the multistart design.
    """

    names: tuple[str, ...]
    transforms: tuple[str, ...]
    x: NDArray[np.float64]
    x_internal: NDArray[np.float64]
    x_start: NDArray[np.float64]
    converged: bool
    status: int
    message: str
    method: str
    nfev: int
    njev: int
    n_obs: int
    n_params: int
    dof: int
    observed: NDArray[np.float64]
    fitted: NDArray[np.float64]
    residuals: NDArray[np.float64]
    fit_weights: NDArray[np.float64]
    sse: float
    jacobian: NDArray[np.float64]
    covariance: NDArray[np.float64]
    stderr: NDArray[np.float64]
    correlation: NDArray[np.float64]
    sigma: float
    error_model: str
    scale_names: tuple[str, ...]
    scale: NDArray[np.float64]
    scale_ml: NDArray[np.float64]
    statistics: FitStatistics
    rank: int
    n_starts: int
    n_screened: int
    n_distinct_optima: int
    optima_sse: NDArray[np.float64]
    n_penalised: int
    penalty_reasons: tuple[str, ...]
    at_bound: NDArray[np.bool_]
    unmoved: NDArray[np.bool_]
    irls_cycles: int
    seed: int | None

    def __post_init__(self) -> None:
        for f in fields(self):
            v = getattr(self, f.name)
            if isinstance(v, np.ndarray):
                v = v.copy()
                v.setflags(write=False)
                object.__setattr__(self, f.name, v)

    @property
    def aic(self) -> float:
        """Akaike information criterion (see :class:`FitStatistics`)."""
        return self.statistics.aic

    @property
    def aicc(self) -> float:
        """Small-sample corrected AIC."""
        return self.statistics.aicc

    @property
    def bic(self) -> float:
        """Bayesian (Schwarz) information criterion."""
        return self.statistics.bic

    @property
    def loglike(self) -> float:
        """Maximised Gaussian log-likelihood."""
        return self.statistics.loglike

    def value(self, name: str) -> float:
        """Estimate of parameter ``name`` (physical units)."""
        return float(self.x[self._index(name)])

    def _index(self, name: str) -> int:
        if name not in self.names:
            raise StudyError(f"no parameter named '{name}'; the fit has {list(self.names)}")
        return self.names.index(name)

    def to_frame(self) -> pd.DataFrame:
        """One row per parameter: estimate, stderr, start, at_bound, unmoved."""
        return pd.DataFrame(
            {
                "estimate": self.x,
                "stderr": self.stderr,
                "start": self.x_start,
                "at_bound": self.at_bound,
                "unmoved": self.unmoved,
            },
            index=pd.Index(self.names, name="parameter"),
        )

    def to_dict(self) -> dict[str, Any]:
        """Every field as plain Python types (lists, floats, ints, str, bool, None)."""
        out: dict[str, Any] = {}
        for f in fields(self):
            out[f.name] = _plain(getattr(self, f.name))
        return out


def _plain(v: Any) -> Any:
    if isinstance(v, FitStatistics):
        return v.to_dict()
    if isinstance(v, np.ndarray):
        return v.tolist()
    if isinstance(v, np.generic):
        return v.item()
    if isinstance(v, tuple):
        return [_plain(q) for q in v]
    return v
