"""Identifiability in the trade's words: turn the estimator's numeric flags (large correlations,
near-singular information, parameters at bounds or unmoved) and the campaign's design into
statements a kineticist acts on ("only one stirrer speed: the agitation exponent is not
identified")."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from kinfit.study.runs import Study

__all__ = ["identifiability_warnings"]

_DESIGN_FACTOR = {
    "agitation_exponent": ("stirrer_speed", "only one stirrer speed in the campaign: the "
                           "agitation exponent is not identified; add runs at a second speed"),
    "size_exponent": ("particle_diameter", "only one particle diameter in the campaign: the "
                      "size exponent of the film coefficient is not identified; add runs with "
                      "another particle size"),
    "activation_energy": ("temperature", "only one temperature in the campaign: the activation "
                          "energy is not identified; add runs at other temperatures"),
    "adsorption_enthalpy": ("temperature", "only one temperature: the adsorption enthalpy is "
                            "not identified"),
    "reaction_enthalpy": ("temperature", "only one temperature: the reaction enthalpy is not "
                          "identified"),
}


def _base(name: str) -> str:
    return name.split("[")[0]


def identifiability_warnings(
    study: Study,
    flags: Any,
    runs: Mapping[str, Mapping[str, Any]],
) -> list[dict[str, Any]]:
    """Warnings, each ``{kind, parameters, message}``, most specific first.

    Parameters
    ----------
    study : Study
        The campaign (which factors it varies).
    flags : kinfit.estimate.uncertainty.Identifiability
        The estimator's numeric flags.
    runs : mapping
        Per-run criteria at the estimate (regime, eta, resistance shares).
    """
    out: list[dict[str, Any]] = []
    names: Sequence[str] = flags.names
    varied = study.varied_factors()
    bases = [_base(n) for n in names]
    for name in dict.fromkeys(bases):
        if name in _DESIGN_FACTOR and _DESIGN_FACTOR[name][0] not in varied:
            out.append({"kind": "design", "parameters": [name],
                        "message": _DESIGN_FACTOR[name][1]})
    regimes = [r["regime"] for r in runs.values()]
    etas = np.array([r["effectiveness_factor"] for r in runs.values()])
    if "effective_diffusivity" in bases or "tortuosity" in bases:
        pname = "effective_diffusivity" if "effective_diffusivity" in bases else "tortuosity"
        if regimes and all(r == "pore" for r in regimes):
            out.append({"kind": "regime", "parameters": ["k_ref", pname],
                        "message": "every run is deep in the pore-diffusion regime: only the "
                        "product k*De is identified, not k and De apart; add small-particle "
                        "runs"})
        elif etas.size and np.all(etas > 0.97):
            out.append({"kind": "regime", "parameters": [pname],
                        "message": "no run shows pore diffusion (eta > 0.97 everywhere): the "
                        f"{pname.replace('_', ' ')} is only bounded, not identified; add runs "
                        "with larger particles or at higher temperature"})
    film_names = {"kc_ref", "agitation_exponent", "size_exponent"}
    if film_names & set(bases):
        shares = np.array([r["shares"]["film"] for r in runs.values()])
        if shares.size and np.all(shares < 0.02):
            out.append({"kind": "regime", "parameters": sorted(film_names & set(bases)),
                        "message": "the film resistance is below 2 % of the total in every "
                        "run: the film coefficient and its exponents are only bounded; that is "
                        "good for the kinetics, but say so rather than quote them"})
        if regimes and all(r == "film" for r in regimes):
            out.append({"kind": "regime", "parameters": ["k_ref"],
                        "message": "every run is film-limited: the intrinsic rate constant is "
                        "not identified and these rates cannot be carried to another reactor"})
    for a, b, c in flags.high_correlations:
        out.append({"kind": "correlation", "parameters": [a, b],
                    "message": f"{a} and {b} are correlated ({c:+.3f}): the data fix a "
                    "combination of them better than either alone"})
    if flags.near_singular:
        out.append({"kind": "singular", "parameters": list(names),
                    "message": "the information matrix is near singular (condition number "
                    f"{flags.condition_number:.2g}); the combination the data pin down least "
                    f"is {flags.weakest_direction_text}"})
    for n in flags.at_bound:
        out.append({"kind": "bound", "parameters": [n],
                    "message": f"{n} ended at a bound of its range: its interval is one-sided; "
                    "widen the bound if it is not physical, or fix the parameter"})
    for n in flags.unmoved:
        out.append({"kind": "unmoved", "parameters": [n],
                    "message": f"{n} did not move from its start value: the data may not "
                    "inform it"})
    for n in flags.undetermined:
        out.append({"kind": "undetermined", "parameters": [n],
                    "message": f"{n} has no finite standard error: the data do not determine "
                    "it"})
    return out
