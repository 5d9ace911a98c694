"""Where a transport criterion starts to hold: the search ranges of stirrer speed and particle
size, and one bisection in log scale, run for every run (or condition) at once. Used by the
diagnosis (next runs) and by the plan (transport tests)."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

__all__ = ["SPEED_RANGE", "DIAMETER_RANGE", "log_boundary"]

Array = NDArray[np.float64]
#: stirrer speeds searched, rev/s (10 to 3000 rpm: the range of lab autoclaves, common practice)
SPEED_RANGE = (10.0 / 60.0, 3000.0 / 60.0)
#: particle diameters searched, m (1 um to 10 mm)
DIAMETER_RANGE = (1e-6, 1e-2)


def log_boundary(passes: Callable[[Array], NDArray[np.bool_]], lo: float, hi: float, n: int, *,
                 increasing: bool, iterations: int
                 ) -> tuple[Array, NDArray[np.bool_], NDArray[np.bool_]]:
    """Per item, the boundary between failing and passing in [lo, hi], by bisection in log x.

    Parameters
    ----------
    passes : callable
        ``passes(x)`` with ``x`` of shape (n,) gives whether each item meets the criterion.
    lo, hi : float
        The range searched (> 0).
    n : int
        Number of items.
    increasing : bool
        True when the criterion holds for large x (a stirrer speed: the smallest passing x is
        returned); False when it holds for small x (a diameter: the largest passing x).
    iterations : int
        Bisection steps; the boundary is found to ``ln(hi/lo) / 2**iterations`` in ln x.

    Returns
    -------
    boundary : ndarray, shape (n,)
        ``lo`` (``hi`` when decreasing) where the criterion holds at that end of the range.
    everywhere, nowhere : ndarray of bool, shape (n,)
        Whether the criterion holds at both ends, or at neither (then ``boundary`` means
        nothing).

    Examples
    --------
    >>> b, _, _ = log_boundary(lambda x: x > 2.0, 1.0, 100.0, 1, increasing=True, iterations=40)
    >>> round(float(b[0]), 9)
    2.0
    """
    a, b = np.full(n, np.log(lo)), np.full(n, np.log(hi))
    at_lo, at_hi = passes(np.exp(a)), passes(np.exp(b))
    for _ in range(iterations):
        mid = 0.5 * (a + b)
        ok = passes(np.exp(mid))
        good_side = ok if increasing else ~ok
        b = np.where(good_side, mid, b)
        a = np.where(good_side, a, mid)
    if increasing:
        found = np.where(at_lo, lo, np.exp(b))
    else:
        found = np.where(at_hi, hi, np.exp(a))
    return found, at_lo & at_hi, ~at_lo & ~at_hi
