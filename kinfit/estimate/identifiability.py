"""Numerical identifiability of a least-squares estimate, with no interpretation attached: large
correlations, the condition number and weakest direction of the information matrix, parameters
at a bound or unmoved. The chemistry layer (:mod:`kinfit.fitting.identifiability`) turns these flags
into the trade's words."""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.estimate.result import Estimate

__all__ = ["Identifiability", "identifiability"]


def _readonly(obj: Any) -> None:
    for f in fields(obj):
        v = getattr(obj, f.name)
        if isinstance(v, np.ndarray):
            v = v.copy()
            v.setflags(write=False)
            object.__setattr__(obj, f.name, v)


def _plain(v: Any) -> Any:
    if isinstance(v, np.ndarray):
        return v.tolist()
    if isinstance(v, np.generic):
        return v.item()
    if isinstance(v, tuple | list):
        return [_plain(q) for q in v]
    if hasattr(v, "to_dict"):
        return v.to_dict()
    return v


def _to_dict(obj: Any) -> dict[str, Any]:
    return {f.name: _plain(getattr(obj, f.name)) for f in fields(obj)}


# --------------------------------------------------------------------------------------------
# identifiability flags
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Identifiability:
    """Numerical identifiability flags of an estimate (no interpretation attached).

    Attributes
    ----------
    names : tuple of str
    high_correlations : tuple of (str, str, float)
        Pairs with ``|correlation| > correlation_threshold``, strongest first.
    correlation_threshold : float
    singular_values : ndarray, shape (p,)
        Of the weighted Jacobian in relative coordinates (``d f / d ln x`` for log parameters,
        ``d f / d (x/c)`` with ``c = max(|x|, stderr)`` otherwise), columns scaled to unit
        length, descending.
    condition_number : float
        Of the corresponding information matrix (``(s_max/s_min)^2``; ``inf`` if singular).
    condition_threshold : float
    near_singular : bool
        ``condition_number > condition_threshold`` (or rank deficient).
    weakest_direction : tuple of (str, float)
        Right singular vector of the smallest singular value, in relative coordinates (unit
        length, sign fixed so that the largest entry is positive), entries with
        ``|coefficient| >= 0.05`` in decreasing order: the combination the data pin down least.
    weakest_direction_text : str
        The same as text, e.g. ``"+0.71*ln(a) -0.71*ln(b)"`` or ``"+1.00*c/0.25"``.
    at_bound, unmoved : tuple of str
        Parameters on a bound; parameters that did not move from their start.
    undetermined : tuple of str
        Parameters whose standard error is not finite.
    relative_stderr : ndarray, shape (p,)
        ``stderr / |x|`` (inf for x = 0).
    """

    names: tuple[str, ...]
    high_correlations: tuple[tuple[str, str, float], ...]
    correlation_threshold: float
    singular_values: NDArray[np.float64]
    condition_number: float
    condition_threshold: float
    near_singular: bool
    weakest_direction: tuple[tuple[str, float], ...]
    weakest_direction_text: str
    at_bound: tuple[str, ...]
    unmoved: tuple[str, ...]
    undetermined: tuple[str, ...]
    relative_stderr: NDArray[np.float64]

    def __post_init__(self) -> None:
        _readonly(self)

    @property
    def ok(self) -> bool:
        """No flag raised."""
        return not (
            self.high_correlations
            or self.near_singular
            or self.at_bound
            or self.unmoved
            or self.undetermined
        )

    def to_dict(self) -> dict[str, Any]:
        """Plain Python types."""
        return _to_dict(self)


def identifiability(
    estimate: Estimate,
    *,
    correlation_threshold: float = 0.95,
    condition_threshold: float = 1e6,
) -> Identifiability:
    """Flags for parameters or combinations that the data do not pin down.

    Parameters
    ----------
    estimate : Estimate
    correlation_threshold : float
        Pairs with ``|r|`` above this are listed (common practice: 0.95).
    condition_threshold : float
        Information-matrix condition number above which it counts as near-singular. The default
        1e6 is a condition index of 1e3 on the unit-column-scaled Jacobian; Belsley, Kuh &
        Welsch (1980) read indexes above 30 as moderate and above 100 as strong dependence.

    Returns
    -------
    Identifiability
    """
    names = estimate.names
    p = len(names)
    corr = np.asarray(estimate.correlation)
    pairs = []
    for i in range(p):
        for k in range(i + 1, p):
            r = corr[i, k]
            if np.isfinite(r) and abs(r) > correlation_threshold:
                pairs.append((names[i], names[k], float(r)))
    pairs.sort(key=lambda q: -abs(q[2]))
    x = np.asarray(estimate.x)
    se = np.asarray(estimate.stderr)
    is_log = np.array([t == "log" for t in estimate.transforms])
    # relative coordinates: ln x for log parameters; x / c otherwise, c = max(|x|, se) (1 if 0)
    c = np.maximum(np.abs(x), np.nan_to_num(se, nan=0.0, posinf=0.0))
    c = np.where(c > 0, c, 1.0)
    scale = np.where(is_log, x, c)
    a = np.sqrt(np.asarray(estimate.fit_weights))[:, None] * np.asarray(estimate.jacobian) * scale
    if np.all(np.isfinite(a)):
        d = np.linalg.norm(a, axis=0)
        d[d == 0] = 1.0
        _, s, vt = np.linalg.svd(a / d, full_matrices=False)
        tol = max(a.shape) * np.finfo(float).eps * s[0]
        cond = float((s[0] / s[-1]) ** 2) if s[-1] > tol else np.inf
        v = vt[-1] / d  # back to relative coordinates
        v = v / np.linalg.norm(v)
        v = v * np.sign(v[np.argmax(np.abs(v))])
    else:
        s, cond, v = np.full(p, np.nan), np.inf, np.full(p, np.nan)
    order = np.argsort(-np.abs(np.nan_to_num(v)))
    direction = tuple(
        (names[i], float(v[i])) for i in order if np.isfinite(v[i]) and abs(v[i]) >= 0.05
    )
    text = " ".join(
        f"{coef:+.2f}*"
        + (f"ln({nm})" if is_log[names.index(nm)] else f"{nm}/{c[names.index(nm)]:.3g}")
        for nm, coef in direction
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.where(x != 0, se / np.abs(x), np.inf)
    return Identifiability(
        names=names,
        high_correlations=tuple(pairs),
        correlation_threshold=float(correlation_threshold),
        singular_values=s,
        condition_number=cond,
        condition_threshold=float(condition_threshold),
        near_singular=bool(cond > condition_threshold),
        weakest_direction=direction,
        weakest_direction_text=text,
        at_bound=tuple(n for n, b in zip(names, estimate.at_bound, strict=True) if b),
        unmoved=tuple(n for n, b in zip(names, estimate.unmoved, strict=True) if b),
        undetermined=tuple(n for n, q in zip(names, se, strict=True) if not np.isfinite(q)),
        relative_stderr=rel,
    )
