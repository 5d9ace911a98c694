"""Rate-law families by the name the study file uses."""

from __future__ import annotations

import inspect
from typing import Any

from kinfit.errors import StudyError, did_you_mean
from kinfit.physics.kinetics.base import RateLaw
from kinfit.physics.kinetics.expression import ExpressionRate
from kinfit.physics.kinetics.langmuir_hinshelwood import LangmuirHinshelwood
from kinfit.physics.kinetics.power import PowerLaw
from kinfit.physics.kinetics.reversible import ReversibleFirstOrder

__all__ = ["RATE_LAWS", "make_rate_law"]


#: Rate-law families by the name the study file uses.
RATE_LAWS: dict[str, type[RateLaw]] = {
    cls.name: cls for cls in (PowerLaw, LangmuirHinshelwood, ReversibleFirstOrder, ExpressionRate)
}


def make_rate_law(name: str, **options: Any) -> RateLaw:
    """Build a rate law by registry name.

    Parameters
    ----------
    name : str
        One of :data:`RATE_LAWS` (``power``, ``langmuir_hinshelwood``, ``reversible``,
        ``expression``).
    **options
        Keyword options of the family's class (e.g. ``reference_temperature``).

    Returns
    -------
    RateLaw

    Raises
    ------
    StudyError
        Unknown name (the message lists the valid ones), an unknown or missing option, or a bad
        option value.

    Examples
    --------
    >>> make_rate_law("power", reference_temperature=323.15).parameter_names
    ('k_ref', 'activation_energy', 'order')
    """
    cls = RATE_LAWS.get(name)
    if cls is None:
        raise StudyError(
            f"[kinetics] rate_law '{name}' is not recognised{did_you_mean(name, RATE_LAWS)}; "
            f"use one of {sorted(RATE_LAWS)}"
        )
    params = inspect.signature(cls.__init__).parameters
    valid = [n for n, prm in params.items() if prm.kind is inspect.Parameter.KEYWORD_ONLY]
    unknown = sorted(set(options) - set(valid))
    if unknown:
        raise StudyError(
            f"rate law '{name}': option(s) {unknown} not recognised"
            f"{did_you_mean(unknown[0], valid)}; valid options are {valid}"
        )
    missing = [
        n for n in valid if params[n].default is inspect.Parameter.empty and n not in options
    ]
    if missing:
        raise StudyError(f"rate law '{name}': option(s) {missing} must be given")
    return cls(**options)
