"""Candidate models for ``kinfit fit --compare``: what a candidate rate law takes from the
study's ``[kinetics]`` options, and starting values and bounds for the parameters the study's
table lacks, so that a candidate fits without editing the study file.

Defaults (common practice: starts where each term matters at the campaign's conditions, and
bounds wide enough that the data, not the start, decide):

- ``order`` (power law): 1, in [0, 3];
- ``adsorption_constant`` (Langmuir-Hinshelwood): 1/C0 at the campaign's median starting
  concentration, so that K C ~ 1 (half coverage) at the start, in [1e-3, 1e3] times that,
  log-transformed; ``adsorption_enthalpy``: 0, in [-200, 50] kJ/mol;
- ``equilibrium_constant`` (reversible): 100 (far from equilibrium, close to the irreversible
  law), in [1e-2, 1e6], log-transformed; ``reaction_enthalpy``: 0 and fixed, since a
  campaign rarely reaches equilibrium at several temperatures.
"""

from __future__ import annotations

import inspect
from typing import Any

import numpy as np

from kinfit.errors import StudyError
from kinfit.kinetics import RATE_LAWS
from kinfit.parameters import Parameter
from kinfit.study import Study

__all__ = ["rate_law_options", "candidate_defaults", "candidate_label"]


def rate_law_options(name: str) -> tuple[str, ...]:
    """Keyword options a rate-law family accepts (its constructor's keyword-only names)."""
    cls = RATE_LAWS.get(name)
    if cls is None:
        raise StudyError(f"rate law '{name}' is not recognised; use one of {sorted(RATE_LAWS)}")
    params = inspect.signature(cls.__init__).parameters
    return tuple(n for n, p in params.items() if p.kind is inspect.Parameter.KEYWORD_ONLY)


def candidate_label(rate_law: str, film: str, pellet: str) -> str:
    """The one naming scheme of models: ``RATE_LAW/FILM/PELLET``, as ``--compare`` takes it.

    >>> candidate_label("power", "agitation", "direct")
    'power/agitation/direct'
    """
    return f"{rate_law}/{film}/{pellet}"


def candidate_defaults(name: str, study: Study) -> dict[str, Parameter]:
    """Parameters a candidate may need that the study's table lacks, by name."""
    c0 = float(np.median([r.initial_concentration for r in study.runs]))
    out: dict[str, Any] = {
        "order": Parameter("order", 1.0, "-", 0.0, 3.0),
        "adsorption_enthalpy": Parameter("adsorption_enthalpy", 0.0, "J/mol", -2.0e5, 5.0e4),
        "equilibrium_constant": Parameter("equilibrium_constant", 100.0, "-", 1e-2, 1e6,
                                          transform="log"),
        "reaction_enthalpy": Parameter("reaction_enthalpy", 0.0, "J/mol", -2.0e5, 2.0e5,
                                       vary=False),
    }
    if c0 > 0:
        k = 1.0 / c0
        out["adsorption_constant"] = Parameter("adsorption_constant", k, "m^3/mol", 1e-3 * k,
                                               1e3 * k, transform="log")
    return out
