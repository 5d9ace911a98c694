"""Signatures of a Langmuir-Hinshelwood claim for ``kinfit audit``: the claimed law's local
apparent order and activation energy, and what strong pore diffusion would make of the
intrinsic law.

For r = k K C/(1 + K C)^m (Arrhenius k, van 't Hoff K) with beta = K C:

* local apparent order n_app = d ln r/d ln C = 1 - m beta/(1 + beta), and apparent activation
  energy E_app = -R d ln r/d(1/T) = Ea + n_app dH_ads (derived);
* under strong pore diffusion eta -> 1/Phi with the generalised modulus of Bischoff (1965,
  *AIChE J.* 11, 351), so the observed rate goes as sqrt(De I) with I = int_0^Cs r dC. Then
  I = (k/K) H_m(beta), H_1 = beta - ln(1 + beta), H_2 = ln(1 + beta) + 1/(1 + beta) - 1, and
  with omega = Cs r(Cs)/I = beta^2/((1 + beta)^m H_m):

  - apparent order n_pore = omega/2 (for an n-th order law omega = n + 1: the classic
    (n + 1)/2);
  - apparent activation energy E_pore = (Ea + (omega - 1) dH_ads + E_D)/2 (for an n-th order
    law, (E + E_D)/2); E_D, the activation energy of the effective diffusivity, is taken as 0,
    as for the power-law signature.

  Derived here from the rate law and the generalised modulus; ``tests/test_audit_lh.py``
  checks both against numerical derivatives of kinfit's own pellet model at a large modulus.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.claims import Claim

__all__ = ["lh_local", "strong_pore_apparent", "lh_signatures", "pore_not_tested"]

Array = NDArray[np.float64]

#: below this beta the closed forms lose digits to cancellation; series are used instead
_SERIES_BETA = 1e-4


def lh_local(claim: Claim, T: ArrayLike, C: ArrayLike) -> tuple[Array, Array]:
    """Local apparent order n_app = 1 - m K C/(1 + K C) and apparent activation energy
    E_app = Ea + n_app dH_ads [J/mol] of a Langmuir-Hinshelwood claim at (T, C)."""
    K = _adsorption_constant(claim.values()["adsorption_constant"], claim.adsorption_enthalpy,
                             T, claim.reference_temperature)
    KC = K * np.maximum(np.asarray(C, dtype=float), 0.0)
    n_app = 1.0 - claim.m * KC / (1.0 + KC)
    return n_app, claim.activation_energy + n_app * claim.adsorption_enthalpy


def _adsorption_constant(K_ref: float, dH: float, T: ArrayLike, T_ref: float) -> Array:
    from kinfit.kinetics import van_t_hoff

    return np.asarray(van_t_hoff(K_ref, dH, np.asarray(T, dtype=float), T_ref), dtype=float)


def _omega(beta: Array, m: int) -> Array:
    """Cs r(Cs) / int_0^Cs r dC for k K C/(1 + K C)^m at beta = K Cs (2 at beta -> 0)."""
    b = np.maximum(np.asarray(beta, dtype=float), 0.0)
    small = b < _SERIES_BETA
    with np.errstate(divide="ignore", invalid="ignore"):
        if m == 1:
            H = b - np.log1p(b)
            series = 2.0 * (1.0 - b / 3.0 + 5.0 * b * b / 18.0)   # H_1 = b^2/2 - b^3/3 + b^4/4
        else:
            H = np.log1p(b) - b / (1.0 + b)          # = ln(1 + b) + 1/(1 + b) - 1
            series = 2.0 * (1.0 - 2.0 * b / 3.0 + 11.0 * b * b / 18.0)  # H_2 = b^2/2 - 2b^3/3 + 3b^4/4
        full = b * b / ((1.0 + b) ** m * H)
    return np.where(small, series, full)


def strong_pore_apparent(Ea: float, K_ref: float, dH: float, m: int, T: ArrayLike,
                         C: ArrayLike, T_ref: float) -> tuple[Array, Array]:
    """(apparent order, apparent activation energy [J/mol]) of the intrinsic
    Langmuir-Hinshelwood law k K C/(1 + K C)^m under strong pore diffusion at (T, C), with
    the diffusivity's own activation energy taken as 0 (see the module docstring)."""
    K = _adsorption_constant(K_ref, dH, T, T_ref)
    omega = _omega(K * np.maximum(np.asarray(C, dtype=float), 0.0), m)
    return 0.5 * omega, 0.5 * (Ea + (omega - 1.0) * dH)


def pore_not_tested(transport_fit: dict[str, Any] | None, has_pellet: bool
                    ) -> dict[str, dict[str, Any]] | None:
    """The two pore signatures marked "not tested", with the reason, when there is no
    converged transport-aware refit with a pellet to compare with; else None."""
    if transport_fit is not None and transport_fit["converged"] and has_pellet:
        return None
    why = ("no effective diffusivity, so no pore-diffusion refit" if not has_pellet else
           "no data" if transport_fit is None else "the transport-aware refit did not converge")
    return {key: {"found": None, "text": f"not tested: {why}"}
            for key in ("pore_activation_energy", "pore_order")}


def lh_signatures(claim: Claim, crit: dict[str, Any], transport_fit: dict[str, Any] | None,
                  has_pellet: bool, *, fluid: dict[str, Any] | None = None) -> dict[str, Any]:
    """Signatures of a Langmuir-Hinshelwood claim: film control from the claimed law's
    apparent activation energy and order at the test conditions; pore control by comparing the
    claimed law's apparent Ea and order at the runs the transport-aware refit puts in the pore
    regime with what strong pore diffusion makes of the refitted intrinsic law there."""
    from kinfit.audit import ORDER_TOLERANCE, PORE_EA_RATIO
    from kinfit.audit_film import film_signature

    runs = crit["runs"]
    ids = list(runs)
    T = np.array([runs[r]["temperature"] for r in ids])
    C = np.array([runs[r]["initial_concentration"] for r in ids])
    n_app, E_app = lh_local(claim, T, C)
    first = bool(np.all(np.abs(n_app - 1.0) <= ORDER_TOLERANCE))
    span = (f"{E_app.min() / 1e3:.3g} to {E_app.max() / 1e3:.3g} kJ/mol" if E_app.size > 1
            and not np.isclose(E_app.min(), E_app.max()) else f"{E_app.mean() / 1e3:.3g} kJ/mol")
    head = (f"apparent activation energy of the claimed law at the test conditions, "
            f"Ea + n_app dH_ads = {span},")
    film = film_signature(E_app, fluid=fluid, temperatures=T, transport_fit=transport_fit,
                          head=head, first_order=first)
    out: dict[str, Any] = {
        "film": {**film, "apparent_activation_energy": [float(e) for e in E_app],
                 "apparent_order": [float(n) for n in n_app]},
    }
    skip = pore_not_tested(transport_fit, has_pellet)
    if skip is not None:
        out.update(skip)
        return out
    assert transport_fit is not None  # pore_not_tested returned None
    pore = [i for i, r in enumerate(ids) if transport_fit["regimes"].get(r) == "pore"]
    if not pore:
        text = ("not expected: at the transport-aware refit no test run is in the pore "
                "regime, where strong pore diffusion shapes the apparent kinetics")
        out["pore_activation_energy"] = {"found": False, "text": text}
        out["pore_order"] = {"found": False, "text": text}
        return out
    loose = [k for k in ("activation_energy", "adsorption_constant", "adsorption_enthalpy")
             if not _pinned(transport_fit["estimates"][k])]
    if loose:
        text = ("not informative: the transport-aware refit does not pin down "
                f"{', '.join(loose)} (standard error above half the estimate, or none), so "
                "what strong pore diffusion would make of the intrinsic law is not known")
        out["pore_activation_energy"] = {"found": None, "text": text}
        out["pore_order"] = {"found": None, "text": text}
        return out
    est = {k: v["estimate"] for k, v in transport_fit["estimates"].items()}
    n_pore, E_pore = strong_pore_apparent(
        est["activation_energy"], est["adsorption_constant"], est["adsorption_enthalpy"],
        claim.m, T[pore], C[pore], claim.reference_temperature)
    E_claim, n_claim = float(np.median(E_app[pore])), float(np.median(n_app[pore]))
    E_exp, n_exp = float(np.median(E_pore)), float(np.median(n_pore))
    E_int = 2.0 * E_exp                      # the intrinsic law's own integral activation energy
    where = f"at the {len(pore)} pore-regime run(s) of the transport-aware refit (median)"
    if E_int > 0:
        ratio = E_claim / E_int
        found = bool(PORE_EA_RATIO[0] <= ratio <= PORE_EA_RATIO[1])
        out["pore_activation_energy"] = {
            "found": found, "ratio": ratio, "claimed_apparent": E_claim,
            "expected_apparent": E_exp,
            "text": (f"claimed apparent activation energy {E_claim / 1e3:.3g} kJ/mol {where} is "
                     f"{ratio:.2f} of E_I = Ea + (omega - 1) dH_ads = {E_int / 1e3:.3g} kJ/mol "
                     "of the refitted intrinsic law, which strong pore diffusion halves"
                     + (": about half, the signature of strong pore-diffusion control "
                        "(generalised modulus, Bischoff 1965; derived)" if found else
                        ": not the halving of strong pore-diffusion control")),
        }
    else:
        out["pore_activation_energy"] = {
            "found": None, "text": "not informative: the refitted intrinsic law has no "
                                   "positive integral activation energy at these runs"}
    found_n = bool(abs(n_claim - n_exp) <= ORDER_TOLERANCE
                   and abs(n_exp - 1.0) > ORDER_TOLERANCE)
    out["pore_order"] = {
        "found": found_n, "claimed_apparent": n_claim, "expected_apparent": n_exp,
        "text": (f"claimed apparent order {n_claim:.3g} {where} "
                 + ("equals" if found_n else "differs from")
                 + f" the {n_exp:.3g} that strong pore diffusion gives the refitted intrinsic "
                 "law (omega/2, the analogue of (n + 1)/2; derived)"
                 + (": the signature of strong pore diffusion" if found_n else "")
                 if abs(n_exp - 1.0) > ORDER_TOLERANCE else
                 "not informative: under strong pore diffusion the refitted intrinsic law "
                 f"would show an apparent order of {n_exp:.3g}, too close to first order to "
                 "tell"),
    }
    return out


def _pinned(entry: dict[str, Any]) -> bool:
    """A refitted constant is usable when held (not tested) or known to better than half its
    size (standard error below half the estimate; for an enthalpy, below 20 kJ/mol when the
    estimate is near zero)."""
    if not entry.get("vary", True):
        return True
    se, value = entry.get("stderr"), entry.get("estimate")
    if se is None or value is None or not np.isfinite(se):
        return False
    if se < 0.5 * abs(value):
        return True
    return bool(entry.get("unit") == "J/mol" and abs(value) < 4e4 and se < 2e4)
