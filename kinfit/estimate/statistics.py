"""Goodness-of-fit statistics of a least-squares fit, computed once, in one function.

Convention (fixed here and used everywhere in kinfit): Gaussian errors with the error-model scale
estimated by maximum likelihood; the likelihood keeps all its constants; the number of estimated
quantities ``k`` counts the model parameters **and** the error-scale parameters. For the
constant error model with unit weights this gives the textbook form

.. math::  -2 \\ln \\hat L = n\\,[\\ln(2\\pi S/n) + 1], \\qquad k = p + 1,

the convention of Akaike 1974; Burnham & Anderson 2002. Many programs drop the constants and use
``n ln(S/n) + 2p`` instead; kinfit does not.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import minimize

from kinfit.estimate.problem import ErrorModel

__all__ = ["FitStatistics", "fit_statistics", "ml_error_scales", "relative_weights"]


@dataclass(frozen=True, slots=True)
class FitStatistics:
    """Summary statistics of one fit (plain floats and ints).

    Attributes
    ----------
    n_obs : int
        Number of observations n.
    n_params : int
        Number of varying model parameters p.
    n_scale : int
        Number of error-scale parameters estimated (1 for constant or proportional, 2 for
        combined).
    k : int
        ``n_params + n_scale``, the count used by the information criteria.
    dof : int
        Residual degrees of freedom ``n - p``.
    sse : float
        Weighted residual sum of squares ``sum(W_i r_i^2)`` with the fit weights ``W`` (the
        user's weights for the constant error model), in squared observation units.
    sse_unweighted : float
        ``sum(r_i^2)``.
    sigma : float
        ``sqrt(sse / dof)``: the residual standard deviation (constant model, unit weights) or
        the dof-corrected leading error scale (see :func:`relative_weights`).
    loglike : float
        Maximised Gaussian log-likelihood with the scales at their ML values.
    aic, aicc, bic : float
        ``2k - 2 lnL``; ``AIC + 2k(k+1)/(n-k-1)`` (``inf`` when ``n <= k + 1``);
        ``k ln n - 2 lnL``.
    """

    n_obs: int
    n_params: int
    n_scale: int
    k: int
    dof: int
    sse: float
    sse_unweighted: float
    sigma: float
    loglike: float
    aic: float
    aicc: float
    bic: float

    def to_dict(self) -> dict[str, float | int]:
        """Plain-Python mapping of every field."""
        return {
            key: (float(v) if isinstance(v, float) else int(v)) for key, v in asdict(self).items()
        }


def ml_error_scales(
    error_model: ErrorModel,
    y: NDArray[np.float64],
    f: NDArray[np.float64],
    weights: NDArray[np.float64] | None = None,
) -> dict[str, float]:
    """Maximum-likelihood error scales for fixed predictions.

    Parameters
    ----------
    error_model : ErrorModel
        Which scales exist (``error_model.scale_names``).
    y, f : ndarray, shape (n,)
        Observations and predictions (same unit).
    weights : ndarray, shape (n,), optional
        Relative precision weights of the observations.

    Returns
    -------
    dict
        ``{"sigma": s_abs}``, ``{"sigma_rel": s_rel}`` or both, maximising
        :meth:`ErrorModel.loglike` with ``f`` held fixed (pseudo-likelihood step of
        Carroll & Ruppert 1988, ch. 3).

    Notes
    -----
    Closed forms: constant ``s^2 = mean(w r^2)``, proportional ``s_rel^2 = mean(w r^2/|f|^2)``.
    The combined model is maximised numerically over ``(ln s_abs, ln s_rel)``.

    Examples
    --------
    >>> ml_error_scales(ErrorModel("constant"), np.array([1.0, 3.0]), np.array([2.0, 2.0]))
    {'sigma': 1.0}
    """
    y = np.asarray(y, dtype=float)
    f = np.asarray(f, dtype=float)
    w = np.ones_like(y) if weights is None else np.asarray(weights, dtype=float)
    r2 = w * (y - f) ** 2
    mag = np.maximum(np.abs(f), error_model.floor)
    tiny = np.finfo(float).tiny
    if error_model.kind == "constant":
        return {"sigma": float(np.sqrt(max(np.mean(r2), tiny)))}
    s_rel0 = float(np.sqrt(max(np.mean(r2 / mag**2), tiny)))
    if error_model.kind == "proportional":
        return {"sigma_rel": s_rel0}
    s_abs0 = float(np.sqrt(max(np.mean(r2), tiny)))

    def negll(z: NDArray[np.float64]) -> float:
        var = np.exp(2 * z[0]) + np.exp(2 * z[1]) * mag**2
        return float(0.5 * np.sum(r2 / var + np.log(var)))

    # start from the halves of the pure forms; a box of 30 e-folds each way keeps exp finite
    z0 = np.log([s_abs0 / np.sqrt(2), s_rel0 / np.sqrt(2)])
    box = [(z0[0] - 30, z0[0] + 5), (z0[1] - 30, z0[1] + 5)]
    best = minimize(negll, z0, method="L-BFGS-B", bounds=box)
    # the optimum may sit on an edge (one part negligible); compare with the pure forms
    candidates = [
        best.x,
        np.array([np.log(s_abs0), z0[1] - 30]),
        np.array([z0[0] - 30, np.log(s_rel0)]),
    ]
    z = min(candidates, key=negll)
    return {"sigma": float(np.exp(z[0])), "sigma_rel": float(np.exp(z[1]))}


def relative_weights(
    error_model: ErrorModel,
    f: NDArray[np.float64],
    scales: dict[str, float],
    weights: NDArray[np.float64] | None = None,
) -> NDArray[np.float64]:
    """Least-squares weights ``W_i = w_i / v_i`` for the next reweighting cycle.

    ``v_i`` is the variance function divided by the square of the leading scale: 1 for the
    constant model, ``|f_i|^2`` for the proportional model and ``1 + (s_rel/s_abs)^2 |f_i|^2``
    for the combined model. Then ``sqrt(sum(W r^2)/(n-p))`` estimates the leading scale
    (``sigma``, or ``sigma_rel`` for the proportional model).

    Parameters
    ----------
    error_model : ErrorModel
    f : ndarray, shape (n,)
        Current predictions.
    scales : dict
        Current scale estimates (only their ratio matters).
    weights : ndarray, shape (n,), optional
        The user's relative precision weights.

    Returns
    -------
    ndarray, shape (n,)
    """
    f = np.asarray(f, dtype=float)
    w = np.ones_like(f) if weights is None else np.asarray(weights, dtype=float)
    mag = np.maximum(np.abs(f), error_model.floor)
    if error_model.kind == "constant":
        return w.copy()
    if error_model.kind == "proportional":
        return w / mag**2
    ratio = scales["sigma_rel"] / scales["sigma"]
    return w / (1.0 + (ratio * mag) ** 2)


def fit_statistics(
    y: NDArray[np.float64],
    fitted: NDArray[np.float64],
    *,
    n_params: int,
    error_model: ErrorModel | None = None,
    weights: NDArray[np.float64] | None = None,
    fit_weights: NDArray[np.float64] | None = None,
) -> FitStatistics:
    """All summary statistics of a fit, computed in one place.

    Parameters
    ----------
    y, fitted : ndarray, shape (n,)
        Observations and fitted values.
    n_params : int
        Number of varying model parameters p.
    error_model : ErrorModel, optional
        Default: constant.
    weights : ndarray, shape (n,), optional
        The user's relative precision weights (enter the likelihood).
    fit_weights : ndarray, shape (n,), optional
        Weights of the final least-squares stage (default: ``weights``); define ``sse``.

    Returns
    -------
    FitStatistics

    Notes
    -----
    ``lnL`` is :meth:`ErrorModel.loglike` at the ML scales (:func:`ml_error_scales`). For the
    constant model with weights this is
    ``-n/2 [ln(2 pi S_w/n) + 1] + (1/2) sum(ln w_i)``. ``k = p + n_scale``; AIC (Akaike 1974),
    AICc (Hurvich & Tsai 1989), BIC (Schwarz 1978), as in Akaike 1974; Burnham & Anderson 2002.

    Examples
    --------
    >>> st = fit_statistics(np.array([1.0, 2.0, 4.0]), np.array([1.5, 2.0, 3.5]), n_params=1)
    >>> round(st.loglike, 6), st.k
    (-1.569176, 2)
    """
    em = ErrorModel() if error_model is None else error_model
    y = np.asarray(y, dtype=float)
    f = np.asarray(fitted, dtype=float)
    n = int(y.size)
    r = y - f
    fw = weights if fit_weights is None else fit_weights
    fw = np.ones_like(y) if fw is None else np.asarray(fw, dtype=float)
    sse = float(np.sum(fw * r * r))
    dof = n - int(n_params)
    scales = ml_error_scales(em, y, f, weights)
    ll = float(
        em.loglike(
            y,
            f,
            s_abs=scales.get("sigma", 1.0),
            s_rel=scales.get("sigma_rel", 1.0),
            weights=weights,
        )
    )
    n_scale = len(em.scale_names)
    k = int(n_params) + n_scale
    aic = 2.0 * k - 2.0 * ll
    aicc = aic + 2.0 * k * (k + 1) / (n - k - 1) if n - k - 1 > 0 else float("inf")
    bic = k * np.log(n) - 2.0 * ll
    return FitStatistics(
        n_obs=n,
        n_params=int(n_params),
        n_scale=n_scale,
        k=k,
        dof=dof,
        sse=sse,
        sse_unweighted=float(np.sum(r * r)),
        sigma=float(np.sqrt(sse / dof)) if dof > 0 else float("nan"),
        loglike=ll,
        aic=float(aic),
        aicc=float(aicc),
        bic=float(bic),
    )
