"""The markdown report of ``kinfit audit`` (audit.md): a summary table of the claims and, per
claim, the verdict with its evidence, the criteria at the test conditions, the refits and the
signatures. Power-law claims show the order; Langmuir-Hinshelwood claims show K, dH_ads and m
and the local apparent order of the claimed law at each test condition.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

__all__ = ["markdown", "is_lh", "refit_inadequacy"]


def _fmt(v: float | None, spec: str = ".3g") -> str:
    return "n/a" if v is None else format(v, spec)


def _interval(entry: Mapping[str, Any], scale: float = 1.0) -> str:
    est = entry["estimate"] / scale
    ci = entry["ci95"]
    if not entry["vary"]:
        return f"{est:.4g} (held)"
    if not ci or ci[0] is None or ci[1] is None:
        return f"{est:.4g}"
    return f"{est:.4g} ({ci[0] / scale:.4g} to {ci[1] / scale:.4g})"


def is_lh(values: Mapping[str, Any]) -> bool:
    """Whether a claim's values (``ClaimAudit.values``) are those of a Langmuir-Hinshelwood law."""
    return values.get("rate_law") == "langmuir_hinshelwood"


def _lh_terms(v: Mapping[str, Any]) -> str:
    return (f"K = {v['adsorption_constant']['value'] * 1e3:.4g} L/mol, dH_ads = "
            f"{v['adsorption_enthalpy']['value'] / 1e3:.4g} kJ/mol, m = {v['m']['value']}")


def _summary(claims: Any) -> list[str]:
    if not any(is_lh(c.values) for c in claims):
        lines = ["| claim | basis | k_ref [mol/(kg s)] at T_ref | Ea [kJ/mol] | order | verdict |",
                 "|---|---|---|---|---|---|"]
        for c in claims:
            v = c.values
            lines.append(f"| {c.name} | {c.basis} | {v['k_ref']['value']:.4g} at "
                         f"{v['reference_temperature']['value'] - 273.15:.4g} degC | "
                         f"{v['activation_energy']['value'] / 1e3:.4g} | "
                         f"{v['order']['value']:.3g} | **{c.verdict}** |")
        return lines
    lines = ["| claim | basis | rate law | k_ref [mol/(kg s)] at T_ref | Ea [kJ/mol] | order, or "
             "K, dH_ads, m | verdict |", "|---|---|---|---|---|---|---|"]
    for c in claims:
        v = c.values
        lh = is_lh(v)
        lines.append(f"| {c.name} | {c.basis} | "
                     f"{'Langmuir-Hinshelwood' if lh else 'power'} | {v['k_ref']['value']:.4g} "
                     f"at {v['reference_temperature']['value'] - 273.15:.4g} degC | "
                     f"{v['activation_energy']['value'] / 1e3:.4g} | "
                     f"{_lh_terms(v) if lh else format(v['order']['value'], '.3g')} | "
                     f"**{c.verdict}** |")
    return lines


def _criteria(c: Any) -> list[str]:
    from kinfit.conditions import display

    lh = is_lh(c.values)
    lines = ["### Criteria at the test conditions", "",
             "Carberry, Weisz-Prater and Mears from the observed rate the claim implies "
             "(the claimed rate itself when claimed as measured). As intrinsic: the claim "
             "pushed through the stated film and pellet."
             + (" Apparent order: the local order of the claimed Langmuir-Hinshelwood law at "
                "the bulk concentration, d ln r/d ln C = 1 - m K C/(1 + K C), used (as |n|) in "
                "the Mears number and the Carberry limit." if lh else ""), ""]
    if lh:
        lines += ["| run | conditions | apparent order | Carberry (limit) | Weisz-Prater | Mears "
                  "| eta as intrinsic | regime as intrinsic |", "|---|---|---|---|---|---|---|---|"]
    else:
        lines += ["| run | conditions | Carberry | Weisz-Prater | Mears | eta as intrinsic | "
                  "regime as intrinsic |", "|---|---|---|---|---|---|---|"]
    lim = c.conditions["limits"]
    for rid, r in c.conditions["runs"].items():
        cond = ", ".join(display(f, r[f]) for f in ("temperature", "stirrer_speed",
                                                   "particle_diameter", "initial_concentration"))
        o, s = r["observable"], r["as_intrinsic"]
        tail = (f"{_fmt(o['weisz_prater'])} | {_fmt(o['mears'])} | "
                f"{s['effectiveness_factor']:.3g} | {s['regime']} |")
        if lh:
            ca = ("n/a" if o["carberry"] is None else
                  f"{o['carberry']:.3g} ({o['carberry_limit']:.3g})")
            lines.append(f"| {rid} | {cond} | {o['apparent_order']:.3g} | {ca} | {tail}")
        else:
            lines.append(f"| {rid} | {cond} | {_fmt(o['carberry'])} | {tail}")
    carberry = ("0.05/|n_app| per run" if lh else
                f"{lim['carberry']:.3g} (0.05/|n|)")
    lines += ["", f"Limits: Carberry {carberry}, Weisz-Prater "
              f"{lim['weisz_prater']:.3g} (Psi_L), Mears {lim['mears']:.3g}, eta >= "
              f"{lim['effectiveness_factor']:.3g}.", ""]
    return lines


def _reproduction(c: Any) -> list[str]:
    if not c.reproduction:
        return []
    lh = is_lh(c.values)
    if lh:
        lines = ["### Do the data reproduce the claim?", "",
                 "| refit | k_ref | Ea [kJ/mol] (95 %) | K [L/mol] (95 %) | dH_ads [kJ/mol] "
                 "(95 %) | LR (p) | S claim / joint bound | claim |",
                 "|---|---|---|---|---|---|---|---|"]
    else:
        lines = ["### Do the data reproduce the claim?", "",
                 "| refit | k_ref | Ea [kJ/mol] (95 %) | order (95 %) | LR (p) | S claim / "
                 "joint bound | claim |", "|---|---|---|---|---|---|---|"]
    for r in c.reproduction.values():
        e = r["estimates"]
        middle = (f"{_interval(e['adsorption_constant'], 1e-3)} | "
                  f"{_interval(e['adsorption_enthalpy'], 1e3)}" if lh else
                  _interval(e["order"]))
        lines.append(f"| {r['model']} | {e['k_ref']['estimate']:.4g} | "
                     f"{_interval(e['activation_energy'], 1e3)} | {middle} | "
                     f"{r['likelihood_ratio']:.3g} ({r['p_value']:.2g}) | "
                     f"{r['sse_claim']:.4g} / {r['joint_region_bound']:.4g} | "
                     f"{'rejected' if r['rejected'] else 'accepted'} |")
    lines.append("")
    return lines


def markdown(result: Any, sources: Mapping[str, str]) -> str:
    """The short audit report of an :class:`kinfit.audit.AuditResult` with its sources."""
    lines = [f"# Audit of claimed kinetics: {result.title}", "",
             f"Claim file: `{result.path.name}`. Criteria and thresholds as in kinfit's "
             "criteria module; sources at the end.", ""]
    lines += _summary(result.claims)
    for c in result.claims:
        lines += ["", f"## {c.name}", "", f"**Verdict: {c.verdict}.**", ""]
        caution = refit_inadequacy(c.reproduction)
        if caution:
            lines += [f"Caution: {caution}.", ""]
        if c.evidence:
            lines += ["Evidence:", ""] + [f"- {e}" for e in c.evidence] + [""]
        if c.missing:
            lines += ["Not tested (missing):", ""] + [f"- {m}" for m in c.missing] + [""]
        lines += _criteria(c)
        lines += _reproduction(c)
        lines += ["### Signatures", ""] + [f"- {s['text']}" for s in c.signatures.values()]
        if c.notes:
            lines += ["", "Notes:", ""] + [f"- {n}" for n in c.notes]
    from kinfit.outputs import cautions_markdown

    lines += ["", *cautions_markdown()]
    lines += ["", "## Sources", ""] + [f"- {k}: {v}" for k, v in sources.items()]
    return "\n".join(lines) + "\n"


def refit_inadequacy(reproduction: Mapping[str, Any]) -> str | None:
    """A caution to the verdict when the transport-aware refit itself fails its adequacy
    tests (the verdict then rests on a model the data reject), else None."""
    block = (reproduction.get("transport_aware") or {}).get("adequacy") or {}
    if block.get("adequate") is not False:
        return None
    return ("the transport-aware refit is itself not adequate, so this verdict rests on a "
            "model the data reject: " + "; ".join(block.get("failed") or []))
