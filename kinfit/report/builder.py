"""The report builder: turns the saved results (and the posterior and diagnosis when present)
into the sections of the report once; :mod:`kinfit.report.render` writes them as Markdown and
HTML. Sections appear as their data exist; nothing here fits or samples.

Order: summary, campaign, model, parameters, fit to the data, model adequacy, correlation and identifiability,
model comparison, transport diagnosis, posterior, limits of validity, cautions, reproducibility.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from kinfit.core.files import CAUTIONS
from kinfit.physics.resistances import REGIMES
from kinfit.report import figures as fg
from kinfit.report import posterior_figures as pf
from kinfit.report.content import (
    CRITERIA_KEYS,
    FACTOR_LABEL,
    Facts,
    Heading,
    Items,
    Report,
    Section,
    Text,
    fmt,
    fmt_interval,
    fmt_interval_mc,
    fmt_mc,
    fmt_p,
    get_path,
)
from kinfit.report.context import ReportContext
from kinfit.report.equations import model_section
from kinfit.report.inputs import ReportInputs
from kinfit.report.matrix import SetCell, set_matrix
from kinfit.report.model_adequacy import adequacy_section, adequacy_summary
from kinfit.report.reproducibility import (
    _input_states,
    _rel,
    latex_table,
    reproducibility_section,
)
from kinfit.report.transport_sections import posterior_section, transport_section
from kinfit.study.campaign import TEST_MEANING
from kinfit.study.runs import FACTORS, comparison_sets

__all__ = ["ReportBuilder", "build_content", "CAUTIONS"]

#: the safety paragraph of README.md, in substance

FILM_SHARE_CUT = 0.05

_SOLVER_WORDS = (
    ("both `ftol` and `xtol`", "the sum of squares and the parameters both stopped changing "
                               "(relative changes below the tolerances)"),
    ("`ftol`", "the sum of squares stopped falling (relative change below the tolerance)"),
    ("`xtol`", "the parameters stopped moving (relative step below the tolerance)"),
    ("`gtol`", "the gradient vanished (below the tolerance)"),
    ("maximum number of function evaluations", "the evaluation budget ran out before the "
                                               "fit settled"),
)


def plain_message(message: Any) -> str:
    """The optimiser's stopping message as a plain sentence fragment (scipy's
    least_squares messages name the tolerance that stopped it)."""
    text = str(message or "").strip()
    low = text.lower()
    for key, words in _SOLVER_WORDS:
        if key.lower() in low:
            return words
    return text.rstrip(".") or "no message"


class ReportBuilder(ReportContext):
    """Builds the report's sections from :class:`~kinfit.report.inputs.ReportInputs`.

    Parameters
    ----------
    inputs : ReportInputs
    argv : sequence of str, optional
        The report's own command line, for the reproducibility section.
    out_dir : Path, optional
        Where the report goes (for the reproduce command).
    """

    # ------------------------------------------------------------------ sections
    def build(self) -> Report:
        """All sections, the CSV tables and the LaTeX table."""
        makers = [self._summary, self._campaign, lambda: model_section(self), self._parameters,
                  self._fit, lambda: adequacy_section(self), self._identifiability,
                  self._comparison,
                  lambda: transport_section(self), lambda: posterior_section(self),
                  self._validity, self._cautions, lambda: reproducibility_section(self)]
        sections = [s for s in (m() for m in makers) if s is not None]
        conv = bool(self.res.fit.get("converged"))
        status = ("the least-squares fit converged" if conv else
                  "the least-squares fit did NOT converge; do not use these estimates yet")
        label = self.res.model.get("label", "")
        return Report(
            title=f"Fit report: {self.res.study or self.inp.study.name}",
            subtitle=f"model {label}; {len(self.res.runs)} runs, "
                     f"{self.res.fit.get('n_obs', '?')} observations",
            status_ok=conv, status=status, sections=tuple(sections),
            figures=tuple(self._figures), csv=self.csv, latex=latex_table(self),
            notes=tuple(self.notes),
        )

    def _summary(self) -> Section:
        f, res = self.res.fit, self.res
        blocks: list[Any] = []
        if f.get("converged"):
            blocks.append(Text(f"The least-squares fit converged: {plain_message(f.get('message'))}.",
                               "ok"))
        else:
            blocks.append(Text(
                f"The least-squares fit did not converge: {f.get('message', 'no message')}. "
                "The numbers below are where the optimiser stopped; refit (for example with "
                "more starts, --multistart) before using them.", "warning"))
        varying = [(n, p) for n, p in res.parameters.items() if p.get("vary", True)]
        items = []
        for n, p in varying:
            ci = fmt_interval(self.shown(p.get("ci95"), p.get("unit"))[0])
            est, unit = self.shown(p.get("estimate"), p.get("unit"))
            unit = fg.pretty_unit(unit)
            unit = "" if unit == "–" else f" {unit}"
            items.append(f"{n} = {fmt(est)}{unit}, 95 % interval {ci} "
                         f"({p.get('ci_method') or 'linear'})")
        blocks.extend(adequacy_summary(f, self.inp.posterior))
        blocks.append(Heading("Estimates"))
        blocks.append(Items(tuple(items)))
        intrinsic = [rid for rid, r in res.runs.items() if r.get("intrinsic")]
        counts = {g: sum(1 for v in self.regimes.values() if v == g) for g in REGIMES}
        regime_text = ", ".join(f"{c} {g}" for g, c in counts.items() if c)
        blocks.append(Heading("Transport"))
        blocks.append(Text(f"{len(intrinsic)} of {len(res.runs)} runs meet every transport "
                           f"criterion at the estimates (intrinsic data); regimes: "
                           f"{regime_text}.", "ok" if len(intrinsic) == len(res.runs)
                           else "note"))
        if res.identifiability:
            blocks.append(Text(f"{len(res.identifiability)} identifiability warning(s): see "
                               "the section on correlation and identifiability.", "warning"))
        post = self.inp.posterior
        if post:
            conv = get_path(post, "convergence", "converged")
            blocks.append(Text("The posterior sampler converged." if conv else
                               "The posterior sampler did not converge: "
                               + "; ".join(map(str, get_path(post, "convergence", "reasons",
                                                         default=[]) or ["no reason given"])),
                               "ok" if conv else "warning"))
        missing = []
        if not post:
            missing.append("no posterior.json (run 'kinfit sample'): posterior columns, "
                           "bands and corner plot are left out")
        if not self.inp.diagnosis:
            missing.append("no diagnosis.json: the model-free tests, apparent kinetics and "
                           "suggested runs are left out")
        if missing:
            blocks.append(Items(tuple(missing), "note"))
        changed = [Path(p).name for p, _, state in _input_states(self) if state != "same"]
        if changed:
            blocks.append(Text("The study read for this report is not the one that was "
                               f"fitted: {', '.join(changed)} differ or are missing. Refit "
                               "before relying on this report.", "warning"))
        blocks.append(Facts((
            ("study", f"{self.inp.study.name} ({Path(self.inp.study.path).name})"),
            ("model", str(res.model.get("label", ""))),
            ("fit folder", _rel(self, self.inp.fit_dir)),
            ("kinfit", str(get_path(res.manifest, "versions", "kinfit", default="?"))),
        )))
        return Section("summary", "Summary", tuple(blocks))

    def _campaign(self) -> Section:
        study = self.inp.study
        frame = study.frame()
        header = ("run", "T [K]", "T [°C]", "N [rpm]", "d_p [µm]", "w [g/L]", "C₀ [mol/m³]",
                  "points", "span [min]", "group")
        rows = []
        for r in study.runs:
            span = (r.times.max() - r.times.min()) / 60 if r.times.size else 0.0
            rows.append((r.id, fmt(r.temperature, 5), fmt(r.temperature - 273.15, 4),
                         fmt(r.stirrer_speed * 60, 4), fmt(r.particle_diameter * 1e6, 4),
                         fmt(r.catalyst_loading, 4), fmt(r.initial_concentration, 4),
                         str(r.n_obs), fmt(span, 3), r.group or ""))
        runs_csv = frame.copy()
        for rid, d in self.res.runs.items():
            for key, _ in CRITERIA_KEYS:
                runs_csv.loc[runs_csv["run"] == rid, f"{key} [-]"] = d.get(key)
            shares = d.get("shares") or {}
            for k in ("film", "pore", "reaction"):
                runs_csv.loc[runs_csv["run"] == rid, f"{k}_share [-]"] = shares.get(k)
            runs_csv.loc[runs_csv["run"] == rid, "regime"] = d.get("regime")
            runs_csv.loc[runs_csv["run"] == rid, "intrinsic"] = bool(d.get("intrinsic"))
        self.csv["runs.csv"] = runs_csv
        blocks: list[Any] = [
            Text(f"{len(study.runs)} runs, {study.n_obs} observations "
                 f"({'initial or differential rates' if study.kind == 'rate' else 'batch concentration profiles'})."),
            self.table("Runs of the campaign (conditions as read from the study, in SI "
                       "except where the trade's unit is clearer).", header, rows,
                       numeric=(False,) + (True,) * 8 + (False,), csv="runs.csv"),
        ]
        varied = study.varied_factors()
        items = [f"{FACTOR_LABEL[f][0]}: {len(v)} levels "
                 f"({', '.join(self.factor_text(f, x) for x in v)})"
                 for f, v in varied.items()]
        blocks.append(Heading("Factors varied"))
        blocks.append(Items(tuple(items) or ("none: every run at the same conditions",)))
        fixed = [FACTOR_LABEL[f][0] for f in FACTORS if f not in varied]
        if fixed:
            blocks.append(Text("Held constant: " + ", ".join(fixed) + "."))
        blocks.append(Heading("Transport tests the campaign supports"))
        set_cells: list[SetCell] = []
        meanings: list[str] = []
        for factor, meaning in TEST_MEANING.items():
            label = FACTOR_LABEL[factor][0]
            sets = comparison_sets(study, factor)
            if not sets:
                meanings.append(f"{label}: none possible (no runs that differ only in it); such "
                                f"runs would test {meaning}")
                continue
            meanings.append(f"{label} ({len(sets)} set{'s' if len(sets) != 1 else ''}): tests "
                            f"{meaning}")
            set_cells += [SetCell(factor, tuple(s.values), dict(s.fixed), " vs ".join(s.runs))
                          for s in sets]
        if "temperature" not in varied:
            meanings.append("temperature: one level only, so the activation energy is not "
                            "identified")
        blocks.append(Items(tuple(meanings)))
        if set_cells:
            m = set_matrix(set_cells, list(varied), self.factor_text)
            blocks.append(self.table(
                "Sets of runs that differ in one factor only (the other factors equal within "
                "1 %): the classic transport tests, each cell the runs of one set at the "
                "conditions of its row and column; their statistical outcome is in the "
                "transport diagnosis.", m.header, m.rows))
        return Section("campaign", "Campaign", tuple(blocks))

    def _parameters(self) -> Section:
        params = self.res.parameters
        post = get_path(self.inp.posterior, "parameters", default={}) or {}
        has = {k: any(p.get(k) for p in params.values())
               for k in ("ci95_linear", "ci95_profile", "ci95_bootstrap")}
        header = ["parameter [unit]", "estimate", "std. error"]
        numeric = [False, True, True]
        labels = {"ci95_linear": "95 % linearised", "ci95_profile": "95 % profile",
                  "ci95_bootstrap": "95 % bootstrap"}
        for k, lab in labels.items():
            if has[k]:
                header.append(lab)
                numeric.append(True)
        if post:
            header += ["post. median", "post. 90 %"]
            numeric += [True] * 2
        rows, tones, csv_rows = [], [], []
        names = list(params) + [n for n in post if n not in params]
        for name in names:
            scale = (self.res.fit.get("error_scales") or {}).get(name)
            p = params.get(name, {"unit": self.units.get(name, ""), "vary": True,
                                  "estimate": scale})
            q = post.get(name) or {}
            flag = " †" if p.get("at_bound") else ""
            u = p.get("unit")
            shown_unit = self.shown(None, u)[1]
            row = [f"{name} [{fg.pretty_unit(shown_unit)}]{flag}",
                   fmt(self.shown(p.get("estimate"), u)[0]),
                   fmt(self.shown(p.get("stderr"), u)[0], 3) if p.get("vary", True)
                   else "fixed"]
            tone: list[str | None] = [None, None, None]
            for k in labels:
                if has[k]:
                    row.append(fmt_interval(self.shown(p.get(k), u)[0], 3)
                               if p.get("vary", True) else "–")
                    tone.append(None)
            if post:
                se = q.get("mcse") or {}
                sh = self.shown
                row += [fmt_mc(sh(q.get("median"), u)[0], sh(se.get("median"), u)[0]),
                        fmt_interval_mc(sh([q.get("q05"), q.get("q95")], u)[0],
                                        sh([se.get("q05"), se.get("q95")], u)[0], 3)
                        if q else "–"]
                tone += [None, None]
            rows.append(row)
            tones.append(tone)
            ci = p.get("ci95") or [None, None]
            csv_row = {"parameter": name, "unit": p.get("unit"), "estimate": p.get("estimate"),
                       "stderr": p.get("stderr"), "vary": p.get("vary", True),
                       "ci95_lo": ci[0], "ci95_hi": ci[1], "ci_method": p.get("ci_method")}
            for k in labels:
                iv = p.get(k) or [None, None]
                csv_row[f"{k}_lo"], csv_row[f"{k}_hi"] = iv[0], iv[1]
            if post:
                csv_row.update({"posterior_median": q.get("median"), "posterior_q05":
                                q.get("q05"), "posterior_q95": q.get("q95"),
                                "posterior_hdi90_lo": (q.get("hdi90") or [None, None])[0],
                                "posterior_hdi90_hi": (q.get("hdi90") or [None, None])[1],
                                "rhat": q.get("rhat"), "ess": q.get("ess")})
            csv_rows.append(csv_row)
        self.csv["parameters.csv"] = pd.DataFrame(csv_rows)
        blocks: list[Any] = [
            self.table("Parameters in SI units: least-squares estimates with 95 % intervals "
                       "by each method available" + (", and posterior medians with central "
                                                     "90 % intervals" if post else "")
                       + " (R-hat and effective sample sizes in the posterior section). † "
                       "ended at a bound of its range (one-sided interval).",
                       header, rows, tones=tones, numeric=numeric, csv="parameters.csv"),
            Text("An open end means the profile likelihood did not cross the 95 % level "
                 "inside the parameter's bounds. parameters.tex holds this table in LaTeX "
                 "(booktabs) for a manuscript.", "note"),
        ]
        scales = self.res.fit.get("error_scales") or {}
        if scales:
            blocks.append(Facts(tuple((k, fmt(v)) for k, v in scales.items())))
        profiles = self.res.profiles or {}
        if profiles:
            est = {n: float(p["estimate"]) for n, p in params.items()
                   if p.get("estimate") is not None}
            block = self.figure(
                "profile_likelihood", "Profile likelihood of each parameter: signed root of "
                "the scaled SSE increase; the interval is where it stays between the dashed "
                "lines (±t critical value).",
                lambda: pf.profile_likelihood_figure(profiles, t_crit=self.res.profile_t_crit,
                    estimates=est, units=self.units),
                "profile likelihood traces")
            if block:
                blocks.append(block)
        return Section("parameters", "Parameters", tuple(blocks))

    def _fit(self) -> Section:
        f = self.res.fit
        obs = self.inp.observations
        facts = [("converged", "yes" if f.get("converged") else "NO"),
                 ("stopping rule", plain_message(f.get("message")))]
        for key, label in (("n_obs", "observations"), ("n_params", "parameters varied"),
                           ("dof", "degrees of freedom"), ("sse", "SSE"),
                           ("sigma", "residual standard deviation"),
                           ("loglike", "log-likelihood"), ("aic", "AIC"), ("aicc", "AICc"),
                           ("bic", "BIC"), ("nfev", "function evaluations"),
                           ("n_starts", "starts"), ("n_distinct_optima", "distinct optima")):
            if f.get(key) is not None:
                facts.append((label, fmt(f[key], 6) if isinstance(f[key], float) else
                              str(f[key])))
        blocks: list[Any] = [Facts(tuple(facts))]
        if f.get("information_criteria"):
            blocks.append(Text(str(f["information_criteria"]), "note"))
        if self.inp.model_check is not None:
            check = self.inp.model_check
            blocks.append(Text("The model rebuilt from the study reproduces the saved fitted "
                               "values " + ("exactly" if check == 0 else
                                           f"to within {fmt(check, 2)} (largest relative "
                                           "difference)") + ".",
                               "note" if check <= 1e-6 else "warning"))
        unit = "mol/m^3" if self.inp.batch else "mol/(kg*s)"
        quantity = "concentration" if self.inp.batch else "rate"
        study = self.inp.study
        if self.inp.batch:
            titles = {r.id: f"{r.id}\n{r.temperature - 273.15:.4g} °C · "
                      f"{r.stirrer_speed * 60:.4g} rpm · {r.particle_diameter * 1e6:.4g} µm"
                      for r in study.runs}
            curves = dict(self.inp.curves)
            if not curves:
                for rid, g in obs.groupby("run", sort=False):
                    curves[str(rid)] = (g["time [s]"].to_numpy(float), g["fitted"].to_numpy(float))
            bands = self.inp.bands
            cap = ("Data (open circles) and the fitted profile at the estimates (line) for "
                   "each run" + (", with the central 90 % posterior predictive band of the "
                                 "mean response (shaded)" if bands is not None else "")
                   + "; the tag gives the run's regime.")
            block = self.figure("profiles", cap, lambda: fg.profiles_figure(
                obs, curves, titles=titles, regimes=self.regimes, bands=bands),
                "concentration against time per run")
        else:
            block = self.figure("rates", "Observed (points) and fitted (bars) rates per run.",
                                lambda: fg.rates_figure(obs, regimes=self.regimes, unit=unit),
                                "rates per run")
        blocks += [b for b in (block,) if b]
        for key, cap, make, alt in (
            ("parity", f"Observed against fitted {quantity}, coloured by regime; the dashed "
             "line is 1:1.", lambda: fg.parity_figure(obs, regimes=self.regimes,
                                                     quantity=quantity, unit=unit), "parity"),
            ("residuals", "Residuals against time and against the fitted value; the grey band "
             "is ±2 σ of the error model.", lambda: fg.residuals_figure(
                 obs, regimes=self.regimes, unit=unit, sigma=f.get("sigma")
                 if self.res.model.get("error_model", "constant") == "constant" else None,
                 time_axis=self.inp.batch), "residuals"),
        ):
            b = self.figure(key, cap, make, alt)
            if b:
                blocks.append(b)
        return Section("fit", "Fit to the data", tuple(blocks))

    def _identifiability(self) -> Section:
        corr = self.res.correlation or {}
        names = list(corr.get("names") or [])
        mat = np.asarray(corr.get("matrix") or [], dtype=float)
        blocks: list[Any] = []
        if names and mat.shape == (len(names), len(names)):
            self.csv["correlation.csv"] = pd.DataFrame(mat, columns=names).assign(
                parameter=names)[["parameter", *names]]
            rows = [[n] + [f"{v:+.3f}".replace("-", "−") if np.isfinite(v) else "–"
                           for v in mat[i]] for i, n in enumerate(names)]
            tones: list[list[str | None]] = []
            for i in range(len(names)):
                tone: list[str | None] = [None]
                tone += ["fail" if i != j and abs(v) > 0.95 else None
                         for j, v in enumerate(mat[i])]
                tones.append(tone)
            blocks.append(self.table("Correlation matrix of the varying parameters "
                                     "(linearised, at the estimates); |r| > 0.95 marked.",
                                     ["", *names], rows, tones=tones,
                                     numeric=(False,) + (True,) * len(names),
                                     csv="correlation.csv"))
            b = self.figure("correlation", "Correlation matrix of the estimates.",
                            lambda: pf.correlation_figure(names, mat), "correlation heat map")
            if b:
                blocks.append(b)
        warnings_ = [str(w.get("message", w)) for w in self.res.identifiability]
        blocks.append(Heading("Identifiability"))
        if warnings_:
            blocks.append(Items(tuple(warnings_), "warning"))
        else:
            blocks.append(Text("No identifiability warning: every varying parameter has a "
                               "finite standard error, no correlation above the cut-off and "
                               "none ended at a bound.", "ok"))
        return Section("identifiability", "Correlation and identifiability", tuple(blocks))

    def _comparison(self) -> Section | None:
        rows_in = list(self.res.comparison)
        if not rows_in:
            return None
        header = ("model", "p", "SSE", "AICc", "ΔAICc", "BIC", "Akaike weight",
                  "converged", "LR p", "F p")
        rows: list[Sequence[str]] = []
        tones: list[list[str | None]] = []
        for r in rows_in:
            rows.append((str(r.get("model")), str(r.get("n_params", "")), fmt(r.get("sse"), 5),
                         fmt(r.get("aicc"), 5), fmt(r.get("delta_aicc"), 3), fmt(r.get("bic"), 5),
                         fmt(r.get("akaike_weight"), 3), fmt(bool(r.get("converged"))),
                         fmt_p(get_path(r, "likelihood_ratio", "p_value")),
                         fmt_p(get_path(r, "f_test", "p_value"))))
            tone: list[str | None] = [None] * 7
            tone += [None if r.get("converged") else "fail", None, None]
            tones.append(tone)
        flat = []
        for r in rows_in:
            row = {k: v for k, v in r.items() if not isinstance(v, Mapping)}
            for test in ("likelihood_ratio", "f_test"):
                for k, v in (r.get(test) or {}).items():
                    row[f"{test}_{k}"] = v if not isinstance(v, list) else ";".join(map(str, v))
            flat.append(row)
        self.csv["comparison.csv"] = pd.DataFrame(flat)
        best = min(rows_in, key=lambda r: r.get("aicc", np.inf))
        return Section("comparison", "Model comparison", (
            self.table("Candidate models fitted to the same data: information criteria and "
                       "Akaike weights (Burnham & Anderson 2002); p parameters varied; "
                       "likelihood-ratio (LR) and F tests against the first model where one "
                       "nests the other.", header, rows, tones=tones,
                       numeric=(False,) + (True,) * 6 + (False, True, True),
                       csv="comparison.csv"),
            Text(f"Lowest AICc: {best.get('model')} (Akaike weight "
                 f"{fmt(best.get('akaike_weight'), 3)})."),
        ))

    def _validity(self) -> Section:
        study, res = self.inp.study, self.res
        rows = []
        for factor in FACTORS:
            vals = [r.factor(factor) for r in study.runs]
            name, unit, scale = FACTOR_LABEL[factor]
            rows.append((name, f"{fmt(min(vals) * scale, 4)} – {fmt(max(vals) * scale, 4)}",
                         unit))
        obs = self.inp.observations
        if self.inp.batch and len(obs):
            lo, hi = float(max(obs["observed"].min(), 0.0)), float(obs["observed"].max())
            rows.append(("bulk concentration in the data", f"{fmt(lo, 4)} – {fmt(hi, 4)}",
                         "mol/m³"))
        items = ["Use the kinetics only inside these ranges; extrapolation in temperature, "
                 "particle size, stirrer speed or concentration is not supported by the data."]
        film_runs = [rid for rid, r in res.runs.items() if r.get("regime") == "film"
                     or float((r.get("shares") or {}).get("film") or 0.0) >= FILM_SHARE_CUT]
        if film_runs:
            items.append(f"The film takes {FILM_SHARE_CUT:.0%} or more of the driving force "
                         "(the rate error the kinetic criteria allow) in runs "
                         + ", ".join(film_runs) + ": their "
                         "observed rates depend on agitation and particle size in this vessel "
                         "and must not be carried to another reactor; only the intrinsic "
                         "parameters, with the film model, may be.")
        else:
            items.append("No run fails the Carberry criterion at the estimates; still, do not "
                         "extrapolate rates that include film resistance to another vessel.")
        pore_runs = [rid for rid, r in res.runs.items() if r.get("regime") == "pore"]
        if pore_runs:
            items.append("Runs " + ", ".join(pore_runs) + " are pore-limited: predictions at "
                         "other particle sizes rest on the effective diffusivity and the "
                         "pellet model.")
        if res.model.get("pellet") == "none":
            items.append("The fit assumes no pore resistance (η = 1); that holds only for "
                         "particles no larger than those of the campaign.")
        return Section("validity", "Limits of validity", (
            self.table("Ranges covered by the campaign.", ("quantity", "range", "unit"), rows,
                       numeric=(False, True, False)),
            Items(tuple(items), "note"),
        ))

    def _cautions(self) -> Section:
        return Section("cautions", "Cautions", tuple(Text(t, "warning" if i == 0 else "plain")
                                                   for i, t in enumerate(CAUTIONS)))


def build_content(inputs: ReportInputs, *, argv: Sequence[str] | None = None,
                  out_dir: Path | None = None) -> Report:
    """Build the report's content from its inputs (see :class:`ReportBuilder`)."""
    return ReportBuilder(inputs, argv=argv, out_dir=out_dir).build()

