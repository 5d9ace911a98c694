"""Parameter families: the accepted range of a model parameter (:class:`Interval`), the check
of values against those ranges, and the declaration shared by rate laws and film models (names,
SI units, limits)."""

from __future__ import annotations

import inspect
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import ModelError, StudyError, did_you_mean

__all__ = ["Interval", "check_limits", "positive_option", "DeclaredParameters"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class Interval:
    """Accepted range of a physical parameter (a declarative constraint, one per parameter).

    Parameters
    ----------
    lower, upper : float
        Bounds; ``-inf``/``inf`` for none.
    lower_closed, upper_closed : bool
        Whether the bound itself is accepted.
    unit : str
        SI unit, for messages.

    Examples
    --------
    >>> str(Interval(0.0, 3.0))
    '[0, 3]'
    >>> bool(Interval(0.0, lower_closed=False).contains(0.0))
    False
    """

    lower: float = -math.inf
    upper: float = math.inf
    lower_closed: bool = True
    upper_closed: bool = True
    unit: str = ""

    def contains(self, values: ArrayLike) -> NDArray[np.bool_]:
        """Element-wise membership (False for nan)."""
        v = np.asarray(values, dtype=float)
        lo = v >= self.lower if self.lower_closed else v > self.lower
        hi = v <= self.upper if self.upper_closed else v < self.upper
        return lo & hi

    def __str__(self) -> str:
        if math.isinf(self.upper) and not math.isinf(self.lower):
            return f"{'>=' if self.lower_closed else '>'} {self.lower:g}"
        if math.isinf(self.lower) and not math.isinf(self.upper):
            return f"{'<=' if self.upper_closed else '<'} {self.upper:g}"
        left = "[" if self.lower_closed and not math.isinf(self.lower) else "("
        right = "]" if self.upper_closed and not math.isinf(self.upper) else ")"
        return f"{left}{self.lower:g}, {self.upper:g}{right}"

    def outside_example(self) -> float | None:
        """A finite value outside the interval (None if every finite value is inside)."""
        if not math.isinf(self.lower):
            return self.lower - (1.0 + abs(self.lower)) if self.lower_closed else self.lower
        if not math.isinf(self.upper):
            return self.upper + (1.0 + abs(self.upper)) if self.upper_closed else self.upper
        return None

def check_limits(
    owner: str, values: Mapping[str, FloatArray], limits: Mapping[str, Interval]
) -> None:
    """Raise ModelError for the first non-finite value or value outside its interval.

    Parameters
    ----------
    owner : str
        What the parameters belong to, for the message (e.g. "rate law 'power'").
    values : mapping of str to ndarray
        Parameter values (any shapes).
    limits : mapping of str to Interval
        Accepted range per parameter; parameters without an entry need only be finite.
    """
    for name, v in values.items():
        v = np.asarray(v, dtype=float)
        finite = np.isfinite(v)
        if not np.all(finite):
            raise ModelError(
                f"{owner}: parameter '{name}' must be finite, got {v[~finite].flat[0]}"
            )
        interval = limits.get(name)
        if interval is None:
            continue
        ok = interval.contains(v)
        if not np.all(ok):
            unit = f" {interval.unit}" if interval.unit not in ("", "-") else ""
            bounded = not (math.isinf(interval.lower) or math.isinf(interval.upper))
            phrase = f"in {interval}" if bounded else str(interval)
            raise ModelError(
                f"{owner}: parameter '{name}' must be {phrase}{unit}, got {v[~ok].flat[0]:g}; "
                "adjust its value or bounds in [parameters." + name + "]"
            )


def positive_option(owner: str, option: str, value: Any, unit: str) -> float:
    """A model option that must be a finite number > 0 (e.g. a reference temperature).

    Raises
    ------
    StudyError
        Naming the owner (``"rate law 'power'"``, ``"[film] model 'agitation'"``), the option,
        the unit and the value received.

    Examples
    --------
    >>> positive_option("rate law 'power'", "reference_temperature", 300, "K")
    300.0
    """
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise StudyError(
            f"{owner}: option '{option}' must be a number in {unit}, got {value!r}"
        ) from None
    if not (math.isfinite(v) and v > 0):
        raise StudyError(f"{owner}: option '{option}' must be finite and > 0 {unit}, "
                         f"got {value!r}")
    return v


class DeclaredParameters:
    """Mixin of a model family that declares its parameters in class attributes: ``_units``
    (name -> SI unit, in column order) and ``_limits`` (name -> accepted :class:`Interval`)."""

    _units: ClassVar[dict[str, str]] = {}
    _limits: ClassVar[dict[str, Interval]] = {}

    @property
    def parameter_names(self) -> tuple[str, ...]:
        """Names of the parameters, as the study's ``[parameters.*]`` tables use them."""
        return tuple(self._units)

    @property
    def parameter_units(self) -> dict[str, str]:
        """SI unit of each parameter (``"-"`` dimensionless, ``""`` unknown)."""
        return dict(self._units)

    @property
    def parameter_limits(self) -> dict[str, Interval]:
        """Accepted range of each parameter (parameters not listed need only be finite)."""
        return dict(self._limits)


def check_keyword_options(cls: type, options: Mapping[str, Any], what: str) -> None:
    """Refuse options that ``cls``'s keyword-only constructor does not take, and demand those
    without a default; ``what`` names the family member in the message (e.g. "rate law 'power'").
    A constructor that takes ``**kwargs`` checks its own options."""
    params = inspect.signature(cls.__init__).parameters  # type: ignore[misc]
    if any(prm.kind is inspect.Parameter.VAR_KEYWORD for prm in params.values()):
        return
    valid = [n for n, prm in params.items() if prm.kind is inspect.Parameter.KEYWORD_ONLY]
    unknown = sorted(set(options) - set(valid))
    if unknown:
        raise StudyError(f"{what}: option(s) {unknown} not recognised"
                         f"{did_you_mean(unknown[0], valid)}; valid options are {valid}")
    missing = [n for n in valid if params[n].default is inspect.Parameter.empty
               and n not in options]
    if missing:
        raise StudyError(f"{what}: option(s) {missing} must be given")
