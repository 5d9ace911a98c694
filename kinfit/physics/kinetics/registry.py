"""Rate-law families by the name the study file uses."""

from __future__ import annotations

from typing import Any

from kinfit.errors import StudyError, did_you_mean
from kinfit.physics.families import check_keyword_options
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
    check_keyword_options(cls, options, f"rate law '{name}'")
    return cls(**options)
