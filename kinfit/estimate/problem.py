"""The narrow interface every estimator receives: a vectorised predictor, data, and a parameter
space. Nothing of chemistry lives here, so the NIST regression datasets drive the same code.

Mapping between physical values and the optimiser's unconstrained vector lives in
:class:`Space` and nowhere else.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from kinfit.errors import StudyError

__all__ = ["Space", "ErrorModel", "Problem", "ERROR_MODELS", "PENALTY"]

#: Residual magnitude given to a prediction that could not be computed (failed solve): large,
#: finite, so an optimiser backs away instead of receiving NaN.
PENALTY = 1e6

TRANSFORMS = ("none", "log")
ERROR_MODELS = ("constant", "proportional", "combined")


@dataclass(frozen=True)
class Space:
    """Names, bounds and transforms of the varying parameters; the one place that maps physical
    values to the optimiser's unconstrained coordinates and back.

    Parameters
    ----------
    names : tuple of str
        Parameter names, in column order of every parameter matrix.
    lower, upper : ndarray, shape (p,)
        Physical bounds; ``-inf``/``inf`` for none.
    transform : tuple of str
        ``"none"`` or ``"log"`` per parameter. A log parameter needs ``lower >= 0``.

    Notes
    -----
    Internal coordinates are ``u = x`` (``"none"``) or ``u = ln x`` (``"log"``); bounds map the
    same way (a zero lower bound becomes ``-inf``).

    Examples
    --------
    >>> s = Space(("k", "E"), np.array([0.0, -np.inf]), np.array([np.inf, np.inf]), ("log", "none"))
    >>> s.to_internal(np.array([np.e, 5.0]))
    array([1., 5.])
    """

    names: tuple[str, ...]
    lower: NDArray[np.float64]
    upper: NDArray[np.float64]
    transform: tuple[str, ...]

    def __post_init__(self) -> None:
        p = len(self.names)
        lo = np.asarray(self.lower, dtype=float).reshape(-1)
        hi = np.asarray(self.upper, dtype=float).reshape(-1)
        if lo.shape != (p,) or hi.shape != (p,) or len(self.transform) != p:
            raise StudyError(
                f"parameter space: {p} names but {lo.size} lower, {hi.size} upper bounds and "
                f"{len(self.transform)} transforms; give one of each per parameter"
            )
        for i, name in enumerate(self.names):
            if self.transform[i] not in TRANSFORMS:
                raise StudyError(
                    f"parameter '{name}': transform '{self.transform[i]}' is not recognised; "
                    f"use one of {list(TRANSFORMS)}"
                )
            if not lo[i] < hi[i]:
                raise StudyError(
                    f"parameter '{name}': min ({lo[i]:g}) must be below max ({hi[i]:g}); "
                    "swap or widen them"
                )
            if self.transform[i] == "log" and lo[i] < 0:
                raise StudyError(
                    f"parameter '{name}': a log transform needs min >= 0, got {lo[i]:g}; "
                    "set min to 0 or use transform 'none'"
                )
        object.__setattr__(self, "lower", lo)
        object.__setattr__(self, "upper", hi)

    @property
    def n(self) -> int:
        """Number of parameters."""
        return len(self.names)

    @property
    def is_log(self) -> NDArray[np.bool_]:
        """Boolean mask of log-transformed parameters."""
        return np.array([t == "log" for t in self.transform], dtype=bool)

    def to_internal(self, x: NDArray[np.float64]) -> NDArray[np.float64]:
        """Physical values (..., p) to internal coordinates (..., p)."""
        x = np.asarray(x, dtype=float)
        with np.errstate(divide="ignore"):
            return np.where(self.is_log, np.log(np.where(self.is_log, x, 1.0)), x)

    def to_physical(self, u: NDArray[np.float64]) -> NDArray[np.float64]:
        """Internal coordinates (..., p) to physical values (..., p)."""
        u = np.asarray(u, dtype=float)
        return np.where(self.is_log, np.exp(np.where(self.is_log, u, 0.0)), u)

    def internal_bounds(self) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Bounds in internal coordinates."""
        return self.to_internal(self.lower), self.to_internal(self.upper)

    def dphysical_dinternal(self, u: NDArray[np.float64]) -> NDArray[np.float64]:
        """Diagonal of the Jacobian d x / d u at internal point ``u`` (shape (p,))."""
        return np.where(self.is_log, self.to_physical(u), 1.0)

    def contains(self, x: NDArray[np.float64]) -> NDArray[np.bool_]:
        """Whether each row of physical values lies inside the bounds (inclusive)."""
        x = np.atleast_2d(x)
        return np.all((x >= self.lower) & (x <= self.upper), axis=-1)


@dataclass(frozen=True)
class ErrorModel:
    """Measurement-error model: how the standard deviation of an observation depends on its
    predicted value.

    ``constant``: sigma_i = s_abs / sqrt(w_i); ``proportional``: sigma_i = s_rel |f_i| / sqrt(w_i);
    ``combined``: sigma_i = sqrt(s_abs^2 + (s_rel f_i)^2) / sqrt(w_i).

    Parameters
    ----------
    kind : {"constant", "proportional", "combined"}
    floor : float
        Smallest |f| used by the proportional part, so a zero prediction does not give a zero
        standard deviation (same unit as the observations).

    Examples
    --------
    >>> ErrorModel("combined").sigma(np.array([0.0, 10.0]), s_abs=1.0, s_rel=0.1)
    array([1.        , 1.41421356])
    """

    kind: str = "constant"
    floor: float = 1e-12

    def __post_init__(self) -> None:
        if self.kind not in ERROR_MODELS:
            raise StudyError(
                f"error model '{self.kind}' is not recognised; use one of {list(ERROR_MODELS)}"
            )

    @property
    def scale_names(self) -> tuple[str, ...]:
        """Names of the error-scale parameters this model has."""
        return {
            "constant": ("sigma",),
            "proportional": ("sigma_rel",),
            "combined": ("sigma", "sigma_rel"),
        }[self.kind]

    def sigma(
        self,
        f: NDArray[np.float64],
        *,
        s_abs: float | NDArray[np.float64] = 1.0,
        s_rel: float | NDArray[np.float64] = 1.0,
        weights: NDArray[np.float64] | None = None,
    ) -> NDArray[np.float64]:
        """Standard deviation of each observation, broadcast over leading axes of ``f``.

        ``s_abs`` and ``s_rel`` may carry a leading axis of parameter sets of shape (m, 1).
        """
        f = np.asarray(f, dtype=float)
        mag = np.maximum(np.abs(f), self.floor)
        if self.kind == "constant":
            sd = np.broadcast_to(np.asarray(s_abs, dtype=float), f.shape).astype(float)
        elif self.kind == "proportional":
            sd = np.asarray(s_rel, dtype=float) * mag
        else:
            sd = np.sqrt(np.asarray(s_abs, dtype=float) ** 2 + (np.asarray(s_rel) * mag) ** 2)
        if weights is not None:
            sd = sd / np.sqrt(weights)
        return sd

    def loglike(
        self,
        y: NDArray[np.float64],
        f: NDArray[np.float64],
        *,
        s_abs: float | NDArray[np.float64] = 1.0,
        s_rel: float | NDArray[np.float64] = 1.0,
        weights: NDArray[np.float64] | None = None,
    ) -> NDArray[np.float64]:
        """Gaussian log-likelihood summed over the last axis; one value per parameter set.

        Non-finite predictions give ``-inf`` for that parameter set.
        """
        sd = self.sigma(f, s_abs=s_abs, s_rel=s_rel, weights=weights)
        z = (y - f) / sd
        ll = -0.5 * np.sum(z * z + 2.0 * np.log(sd) + np.log(2.0 * np.pi), axis=-1)
        return np.where(np.isfinite(ll), ll, -np.inf)


@dataclass(frozen=True)
class Problem:
    """A fitting problem as an estimator sees it.

    Parameters
    ----------
    predict : callable
        Maps a matrix of *physical* parameter values, shape (m, p), to predictions, shape
        (m, n). Rows it cannot compute hold non-finite values; estimators turn those into a large
        finite residual (:data:`PENALTY`) and never pass NaN to an optimiser.
    y : ndarray, shape (n,)
        Observed values.
    space : Space
        Names, bounds, transforms of the p varying parameters.
    x0 : ndarray, shape (p,)
        Physical starting values (inside the bounds).
    weights : ndarray, shape (n,), optional
        Relative precision weights (1/variance up to a common factor); default all ones.
    error_model : ErrorModel
        How sigma depends on the prediction; its scale is estimated, not given.
    jacobian : callable, optional
        Analytic Jacobian d f / d x in physical coordinates: (p,) -> (n, p).
    groups : ndarray of int, shape (n,), optional
        Resampling unit of each observation (the run), for bootstrap over whole runs and for
        per-run summaries.
    labels : tuple of str, optional
        A name per group index, for messages.
    """

    predict: Callable[[NDArray[np.float64]], NDArray[np.float64]]
    y: NDArray[np.float64]
    space: Space
    x0: NDArray[np.float64]
    weights: NDArray[np.float64] | None = None
    error_model: ErrorModel = field(default_factory=ErrorModel)
    jacobian: Callable[[NDArray[np.float64]], NDArray[np.float64]] | None = None
    groups: NDArray[np.int_] | None = None
    labels: tuple[str, ...] | None = None

    def __post_init__(self) -> None:
        y = np.asarray(self.y, dtype=float).reshape(-1)
        x0 = np.asarray(self.x0, dtype=float).reshape(-1)
        object.__setattr__(self, "y", y)
        object.__setattr__(self, "x0", x0)
        if x0.size != self.space.n:
            raise StudyError(f"{self.space.n} parameters but {x0.size} starting values")
        if self.space.n == 0:
            raise StudyError("no varying parameter: set vary = true on at least one parameter")
        if y.size < self.space.n:
            raise StudyError(
                f"{y.size} observations but {self.space.n} varying parameters: fix parameters "
                "or add observations"
            )
        if not np.all(np.isfinite(y)):
            raise StudyError("observations contain non-finite values")
        if self.weights is not None:
            w = np.asarray(self.weights, dtype=float).reshape(-1)
            if w.shape != y.shape or np.any(~np.isfinite(w)) or np.any(w <= 0):
                raise StudyError("weights must be finite, positive, one per observation")
            object.__setattr__(self, "weights", w)
        for i, name in enumerate(self.space.names):
            if not self.space.lower[i] <= x0[i] <= self.space.upper[i]:
                raise StudyError(
                    f"parameter '{name}': value {x0[i]:g} lies outside its bounds "
                    f"[{self.space.lower[i]:g}, {self.space.upper[i]:g}]; move the value or the bounds"
                )

    @property
    def n_obs(self) -> int:
        """Number of observations."""
        return int(self.y.size)

    @property
    def n_params(self) -> int:
        """Number of varying parameters."""
        return self.space.n

    @property
    def w(self) -> NDArray[np.float64]:
        """Weights, all ones when none were given."""
        return np.ones_like(self.y) if self.weights is None else self.weights

    def predict_safe(self, x: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
        """Predictions for a matrix of physical values, with a mask of rows that failed.

        A row that raised, or holds any non-finite value, is flagged; its values are left as
        they came (NaN where the predictor raised). Callers decide the penalty.
        """
        x = np.atleast_2d(np.asarray(x, dtype=float))
        try:
            f = np.asarray(self.predict(x), dtype=float)
        except (ArithmeticError, ValueError, RuntimeError) as exc:
            if x.shape[0] == 1:
                return np.full((1, self.n_obs), np.nan), np.array([True])
            # evaluate row by row so one bad row does not spoil the batch
            rows, bad = [], []
            for row in x:
                try:
                    rows.append(np.asarray(self.predict(row[None, :]), dtype=float)[0])
                    bad.append(not np.all(np.isfinite(rows[-1])))
                except (ArithmeticError, ValueError, RuntimeError):
                    rows.append(np.full(self.n_obs, np.nan))
                    bad.append(True)
            del exc
            return np.array(rows), np.array(bad)
        if f.shape != (x.shape[0], self.n_obs):
            raise ValueError(
                f"predictor returned shape {f.shape}, expected {(x.shape[0], self.n_obs)}"
            )
        return f, ~np.all(np.isfinite(f), axis=1)
