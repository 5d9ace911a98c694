"""Array types and the positivity check shared by the pellet modules."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import ModelError

__all__ = ['Array', 'RateFunction']


Array = NDArray[np.float64]


RateFunction = Callable[[Array], Array]


def _positive(name: str, value: ArrayLike, *, allow_zero: bool = False) -> Array:
    """Float array of a physical quantity that must be positive (or non-negative) and finite."""
    arr = np.asarray(value, dtype=float)
    bad = ~np.isfinite(arr) | ((arr < 0) if allow_zero else (arr <= 0))
    if np.any(bad):
        got = arr[bad].flat[0] if arr.ndim else float(arr)
        bound = ">= 0" if allow_zero else "> 0"
        raise ModelError(f"{name} must be finite and {bound}; got {got!r}")
    return arr
