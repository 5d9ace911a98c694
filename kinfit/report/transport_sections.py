"""The report's sections built from the transport state and the optional files: the transport
diagnosis (per-run criteria and regime, thresholds and sources, regime map, effectiveness factor,
intrinsic against apparent kinetics, model-free tests and suggested runs from diagnosis.json) and
the posterior (posterior.json, posterior_draws.csv). Sections and blocks appear as their data
exist; every optional field is read with a default.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from kinfit.physics.criteria import THRESHOLD_SOURCES
from kinfit.physics.resistances import REGIMES
from kinfit.report import figures as fg
from kinfit.report import posterior_figures as pf
from kinfit.report import transport_figures as tf
from kinfit.report.content import (
    CRITERIA_KEYS,
    FACTOR_LABEL,
    Details,
    Equation,
    Facts,
    Heading,
    Items,
    Section,
    Table,
    Text,
    fmt,
    fmt_interval,
    fmt_interval_mc,
    fmt_mc,
    fmt_p,
    get_path,
)
from kinfit.report.context import ReportContext
from kinfit.report.equations import EQUATIONS
from kinfit.report.matrix import SetCell, set_matrix

__all__ = ["transport_section", "posterior_section"]


#: the per-run criteria's limits in words (the diagnosis also records the inputs they are
#: derived from, such as the Carberry limit times |n|; those stay in diagnosis.json)
_THRESHOLD_WORDS = {
    "carberry": "Carberry number (film), at most",
    "weisz_prater": "Weisz–Prater number Ψ_L (pores), at most",
    "mears": "Mears number (film), at most",
    "effectiveness_factor": "effectiveness factor η, at least",
}


def _thresholds(rb: ReportContext) -> tuple[dict[str, float], dict[str, str]]:
    diag = rb.inp.diagnosis or {}
    first = next(iter(rb.res.runs.values()), {})
    limits = dict(first.get("thresholds") or {})
    limits.update({k: v for k, v in (diag.get("thresholds") or {}).items()
                   if isinstance(v, int | float)})
    sources = dict(THRESHOLD_SOURCES)
    sources.update({k: str(v) for k, v in (diag.get("sources") or {}).items()})
    return limits, sources

def transport_section(rb: ReportContext) -> Section:
    """The transport diagnosis: per-run criteria and regime with thresholds and sources,
    regime map, effectiveness factor, kinetics and (when present) the diagnosis file."""
    res, diag = rb.res, rb.inp.diagnosis or {}
    limits, sources = _thresholds(rb)
    header = ["run", "regime", "Φ", "η", "Ψ_L", "Mears", "Ca", "film share",
              "pore share", "reaction share", "intrinsic"]
    rows: list[Sequence[str]] = []
    tones: list[list[str | None]] = []
    pass_key = {"effectiveness_factor": "effectiveness_factor", "weisz_prater":
                "weisz_prater", "mears": "mears", "carberry": "carberry"}
    for rid, r in res.runs.items():
        sh = r.get("shares") or {}
        passes = r.get("passes") or {}
        row = [rid, str(r.get("regime"))] + [fmt(r.get(k), 3) for k, _ in CRITERIA_KEYS] + [
            fmt(sh.get("film"), 3), fmt(sh.get("pore"), 3), fmt(sh.get("reaction"), 3),
            "yes" if r.get("intrinsic") else "no"]
        tone = [None, rb.regimes[rid], None]
        for k, _ in CRITERIA_KEYS[1:]:
            ok = passes.get(pass_key.get(k, k))
            tone.append(None if ok is None else ("ok" if ok else "fail"))
        tone += [None, None, None, "ok" if r.get("intrinsic") else "fail"]
        rows.append(row)
        tones.append(tone)
    blocks: list[Any] = [
        Text("Criteria at each run's initial conditions, from the fitted model. A run is "
             "\"kinetic\" only when the reaction share is at least 0.95 (its observed rate "
             "within 5 % of the intrinsic rate at bulk conditions); \"film\" or \"pore\" "
             "when that resistance's share exceeds one half; \"mixed\" otherwise."),
        rb.table("Per-run transport criteria and regime; green meets the threshold, red "
                   "fails it.", header, rows, tones=tones,
                   numeric=(False, False) + (True,) * 8 + (False,), csv="runs.csv"),
        Equation(EQUATIONS["carberry"], "Carberry number (external film)"),
        Equation(EQUATIONS["weisz_prater"], "Weisz–Prater number, L = Vp/Sp normalisation"),
        Equation(EQUATIONS["mears"], "Mears number with the particle density"),
        Equation(EQUATIONS["shares"], "resistances in series per kg: film, reaction, pore"),
    ]
    trows = []
    for k, words in _THRESHOLD_WORDS.items():  # one row per criterion, in words
        if isinstance(limits.get(k), int | float):
            trows.append((words, fmt(limits[k], 4), sources.get(k, "")))
    blocks.append(rb.table("Thresholds in use and their sources.",
                             ("criterion", "limit", "source"), trows,
                             numeric=(False, True, False)))
    wp_lim, ca_lim = limits.get("weisz_prater"), limits.get("carberry")
    if wp_lim and ca_lim:
        pts = [(rid, float(r.get("weisz_prater") or 0.0), float(r.get("carberry") or 0.0),
                rb.regimes[rid]) for rid, r in res.runs.items()]
        b = rb.figure("regime_map", "Regime map: Carberry number (film) against "
                        "Weisz–Prater number (pores) for each run, with the thresholds "
                        "in use (dashed).", lambda: tf.regime_map_figure(
                            pts, carberry_limit=float(ca_lim),
                            weisz_prater_limit=float(wp_lim)), "regime map")
        if b:
            blocks.append(b)
    order = _order(rb)
    geometry = str(res.model.get("geometry", "sphere"))
    post_runs = get_path(rb.inp.posterior, "runs", default={}) or {}
    intervals = {}
    for rid, pr in post_runs.items():
        ph, et = pr.get("thiele_modulus") or {}, pr.get("effectiveness_factor") or {}
        if all(isinstance(d.get(k), int | float) for d in (ph, et) for k in ("q05", "q95")):
            intervals[rid] = ((ph["q05"], ph["q95"]), (et["q05"], et["q95"]))
    note = ("pellet model off: every run has η = 1 by assumption"
            if res.model.get("pellet") == "none" else None)
    pts_eta = [(rid, float(r.get("thiele_modulus") or 0.0),
                float(r.get("effectiveness_factor") or 1.0), rb.regimes[rid])
               for rid, r in res.runs.items()]
    b = rb.figure("effectiveness", f"Effectiveness factor against the generalised Thiele "
                    f"modulus for a {geometry} (order {fmt(order, 3)}), with each run at "
                    "its initial conditions" + (" and its posterior 90 % intervals"
                                                if intervals else "") + ".",
                    lambda: tf.effectiveness_figure(geometry=geometry, order=order,
                                                    runs=pts_eta, intervals=intervals,
                                                    note=note),
                    "effectiveness factor against Thiele modulus")
    if b:
        blocks.append(b)
    if post_runs:
        blocks.append(_regime_probability(rb, post_runs))
    blocks += _kinetics_blocks(rb, diag)
    blocks += _diagnosis_blocks(rb, diag)
    return Section("transport", "Transport diagnosis", tuple(blocks))

def _order(rb: ReportContext) -> float:
    p = rb.res.parameters.get("order")
    if p and p.get("estimate") is not None:
        return float(p["estimate"])
    orders = [float(r["order"]) for r in rb.res.runs.values()
              if isinstance(r.get("order"), int | float)]
    return float(np.median(orders)) if orders else 1.0

def _regime_probability(rb: ReportContext, post_runs: Mapping[str, Any]) -> Table:
    # one source for a number the console prints too: the diagnosis' probabilities (what
    # 'kinfit diagnose' shows) when it has them, else the sampler's summary
    diag = rb.inp.diagnosis or {}
    diag_runs = {rid: r for rid, r in (diag.get("runs") or {}).items()
                 if isinstance(r, Mapping) and r.get("regime_probability")}
    n_draws = get_path(diag, "model", "n_draws")
    if diag_runs:
        post_runs = diag_runs
        where = (f"diagnosis.json, {n_draws} posterior draws" if n_draws
                 else "diagnosis.json")
    else:
        where = "posterior.json"
    rows: list[Sequence[str]] = []
    tones: list[list[str | None]] = []
    for rid, pr in post_runs.items():
        prob = pr.get("regime_probability") or {}
        best = max(prob, key=lambda k: prob.get(k) or 0.0) if prob else None
        rows.append([rid] + ["–" if prob.get(g) is None else f"{float(prob[g]):.2f}"
                             for g in REGIMES])
        tone: list[str | None] = [None]
        tones.append(tone + [g if g == best else None for g in REGIMES])
    return rb.table("Posterior probability of each regime per run (share of the "
                      f"evaluated draws; from {where}).", ["run", *REGIMES], rows, tones=tones,
                      numeric=(False,) + (True,) * len(REGIMES))

def _apparent_conditions(rb: ReportContext, cond: Any) -> str:
    """The stirrer speed and particle size the apparent constants were taken at, in words
    (``"300 rpm, 10 µm"``); empty when the diagnosis does not say."""
    if not isinstance(cond, Mapping):
        return ""
    parts = [rb.factor_text(f, cond[f]) for f in ("stirrer_speed", "particle_diameter")
             if isinstance(cond.get(f), int | float)]
    return ", ".join(parts)


def _kinetics_blocks(rb: ReportContext, diag: Mapping[str, Any]) -> list[Any]:
    params, m = rb.res.parameters, rb.res.model
    k_ref, ea = params.get("k_ref"), params.get("activation_energy")
    t_ref = get_path(m, "rate_law_options", "reference_temperature")
    if not (k_ref and ea and t_ref and k_ref.get("estimate") and
            ea.get("estimate") is not None):
        return []
    blocks: list[Any] = [Heading("Intrinsic and apparent kinetics")]
    cov = None
    names = list(get_path(rb.res.correlation, "names", default=[]) or [])
    c = np.asarray(rb.res.covariance or [], dtype=float)
    if "k_ref" in names and "activation_energy" in names and c.shape == (len(names),) * 2:
        i, j = names.index("k_ref"), names.index("activation_energy")
        cov = c[np.ix_([i, j], [i, j])]
    per_run = []
    c_ref = get_path(m, "rate_law_options", "reference_concentration")
    if m.get("rate_law") == "power" and c_ref:
        n = _order(rb)
        for run in rb.inp.study.runs:
            r = rb.res.runs.get(run.id, {})
            rate = r.get("observed_rate")
            if isinstance(rate, int | float) and rate > 0:
                per_run.append((run.id, run.temperature,
                                rate / (run.initial_concentration / c_ref) ** n,
                                rb.regimes[run.id]))
    fals = diag.get("falsified") or {}
    apparent = [(float(p["temperature"]), float(p["k_apparent"]))
                for p in fals.get("per_temperature") or []
                if isinstance(p, Mapping) and isinstance(p.get("temperature"), int | float)
                and isinstance(p.get("k_apparent"), int | float)]
    temps = [r.temperature for r in rb.inp.study.runs]
    where = _apparent_conditions(rb, fals.get("conditions"))
    app_label = f"apparent at {where}" if where else "apparent (diagnosis)"
    b = rb.figure("arrhenius", "Arrhenius plot: intrinsic k(T) from k_ref and E_a (line, "
                    "95 % band by the delta method); each run's effective constant "
                    "r_obs/(C₀/C_ref)^n at its initial conditions (markers by regime: below "
                    "the line where transport slows the run)" + ("; apparent constants "
                                                                "per temperature from "
                                                                "the diagnosis (plus signs"
                                                                + (f", taken at {where}"
                                                                   if where else "") + ")"
                                                                if apparent else "") + ".",
                    lambda: fg.arrhenius_figure(
                        k_ref=float(k_ref["estimate"]), activation_energy=float(
                            ea["estimate"]), reference_temperature=float(t_ref),
                        temperatures=temps, k_unit=str(k_ref.get("unit", "")),
                        covariance=cov, per_run=per_run, apparent=apparent,
                        apparent_label=app_label),
                    "Arrhenius plot")
    if b:
        blocks.append(b)
    if fals:
        facts = []
        for key, label, scale, unit in (
            ("intrinsic_activation_energy", "intrinsic E_a", 1e-3, "kJ/mol"),
            ("apparent_activation_energy", "apparent E_a" + (f" at {where}" if where else ""),
             1e-3, "kJ/mol"),
            ("intrinsic_order", "intrinsic order", 1.0, ""),
            ("apparent_order", "apparent order", 1.0, ""),
        ):
            v = fals.get(key)
            if isinstance(v, int | float):
                facts.append((label, f"{fmt(v * scale)} {unit}".strip()))
        ci = fals.get("apparent_activation_energy_ci95")
        if isinstance(ci, list | tuple) and len(ci) == 2 and all(
                isinstance(x, int | float) for x in ci):
            facts.append(("apparent E_a" + (f" at {where}" if where else "") + ", 95 %",
                          fmt_interval([ci[0] * 1e-3, ci[1] * 1e-3]) + " kJ/mol"))
        if facts:
            blocks.append(Facts(tuple(facts)))
        if fals.get("warnings"):
            blocks.append(Items(tuple(map(str, fals["warnings"])), "warning"))
    return blocks

def _diagnosis_blocks(rb: ReportContext, diag: Mapping[str, Any]) -> list[Any]:
    blocks: list[Any] = []
    tests = [t for t in diag.get("model_free") or [] if isinstance(t, Mapping)]
    if tests or diag.get("not_possible"):
        blocks.append(Heading("What the data show without a model"))
    if tests:
        blocks += _model_free_blocks(rb, tests)
    impossible = [f"{d.get('factor', '')}: {d.get('message', '')}"
                  for d in diag.get("not_possible") or [] if isinstance(d, Mapping)]
    if impossible:
        blocks.append(Items(tuple(impossible), "note"))
    nxt = [d for d in diag.get("next_runs") or [] if isinstance(d, Mapping)]
    if nxt:
        next_rows = [(rb.temperature(d.get("temperature")).split(" ")[0],
                      fmt((d.get("stirrer_speed") or 0) * 60, 4)
                 if isinstance(d.get("stirrer_speed"), int | float) else "–",
                 fmt((d.get("particle_diameter") or 0) * 1e6, 4)
                 if isinstance(d.get("particle_diameter"), int | float) else "–",
                 str(d.get("note", ""))) for d in nxt]
        blocks.append(Heading("Runs that would make the data intrinsic"))
        blocks.append(rb.table("Suggested conditions (from the diagnosis).",
                                 ("T [°C]" if rb.celsius else "T [K]", "N [rpm]", "d_p [µm]",
                                  "note"), next_rows,
                                 numeric=(True, True, True, False)))
    return blocks

def _fixed(value: Any, decimals: int) -> str:
    """A number with a fixed count of decimals (R-hat); ``–`` when missing."""
    try:
        f = float(value)
    except (TypeError, ValueError):
        return "–"
    return f"{f:.{decimals}f}" if math.isfinite(f) else "–"


def _p_text(p: Any) -> str:
    """``p = 0.085`` or ``p < 1×10⁻⁶``."""
    text = fmt_p(p)
    return f"p {text}" if text.startswith("<") else f"p = {text}"


def _model_free_blocks(rb: ReportContext, tests: Sequence[Mapping[str, Any]]) -> list[Any]:
    """The model-free tests as one matrix (factor and held conditions by temperature; each
    cell the p-value and verdict), the method stated once, and what lies behind each cell
    (runs, statistic, conclusion) folded beneath."""
    cells = []
    for t in tests:
        factor = str(t.get("factor", ""))
        vals = tuple(v for v in t.get("values") or [] if isinstance(v, int | float))
        diff = t.get("different")
        verdict = "–" if diff is None else ("differs" if diff else "no difference")
        df = t.get("df")
        dft = (f" ({', '.join(map(str, df))} df)" if isinstance(df, Sequence)
               and not isinstance(df, str) else "")
        spline = re.search(r"\d+ interior knots?", str(t.get("test", "")))
        measure = str(t.get("measure", "")).strip()
        note = (" vs ".join(map(str, t.get("runs") or [])) + f": statistic "
                f"{fmt(t.get('statistic'), 3)}{dft}, {_p_text(t.get('p_value'))}"
                + (f", {spline.group(0)}" if spline else "")
                + (f"; {measure}" if measure else "") + ". " + str(t.get("conclusion", "")))
        cells.append(SetCell(factor, vals, {k: v for k, v in (t.get("fixed") or {}).items()
                                            if isinstance(v, int | float)},
                             f"{_p_text(t.get('p_value'))}, {verdict}",
                             None if diff is None else ("fail" if diff else "ok"), note))
    m = set_matrix([c for c in cells if c.factor in FACTOR_LABEL], list(rb.varied),
                   rb.factor_text)
    blocks: list[Any] = []
    methods: dict[str, list[str]] = {}
    for t in tests:
        # the per-set details (knots, measured span) go to the cell's note
        key = re.sub(r"\d+ interior knots?", "interior knots chosen per set",
                     str(t.get("test", "")).strip())
        label = FACTOR_LABEL.get(str(t.get("factor")), (str(t.get("factor")),))[0]
        if key and label not in methods.setdefault(key, []):
            methods[key].append(label)
    alpha = (rb.inp.diagnosis or {}).get("alpha")
    level = f" at the {fmt(alpha, 2)} level" if isinstance(alpha, int | float) else ""
    for key, labels in methods.items():
        who = "" if len(methods) == 1 else f" ({', '.join(labels)})"
        blocks.append(Text(f"Method{who}: {key}. \"differs\" means the runs of a set do not "
                           f"follow one curve{level}; green: no difference, red: differs."))
    blocks.append(rb.table("Model-free tests: each cell is one set of runs that differ in "
                           "the factor of its row only, held at the conditions of its row "
                           "and column; p-value and verdict.", m.header, m.rows,
                           tones=m.tones))
    if m.notes:
        blocks.append(Details("Runs, statistic and conclusion behind each cell",
                              tuple(f"{r} at {c}: {n}" if c not in ("", "result")
                                    else f"{r}: {n}" for r, c, n in m.notes)))
    return blocks


def posterior_section(rb: ReportContext) -> Section | None:
    """The posterior: sampler settings, convergence, summary, corner plot and traces."""
    post, draws = rb.inp.posterior, rb.inp.draws
    if not post and draws is None:
        return None
    blocks: list[Any] = []
    sampler = (post or {}).get("sampler") or {}
    conv = (post or {}).get("convergence") or {}
    if sampler:
        keys = ("walkers", "steps", "burn_in", "thin", "seed", "moves", "move_note",
                "stopped_by", "tau_multiple")
        blocks.append(Facts(tuple((k.replace("_", " "), str(sampler[k])) for k in keys
                                  if sampler.get(k) not in (None, ""))))
    if conv:
        ok = bool(conv.get("converged"))
        reasons = "; ".join(map(str, conv.get("reasons") or []))
        blocks.append(Text(("The chain converged" if ok else "The chain did NOT converge")
                           + (f": {reasons}" if reasons else "") +
                           (f" (acceptance fraction {fmt(conv.get('acceptance_fraction'), 2)})"
                            if conv.get("acceptance_fraction") is not None else "") + ".",
                           "ok" if ok else "warning"))
        tau = conv.get("tau") or {}
        if tau:
            blocks.append(Facts(tuple((f"τ {k}", fmt(v, 2)) for k, v in tau.items())))
    summary = (post or {}).get("parameters") or {}
    if summary:
        # printed to the digits the Monte Carlo standard error supports (full precision stays
        # in posterior.json); R-hat to 3 decimals, ESS to 2 digits: both are estimates that
        # move from run to run by more than the digits dropped
        rows = []
        for n, q in summary.items():
            if not isinstance(q, Mapping):
                continue
            se = q.get("mcse") or {}
            u = rb.units.get(n, "")

            def sh(v: Any, u: Any = u) -> Any:
                return rb.shown(v, u)[0]

            rows.append((n, fg.pretty_unit(rb.shown(None, u)[1]),
                         fmt_mc(sh(q.get("median")), sh(se.get("median"))),
                         fmt_interval_mc(sh([q.get("q05"), q.get("q95")]),
                                         sh([se.get("q05"), se.get("q95")])),
                         fmt_interval_mc(sh(q.get("hdi90")), sh(se.get("hdi90"))),
                         _fixed(q.get("rhat"), 3), fmt(q.get("ess"), 2)))
        blocks.append(rb.table("Posterior summary: median, central 90 % interval, 90 % "
                                 "highest-density interval, R-hat and effective sample "
                                 "size, each to the digits its Monte Carlo standard error "
                                 "supports.", ("quantity", "unit", "median", "5–95 %",
                                           "HDI 90 %", "R-hat", "ESS"), rows,
                                 numeric=(False, False) + (True,) * 5))
    if draws is not None:
        names = [c for c in draws.columns if c not in ("step", "walker", "log_prob",
                                                       "chain", "draw")
                 and pd.api.types.is_numeric_dtype(draws[c])]
        shown = names[:8]
        if len(names) > len(shown):
            rb.notes.append(f"corner plot shows the first 8 of {len(names)} quantities")
        est = {n: float(p["estimate"]) for n, p in rb.res.parameters.items()
               if p.get("estimate") is not None}
        est.update({k: float(v) for k, v in (rb.res.fit.get("error_scales") or {}).items()})
        if shown:
            for key, cap, make, alt in (
                ("posterior_corner", "Posterior draws: marginal histograms (median and "
                 "5–95 % dotted) and pairwise densities; red lines mark the least-squares "
                 "estimate.", lambda: pf.corner_figure(draws, shown, units=rb.units,
                                                      estimates=est), "corner plot"),
                ("posterior_traces", "Traces of the kept chain (one line per walker).",
                 lambda: pf.trace_figure(draws, shown, units=rb.units), "traces"),
            ):
                b = rb.figure(key, cap, make, alt)
                if b:
                    blocks.append(b)
    return Section("posterior", "Posterior", tuple(blocks))
