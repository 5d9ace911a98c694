"""Audit of a claimed rate law: can it be intrinsic at the test conditions it came from, do the
data (when given) reproduce it, and does it carry the signatures of film or pore control.

A claim file (TOML) holds one or more claims (power-law k, Ea, order, or Langmuir-Hinshelwood
k, Ea, K, dH_ads, m; perhaps De), the test
conditions or a runs/observations table pair in the study vocabulary, the catalyst, and what
is known of the film coefficient and the effective diffusivity (format: :func:`load_claims`).

Per claim:

1. Criteria at the test conditions with the claim's own parameters, two ways: *observable*
   (the claimed rate taken as the observed rate: Carberry, Weisz-Prater, Mears) and *as
   intrinsic* (the claim pushed through kinfit's film and pellet model: eta, Thiele modulus,
   regime). Conventions and thresholds: :mod:`kinfit.criteria`. For a Langmuir-Hinshelwood
   claim the order in the Mears number and the Carberry limit is the local apparent order of
   the claimed law at the bulk concentration, n_app = d ln r/d ln C = 1 - m K C/(1 + K C)
   (taken as |n_app|; it is <= 0 for m = 2 at K C >= 1).
2. With data: a refit of the claim's rate law ignoring transport ("as observed") and one with
   the stated film coefficient and effective diffusivity ("transport-aware"), each with the
   likelihood-ratio test of the claimed values, ``LR = n ln(S(theta_c)/S_hat) ~ chi2_p``, and the
   joint 95 % region ``S(theta) <= S_hat [1 + p/(n-p) F(p, n-p; 0.95)]`` (Beale 1960; Bates &
   Watts 1988, ch. 6).
3. Signatures: strong pore diffusion halves the activation energy and takes the order to
   (n + 1)/2 (Weisz & Prater 1954; Satterfield 1970); film control gives an apparent
   activation energy near zero (below about 15 kJ/mol, common practice) and first apparent
   order. For a Langmuir-Hinshelwood claim the film signature uses the claimed law's apparent
   activation energy at the test conditions, E_app = Ea + n_app dH_ads (from
   ln r = ln k + ln K + ln C - m ln(1 + K C), derived); the pore signatures are power-law
   results and are reported as not tested.

Verdicts: "consistent with intrinsic kinetics", "transport-contaminated" (with the evidence),
"not reproduced by the data" (the data reject the claimed values without a transport
signature), "not testable with these data" (with what is missing).
"""

from __future__ import annotations

import argparse
import math
import sys
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import stats

from kinfit.audit_film import FILM_EA_ALLOWANCE, FILM_EA_LIMIT, film_signature
from kinfit.audit_lh import lh_local, lh_signatures, pore_not_tested
from kinfit.audit_report import refit_inadequacy
from kinfit.claims import (  # noqa: F401 - re-exported for callers of the audit
    BASES,
    Claim,
    ClaimFile,
    _build,
    _Built,
    _film_dict,
    _sha256,
    _transport_table,
    load_claims,
)
from kinfit.criteria import THRESHOLD_SOURCES, Thresholds, compute_criteria
from kinfit.model import Model, ModelSpec
from kinfit.parameters import parameter_table_from_toml
from kinfit.study import FACTORS, Study

__all__ = ["Claim", "ClaimFile", "ClaimAudit", "AuditResult", "VERDICTS", "SOURCES",
           "FILM_EA_LIMIT", "load_claims", "audit_claims", "add_audit_arguments",
           "run_audit_command"]

Array = NDArray[np.float64]
VERDICTS = ("consistent with intrinsic kinetics", "transport-contaminated",
            "not reproduced by the data", "not testable with these data")
#: claimed/intrinsic activation-energy ratio counted as "about half"
PORE_EA_RATIO = (0.35, 0.70)
#: tolerance on the apparent order (n + 1)/2 and on "first order"
ORDER_TOLERANCE = 0.15
LEVEL = 0.95
SOURCES = {
    **THRESHOLD_SOURCES,
    "likelihood_ratio": "LR = n ln(S(theta_claim)/S_hat) against chi2 with p degrees of "
                        "freedom, Gaussian errors with the variance profiled out (Bates & Watts "
                        "1988, ch. 6)",
    "joint_region": "S(theta) <= S_hat [1 + p/(n-p) F(p, n-p; 0.95)] (Beale 1960; Bates & "
                    "Watts 1988)",
    "pore_signature": "strong pore diffusion: E_app = (E + E_D)/2, apparent order (n + 1)/2 "
                      "(Weisz & Prater 1954; Satterfield 1970)",
    "film_signature": "film control: the claimed activation energy matches the film's own, "
                      "from D ~ T/mu (Stokes-Einstein; Wilke & Chang 1955) and kc ~ D^(2/3) "
                      "nu^(-5/12) (Sano et al. 1974 form), about 17 kJ/mol in water at 40-70 "
                      "degC; with no liquid named, near zero (below 15 kJ/mol, common "
                      "practice); and the transport-aware refit labels runs 'film'",
}
#: sources added to audit.json when a claim is Langmuir-Hinshelwood
LH_SOURCES = {
    "lh_apparent_order": "local apparent order of r = k K C/(1 + K C)^m: d ln r/d ln C = "
                         "1 - m K C/(1 + K C) (derived from the rate law)",
    "lh_apparent_activation_energy": "E_app = -R d ln r/d(1/T) = Ea + n_app dH_ads with "
                                     "Arrhenius k and van 't Hoff K (derived from the rate "
                                     "law)",
}


# ------------------------------------------------------------------------------ the audit
@dataclass(frozen=True)
class ClaimAudit:
    """The audit of one claim.

    Attributes
    ----------
    name, basis : str
    values : dict
        The claimed values (SI) with units.
    verdict : str
        One of :data:`VERDICTS`.
    evidence : tuple of str
        Why the claim counts as transport-contaminated (or not reproduced).
    missing : tuple of str
        What would be needed to test what could not be tested.
    notes : tuple of str
    conditions : dict
        Test condition (run id) -> factors, ``observable`` criteria (claimed rate as observed)
        and ``as_intrinsic`` state (eta, Thiele modulus, regime, shares, criteria).
    reproduction : dict
        ``as_observed`` and ``transport_aware`` refits (when data were given): estimates,
        intervals, S_hat, S_claim, likelihood ratio, p value, joint-region bound and inside.
    signatures : dict
        ``film``, ``pore_activation_energy``, ``pore_order``: ``found`` (bool or None) and text.
    """

    name: str
    basis: str
    values: Mapping[str, Any]
    verdict: str
    evidence: tuple[str, ...]
    missing: tuple[str, ...]
    notes: tuple[str, ...]
    conditions: Mapping[str, Any]
    reproduction: Mapping[str, Any]
    signatures: Mapping[str, Any]

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python form."""
        return {"name": self.name, "basis": self.basis, "values": self.values,
                "verdict": self.verdict, "evidence": list(self.evidence),
                "missing": list(self.missing), "notes": list(self.notes),
                "conditions": self.conditions, "reproduction": self.reproduction,
                "signatures": self.signatures}


@dataclass(frozen=True)
class AuditResult:
    """The audit of a claim file.

    Attributes
    ----------
    path : Path
    title : str
    claims : tuple of ClaimAudit
    thresholds : dict
    manifest : dict
    """

    path: Path
    title: str
    claims: tuple[ClaimAudit, ...]
    thresholds: Mapping[str, Any]
    manifest: Mapping[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python content of audit.json."""
        from kinfit.outputs import to_plain

        lh = any(c.values.get("rate_law") == "langmuir_hinshelwood" for c in self.claims)
        return to_plain({"kinfit_audit": 1, "claim_file": Path(self.path).name, "title": self.title,
                         "claims": [c.to_dict() for c in self.claims],
                         "thresholds": self.thresholds,
                         "sources": {**SOURCES, **LH_SOURCES} if lh else SOURCES,
                         "manifest": self.manifest})

    def markdown(self) -> str:
        """The short audit report (audit.md)."""
        from kinfit.audit_report import markdown

        lh = any(c.values.get("rate_law") == "langmuir_hinshelwood" for c in self.claims)
        return markdown(self, {**SOURCES, **LH_SOURCES} if lh else SOURCES)

    def save(self, folder: str | Path) -> Path:
        """Write audit.json and audit.md atomically into ``folder``."""
        from kinfit.outputs import write_json_atomic, write_text_atomic

        folder = Path(folder)
        write_text_atomic(folder / "audit.md", self.markdown())
        return write_json_atomic(folder / "audit.json", self.to_dict())


def _fixed(table):
    from kinfit.parameters import ParameterTable

    return ParameterTable([replace(table[n], vary=False) for n in table])


def _spec(study: Study, table, *, check: bool = True) -> ModelSpec:
    return ModelSpec.from_study(study, parameters=table, check=check)


def _criteria_at_conditions(built: _Built, cf: ClaimFile, claim: Claim,
                            thresholds: Thresholds) -> dict[str, Any]:
    """Observable criteria (from the observed rate the claim implies: the claimed rate itself
    for a claim "as measured", the rate through the stated film and pellet for a
    "transport-corrected" one) and the state with the claim taken as intrinsic, at every test
    condition."""
    table = _fixed(_transport_table(built, cf, claim))
    spec = _spec(built.transport, table, check=False)
    model = Model(spec, built.transport)
    state = model.run_states(np.zeros(0), thresholds=thresholds)
    if claim.basis == "as measured":
        # the claim describes what was observed
        p = {k: np.asarray(v) for k, v in claim.values().items()}
        r = np.asarray(spec.rate_law.rate(model.C0, model.T, p), dtype=float)
    else:
        # a transport-corrected claim implies the observed rate through the film and pellet
        r = np.asarray(state.observed.rate, dtype=float)
    kc = np.asarray(state.kc, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ca = np.where(np.isfinite(kc), r / (kc * model.a_m * model.C0), 0.0)
    cs = model.C0 * np.clip(1.0 - ca, 1e-12, 1.0)
    De = None if built.De is None else np.full(r.shape, built.De)
    n_app = lh_local(claim, model.T, model.C0)[0] if claim.is_lh else None
    obs = compute_criteria(
        observed_rate=r, bulk_concentration=model.C0, surface_concentration=cs,
        intrinsic_rate=r, effectiveness=np.ones_like(r), thiele_modulus=np.full_like(r, np.nan),
        kc=kc, particle_diameter=model.dp, particle_density=spec.particle_density,
        effective_diffusivity=De, geometry=spec.geometry,
        order=claim.values()["order"] if n_app is None else np.abs(n_app),
        thresholds=thresholds)
    c = state.criteria
    limits = obs.thresholds
    out: dict[str, Any] = {}
    for i, rid in enumerate(model.run_ids):
        run = built.study.run(rid)
        out[rid] = {
            **{f: run.factor(f) for f in FACTORS},
            "claimed_rate": float(r[i]),
            "observable": {
                "carberry": float(ca[i]) if built.has_kc else None,
                "weisz_prater": float(obs.weisz_prater[i]) if built.De else None,
                "mears": float(obs.mears[i]) if built.has_kc else None,
                "kc": float(kc[i]) if built.has_kc else None,
                **({} if n_app is None else {
                    "apparent_order": float(n_app[i]),
                    "carberry_limit": float(thresholds.carberry_limit(n_app[i]))}),
            },
            "as_intrinsic": {
                "effectiveness_factor": float(c.effectiveness_factor[i]),
                "thiele_modulus": float(c.thiele_modulus[i]),
                **c.shares.at(i),
                "observed_rate": float(state.observed.rate[i]),
                "carberry": float(c.carberry[i]) if built.has_kc else None,
                "weisz_prater": float(c.weisz_prater[i]) if built.De else None,
            },
        }
    return {"runs": out, "limits": limits}


def _refit(study: Study, table, claim: Claim, label: str) -> dict[str, Any]:
    """Refit the kinetics of one model and test the claimed values against the optimum."""
    from kinfit.fitting import FitOptions, fit_model

    kinetic = list(claim.values())
    names = [n for n in kinetic if table[n].vary]
    spec = _spec(study, table)
    model = Model(spec, study)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = fit_model(spec, study, FitOptions(profile=False, max_nfev=400))
    theta_c = np.array([claim.values()[c] for c in model.columns])
    with np.errstate(all="ignore"):
        f = model.predict(theta_c[None, :])[0]
    s_claim = float(np.sum(model.weights * (model.y - f) ** 2))
    n, p = model.n_obs, len(model.columns)
    s_hat = min(float(res.fit["sse"]), s_claim)
    lr = max(n * math.log(s_claim / s_hat), 0.0) if s_hat > 0 else math.inf
    bound = s_hat * (1.0 + p / (n - p) * stats.f.ppf(LEVEL, p, n - p)) if n > p else math.inf
    p_value = float(stats.chi2.sf(lr, p))
    estimates = {}
    for c in kinetic:
        e = res.parameters[c]
        estimates[c] = {"estimate": float(e["estimate"]), "unit": e["unit"],
                        "stderr": e.get("stderr"), "ci95": e.get("ci95"), "vary": e["vary"]}
    rejected = bool(p_value < 1 - LEVEL or s_claim > bound)
    return {
        "model": label, "film": spec.film.name, "pellet": spec.pellet,
        "tested": names, "converged": bool(res.converged), "message": res.fit["message"],
        "n_obs": n, "n_params": p, "estimates": estimates, "sse_optimum": s_hat,
        "sse_claim": s_claim, "likelihood_ratio": lr, "p_value": p_value,
        "joint_region_bound": bound, "inside_joint_region": bool(s_claim <= bound),
        "rejected": rejected, "regimes": {rid: r["regime"] for rid, r in res.runs.items()},
        "warnings": sorted({str(w.message) for w in caught}),
        "adequacy": res.fit.get("adequacy"),
    }


def _kinetic_table(built: _Built, cf: ClaimFile, claim: Claim, *, transport: bool,
                   notes: list[str]):
    table = (_transport_table(built, cf, claim) if transport else
             parameter_table_from_toml(claim.parameter_section(), cf.path.name))
    study = built.study
    from kinfit.parameters import ParameterTable

    fix = set()
    if len({round(r.temperature, 6) for r in study.runs}) < 2:
        if claim.is_lh:
            fix |= {"activation_energy", "adsorption_enthalpy"}
            notes.append("the data hold one temperature only: the activation energy and the "
                         "adsorption enthalpy are held at the claimed values in the refits (not "
                         "tested)")
        else:
            fix.add("activation_energy")
            notes.append("the data hold one temperature only: the activation energy is held "
                         "at the claimed value in the refits (not tested)")
    if study.kind == "rate" and len({round(r.initial_concentration, 9)
                                     for r in study.runs}) < 2:
        if claim.is_lh:
            fix |= {"adsorption_constant", "adsorption_enthalpy"}
            notes.append("the rate data hold one initial concentration only: the adsorption "
                         "constant and enthalpy are held at the claimed values in the refits "
                         "(not tested)")
        else:
            fix.add("order")
            notes.append("the rate data hold one initial concentration only: the order is "
                         "held at the claimed value in the refits (not tested)")
    return ParameterTable([replace(table[n], vary=False) if n in fix else table[n]
                           for n in table])


def _signatures(claim: Claim, transport_fit: dict[str, Any] | None, has_pellet: bool,
                built: _Built | None = None) -> dict[str, Any]:
    Ea, n = claim.activation_energy, claim.values()["order"]
    out: dict[str, Any] = {}
    first = abs(n - 1.0) <= ORDER_TOLERANCE
    out["film"] = film_signature(
        Ea, fluid=None if built is None else dict(built.study.fluid),
        temperatures=[] if built is None else [r.temperature for r in built.study.runs],
        transport_fit=transport_fit, first_order=first,
        head=f"claimed activation energy {Ea / 1e3:.3g} kJ/mol")
    skip = pore_not_tested(transport_fit, has_pellet)
    if skip is not None:
        out.update(skip)
        return out
    assert transport_fit is not None  # pore_not_tested returned None
    est = transport_fit["estimates"]
    pore_runs = [rid for rid, g in transport_fit["regimes"].items() if g == "pore"]
    if not pore_runs:
        text = ("not expected: at the transport-aware refit no test run is in the pore "
                "regime, where the halving of Ea and the order (n + 1)/2 apply")
        out["pore_activation_energy"] = {"found": False, "text": text}
        out["pore_order"] = {"found": False, "text": text}
        return out
    e_int = est["activation_energy"]
    if e_int["vary"] and e_int["estimate"] > 0:
        ratio = Ea / e_int["estimate"]
        ci = e_int["ci95"] or [None, None]
        found = bool(PORE_EA_RATIO[0] <= ratio <= PORE_EA_RATIO[1] and ci[0] is not None
                     and Ea < ci[0])
        span = ("" if ci[0] is None or ci[1] is None else
                f" (95 % interval {ci[0] / 1e3:.3g} to {ci[1] / 1e3:.3g} kJ/mol)")
        out["pore_activation_energy"] = {
            "found": found, "ratio": ratio, "intrinsic": e_int["estimate"],
            "text": (f"claimed activation energy {Ea / 1e3:.3g} kJ/mol is {ratio:.2f} of the "
                     f"intrinsic {e_int['estimate'] / 1e3:.3g} kJ/mol refitted with pore "
                     f"diffusion{span}"
                     + (": about half, the signature of strong pore-diffusion control "
                        "(Weisz & Prater 1954; Satterfield 1970)" if found else
                        ": not the halving of strong pore-diffusion control")),
        }
    else:
        out["pore_activation_energy"] = {"found": None, "text": "not tested: the activation "
                                         "energy was not refitted"}
    n_int = est["order"]
    se = n_int.get("stderr")
    ci = n_int.get("ci95") or [None, None]
    if n_int["vary"] and se is not None and abs(n_int["estimate"] - 1.0) > max(
            ORDER_TOLERANCE, 2.0 * se):
        expected = 0.5 * (n_int["estimate"] + 1.0)
        outside = ci[0] is not None and ci[1] is not None and not ci[0] <= n <= ci[1]
        found = bool(abs(n - expected) <= max(ORDER_TOLERANCE, 2.0 * se) and outside)
        out["pore_order"] = {
            "found": found, "expected_apparent": expected, "intrinsic": n_int["estimate"],
            "text": (f"claimed order {n:.3g} " + ("equals" if found else "differs from")
                     + f" (n + 1)/2 = {expected:.3g} of the refitted intrinsic order "
                     f"{n_int['estimate']:.3g}" + (": the signature of strong pore diffusion"
                                                   if found else "")),
        }
    else:
        out["pore_order"] = {"found": None, "text": "not informative: the refitted intrinsic "
                             "order is not distinguishable from first order, which stays first "
                             "order under pore diffusion ((n + 1)/2 = n)"
                             if n_int["vary"] else "not tested: the order was not refitted"}
    return out


def _criteria_evidence(crit: dict[str, Any], thresholds: Thresholds) -> tuple[list[str], bool]:
    """Sentences on criteria that fail at the test conditions, and whether any could not be
    computed."""
    runs, lim = crit["runs"], crit["limits"]
    out = []
    uncomputed = False

    def worst(key: str, group: str) -> tuple[str, float] | None:
        vals = [(rid, r[group][key]) for rid, r in runs.items() if r[group][key] is not None]
        return max(vals, key=lambda t: t[1]) if vals else None

    ca = worst("carberry", "observable")
    per_run = any("carberry_limit" in r["observable"] for r in runs.values())
    if ca is not None and per_run:
        # Langmuir-Hinshelwood: each run against its own limit 0.05/|n_app|
        rid = max(runs, key=lambda k: runs[k]["observable"]["carberry"]
                  / runs[k]["observable"]["carberry_limit"])
        o = runs[rid]["observable"]
        if ca[1] < 1.0 and o["carberry"] >= o["carberry_limit"]:
            out.append(f"Carberry number {o['carberry']:.3g} at run {rid} against its limit "
                       f"{o['carberry_limit']:.3g} = 0.05/|n_app| (apparent order "
                       f"{o['apparent_order']:.3g} of the claimed law): the film takes more "
                       "than 5 % of the rate (Carberry 1976)")
            ca = (ca[0], -math.inf)  # reported; skip the scalar-limit test below
    if ca is None:
        uncomputed = True
    elif ca[1] >= 1.0:
        out.append(f"the claimed rate at run {ca[0]} exceeds the largest rate the film can "
                   f"supply, kc a_m Cb (Carberry number {ca[1]:.3g} >= 1): the claim cannot "
                   "describe these test conditions with the stated kc")
    elif ca[1] >= lim["carberry"] and not per_run:
        out.append(f"Carberry number up to {ca[1]:.3g} (run {ca[0]}) against the limit "
                   f"{lim['carberry']:.3g} = 0.05/|n|: the film takes more than 5 % of the "
                   "rate (Carberry 1976)")
    wp = worst("weisz_prater", "observable")
    if wp is None:
        uncomputed = True
    elif wp[1] >= lim["weisz_prater"]:
        out.append(f"Weisz-Prater number up to {wp[1]:.3g} (run {wp[0]}) against the limit "
                   f"{lim['weisz_prater']:.3g} (Psi_L, L = Vp/Sp; first-order eta 0.95 in this "
                   "geometry): "
                   "pore diffusion limits the rate")
    bad = [(rid, r["as_intrinsic"]) for rid, r in runs.items()
           if r["as_intrinsic"]["regime"] != "kinetic"
           or r["as_intrinsic"]["effectiveness_factor"] < thresholds.effectiveness]
    if bad:
        rid, s = min(bad, key=lambda t: t[1]["effectiveness_factor"])
        out.append(f"taken as intrinsic, the claim is not free of transport at its own test "
                   f"conditions: at run {rid} eta = {s['effectiveness_factor']:.3g} (limit "
                   f"{thresholds.effectiveness:g}), regime '{s['regime']}' (film share "
                   f"{s['shares']['film']:.2f}, pore share {s['shares']['pore']:.2f})")
    return out, uncomputed


def _audit_one(cf: ClaimFile, claim: Claim, thresholds: Thresholds) -> ClaimAudit:
    built = _build(cf, claim)
    notes: list[str] = []
    missing: list[str] = []
    if not built.has_kc:
        missing.append("the film coefficient at the test conditions ([film] kc, or a Sherwood "
                       "correlation model with [fluid] properties): without it the Carberry "
                       "and Mears numbers cannot be computed")
    if not built.De:
        missing.append("the effective diffusivity (effective_diffusivity in the claim or "
                       "[pellet]): without it the Weisz-Prater number, eta and the "
                       "pore-diffusion signature cannot be computed")
    crit = _criteria_at_conditions(built, cf, claim, thresholds)
    crit_evidence, uncomputed = _criteria_evidence(crit, thresholds)
    reproduction: dict[str, Any] = {}
    transport_fit = None
    if cf.data is None:
        missing.append("data (a [data] section with runs and observations): without them "
                       "whether the data reproduce the claim cannot be tested")
    else:
        bare = _kinetic_table(built, cf, claim, transport=False, notes=notes)
        law = (f"Langmuir-Hinshelwood (m = {claim.m})" if claim.is_lh else "power law")
        reproduction["as_observed"] = _refit(built.bare, bare, claim, f"{law}, no transport")
        if built.has_kc or built.De:
            table = _kinetic_table(built, cf, claim, transport=True, notes=[])
            transport_fit = _refit(built.transport, table, claim,
                                   f"{law} with the stated film and pellet")
            reproduction["transport_aware"] = transport_fit
        for key, r in reproduction.items():
            if not r["converged"]:
                notes.append(f"the {key.replace('_', '-')} refit did not converge "
                             f"({r['message']}); its test is indicative only")
    signatures = (lh_signatures(claim, crit, transport_fit, bool(built.De),
                                fluid=dict(built.study.fluid)) if claim.is_lh
                  else _signatures(claim, transport_fit, bool(built.De), built))
    evidence: list[str] = []
    if claim.basis == "as measured":
        evidence += crit_evidence
        evidence += [s["text"] for s in signatures.values() if s["found"]]
        bare_fit = reproduction.get("as_observed")
        if transport_fit and bare_fit and transport_fit["rejected"] and not bare_fit["rejected"]:
            evidence.append(
                "the data follow the claimed values only when transport is ignored: rejected "
                f"with the stated film and pellet (likelihood ratio p = "
                f"{transport_fit['p_value']:.2g}), accepted without them "
                f"(p = {bare_fit['p_value']:.2g})")
    else:
        notes += [f"test conditions: {t}; the claim rests on the stated kc and De"
                  for t in crit_evidence]
    applicable = transport_fit or reproduction.get("as_observed")
    rejected = bool(applicable and applicable["rejected"])
    if evidence:
        verdict = "transport-contaminated"
    elif rejected and applicable is not None:
        verdict = "not reproduced by the data"
        evidence.append(
            f"the data reject the claimed values ({applicable['model']}: likelihood ratio "
            f"{applicable['likelihood_ratio']:.3g}, p = {applicable['p_value']:.2g}; S at the "
            f"claim {applicable['sse_claim']:.4g} against the joint 95 % bound "
            f"{applicable['joint_region_bound']:.4g})")
    elif claim.basis == "as measured" and uncomputed:
        verdict = "not testable with these data"
    elif claim.basis == "transport-corrected" and (crit_evidence or uncomputed) and (
            transport_fit is None):
        verdict = "not testable with these data"
        missing.append("data with the stated film and pellet, to check the transport "
                       "correction the claim rests on")
    else:
        verdict = "consistent with intrinsic kinetics"
    if claim.is_lh:
        orders = [r["observable"]["apparent_order"] for r in crit["runs"].values()]
        notes.append("Langmuir-Hinshelwood claim: the Mears number and the Carberry limit use "
                     "the local apparent order of the claimed law at each test condition, "
                     f"n_app = 1 - m K C/(1 + K C) (here {min(orders):.3g} to "
                     f"{max(orders):.3g}), as |n_app|")
        if min(orders) <= 0:
            notes.append("the apparent order is <= 0 at some test conditions (m = 2 past the "
                         "rate maximum at K C = 1): there a lower surface concentration raises "
                         "the rate, and the Mears and Carberry tests with |n_app| are first-"
                         "order estimates only; the as-intrinsic regime and eta carry the test")
    values = _values(claim, built)
    return ClaimAudit(claim.name, claim.basis, values, verdict, tuple(evidence),
                      tuple(missing), tuple(notes), crit, reproduction, signatures)


def _values(claim: Claim, built: _Built) -> dict[str, Any]:
    De = {"value": built.De, "unit": "m^2/s",
          "from": "claim" if claim.effective_diffusivity else ("[pellet]" if built.De else None)}
    if claim.is_lh:
        return {"rate_law": claim.rate_law,
                "k_ref": {"value": claim.k_ref, "unit": "mol/(kg*s)"},
                "reference_temperature": {"value": claim.reference_temperature, "unit": "K"},
                "activation_energy": {"value": claim.activation_energy, "unit": "J/mol"},
                "adsorption_constant": {"value": claim.adsorption_constant, "unit": "m^3/mol"},
                "adsorption_enthalpy": {"value": claim.adsorption_enthalpy, "unit": "J/mol"},
                "m": {"value": claim.m, "unit": "1"},
                "effective_diffusivity": De}
    return {"k_ref": {"value": claim.k_ref, "unit": "mol/(kg*s)"},
            "reference_temperature": {"value": claim.reference_temperature, "unit": "K"},
            "reference_concentration": {"value": claim.reference_concentration,
                                        "unit": "mol/m^3"},
            "activation_energy": {"value": claim.activation_energy, "unit": "J/mol"},
            "order": {"value": claim.order, "unit": "1"},
            "effective_diffusivity": De}


def audit_claims(path: str | Path | ClaimFile, *, thresholds: Thresholds | None = None
                 ) -> AuditResult:
    """Audit every claim of a claim file.

    Parameters
    ----------
    path : str, Path or ClaimFile
        The claim file (see :func:`load_claims` for the format).
    thresholds : Thresholds, optional
        Criteria limits (default: those of :mod:`kinfit.criteria`).

    Returns
    -------
    AuditResult

    Raises
    ------
    StudyError
        Bad input in the claim file or its tables.
    """
    cf = path if isinstance(path, ClaimFile) else load_claims(path)
    thresholds = thresholds or Thresholds()
    from kinfit.outputs import manifest

    files = {str(cf.path): _sha256(cf.path)}
    if cf.data is not None:
        files.update({str(p): _sha256(p) for p in cf.data})
    claims = tuple(_audit_one(cf, c, thresholds) for c in cf.claims)
    return AuditResult(cf.path, cf.title, claims,
                       {"carberry": f"{thresholds.carberry:g}/|n|",
                        "weisz_prater_eta": thresholds.weisz_prater_eta,
                        "weisz_prater_radius": thresholds.weisz_prater_radius,
                        "mears": f"{thresholds.mears:g} (sphere; x (R/L)/3 for other shapes)", "effectiveness": thresholds.effectiveness,
                        "film_activation_energy_without_liquid": FILM_EA_LIMIT,
                        "film_activation_energy_allowance": FILM_EA_ALLOWANCE,
                        "pore_activation_energy_ratio": list(PORE_EA_RATIO),
                        "order_tolerance": ORDER_TOLERANCE, "level": LEVEL},
                       manifest(files=files, argv=None, base=cf.path))


# ------------------------------------------------------------------------------ command line
def add_audit_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit audit CLAIM [--out DIR]``."""
    parser.add_argument("claim", type=Path, help="the claim file (TOML)")
    parser.add_argument("--out", type=Path, default=Path("reports") / "audit",
                        help="output folder (default: reports/audit)")
    parser.add_argument("--require-consistent", action="store_true",
                        help="exit 1 unless every claim is consistent with intrinsic kinetics")


def run_audit_command(args: argparse.Namespace) -> int:
    """Run ``kinfit audit``; returns the exit code."""
    from kinfit.outputs import prepare_out_dir, recorded_command

    result = audit_claims(args.claim)
    result = replace(result, manifest={**result.manifest, "command": recorded_command(sys.argv)})
    out = prepare_out_dir(args.out)
    result.save(out)
    for c in result.claims:
        print(f"{c.name}: {c.verdict}")
        caution = refit_inadequacy(c.reproduction)
        if caution:
            print(f"  caution: {caution}")
        for e in c.evidence:
            print(f"  - {e}")
        for m in c.missing:
            print(f"  missing: {m}")
    print(f"\nwrote {out / 'audit.json'} and {out / 'audit.md'}")
    if args.require_consistent and any(c.verdict != VERDICTS[0] for c in result.claims):
        print("kinfit: not every claim is consistent with intrinsic kinetics", file=sys.stderr)
        return 1
    return 0
