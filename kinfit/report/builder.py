"""The report builder: turns the saved results (and the posterior and diagnosis when present)
into the sections of the report once; :mod:`kinfit.report.render` writes them as Markdown and
HTML. Sections appear as their data exist; nothing here fits or samples.

Order: summary, campaign, model, parameters, fit to the data, model adequacy, correlation and identifiability,
model comparison, transport diagnosis, posterior, limits of validity, cautions, reproducibility.
"""

from __future__ import annotations

import shlex
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from kinfit.campaign import TEST_MEANING
from kinfit.criteria import REGIMES
from kinfit.outputs import CAUTIONS, recorded_command, recorded_path
from kinfit.report import figures as fg
from kinfit.report.model_adequacy import adequacy_section, adequacy_summary
from kinfit.report.content import (
    CRITERIA_KEYS,
    FACTOR_LABEL,
    Code,
    Facts,
    FigureBlock,
    Heading,
    Items,
    Report,
    Section,
    Table,
    Text,
    factor_text,
    fmt,
    fmt_interval,
    fmt_interval_mc,
    fmt_mc,
    fmt_p,
    get_path,
)
from kinfit.report.equations import model_section
from kinfit.report.inputs import ReportInputs
from kinfit.report.latex import parameters_table
from kinfit.report.matrix import SetCell, set_matrix
from kinfit.report.transport_sections import posterior_section, transport_section
from kinfit.study import FACTORS, comparison_sets

__all__ = ["ReportBuilder", "build_content", "CAUTIONS"]

#: the safety paragraph of README.md, in substance

def _runs_temperature_unit(study: Any) -> str | None:
    """The unit of the runs table's temperature column as written (None if unreadable)."""
    from kinfit.units import parse_header

    ref = get_path(getattr(study, "raw", None), "data", "runs")
    if isinstance(ref, Mapping):
        ref = ref.get("file")
    if not isinstance(ref, str):
        return None
    path = Path(study.path).parent / ref
    try:
        if path.suffix.lower() in (".xlsx", ".xls"):
            cols = pd.read_excel(path, nrows=0).columns
        else:
            cols = pd.read_csv(path, nrows=0).columns
        for c in cols:
            h = parse_header(str(c), where=path.name)
            if h.name == "temperature":
                return h.unit
    except Exception:  # noqa: BLE001 - a display preference only; K is the fallback
        return None
    return None


#: a film share at or above this counts as film resistance worth a warning: the 5 % rate error
#: the Carberry criterion allows (Carberry 1976: Ca < 0.05/|n|)
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


def _short(digest: Any) -> str:
    """A SHA-256 digest as tables show it: its first 16 hex digits (the manifests keep all
    64)."""
    text = str(digest)
    return text[:16] + "…" if len(text) > 16 else text


def _cmd(argv: Sequence[str]) -> str:
    return shlex.join(recorded_command(argv))


class ReportBuilder:
    """Builds the report's sections from :class:`~kinfit.report.inputs.ReportInputs`.

    Parameters
    ----------
    inputs : ReportInputs
    argv : sequence of str, optional
        The report's own command line, for the reproducibility section.
    out_dir : Path, optional
        Where the report goes (for the reproduce command).
    """

    def __init__(self, inputs: ReportInputs, *, argv: Sequence[str] | None = None,
                 out_dir: Path | None = None) -> None:
        self.inp = inputs
        self.res = inputs.result
        self.argv = list(argv) if argv is not None else None
        self.out_dir = out_dir
        self._tables = 0
        self._figures: list[FigureBlock] = []
        self.csv: dict[str, pd.DataFrame] = {}
        self.notes: list[str] = list(inputs.notes)
        self.regimes = {rid: str(r.get("regime", "mixed")) for rid, r in self.res.runs.items()}
        self.units = {n: str(p.get("unit", "")) for n, p in self.res.parameters.items()}
        for name in (self.inp.posterior or {}).get("parameters", {}) or {}:
            self.units.setdefault(name, "mol/m^3" if name == "sigma" else "1")
        self.celsius = _runs_temperature_unit(inputs.study) in ("degC", "°C", "celsius", "C")
        self.varied = tuple(inputs.study.varied_factors())

    def factor_text(self, factor: str, value: float) -> str:
        """A factor's SI value in the unit the reader expects: temperature in °C when the
        runs table gave it in degC, the others as :func:`factor_text`."""
        if factor == "temperature" and self.celsius:
            return f"{float(value) - 273.15:.4g} °C"
        if factor == "catalyst_loading":  # kg/m³ = g/L, the unit a bench chemist writes
            return f"{float(value):.4g} g/L"
        if factor in FACTOR_LABEL:
            _, unit, scale = FACTOR_LABEL[factor]
            return f"{float(value) * scale:.4g} {unit}"
        return factor_text(factor, value)

    @staticmethod
    def shown(value: Any, unit: Any) -> tuple[Any, str]:
        """A value (number, interval or None) and its SI unit as the report shows them:
        energies in kJ/mol, the trade's unit; everything else unchanged. CSV files and JSON
        keep SI."""
        if str(unit) == "J/mol":
            if isinstance(value, int | float) and not isinstance(value, bool):
                return value / 1000.0, "kJ/mol"
            if isinstance(value, list | tuple):
                return [None if v is None else v / 1000.0 for v in value], "kJ/mol"
            return value, "kJ/mol"
        return value, str(unit or "")

    def temperature(self, value: Any, sig: int = 5) -> str:
        """A temperature [K] as the user wrote it (°C when the runs table is in degC)."""
        if not isinstance(value, int | float):
            return "–"
        return (f"{float(value) - 273.15:.{sig - 1}g} °C" if self.celsius
                else f"{float(value):.{sig}g} K")

    # ------------------------------------------------------------------ numbering helpers
    def table(self, caption: str, header: Sequence[str], rows: Sequence[Sequence[str]], *,
              tones: Sequence[Sequence[str | None]] | None = None,
              numeric: Sequence[bool] = (), csv: str | None = None) -> Table:
        """A numbered table."""
        self._tables += 1
        return Table(self._tables, caption, tuple(header), tuple(tuple(r) for r in rows),
                     None if tones is None else tuple(tuple(t) for t in tones),
                     tuple(numeric), csv)

    def figure(self, key: str, caption: str, make: Callable[[], Any], alt: str) -> FigureBlock | None:
        """A numbered figure; a figure that cannot be drawn becomes a note, not a crash."""
        try:
            fig = make()
        except (ValueError, KeyError, IndexError, TypeError, np.linalg.LinAlgError) as exc:
            self.notes.append(f"figure '{key}' was not drawn: {exc}")
            return None
        png, svg = fg.render(fig)
        block = FigureBlock(len(self._figures) + 1, key, caption, png, svg, alt,
                            width_in=float(fig.get_size_inches()[0]))
        self._figures.append(block)
        return block

    # ------------------------------------------------------------------ sections
    def build(self) -> Report:
        """All sections, the CSV tables and the LaTeX table."""
        makers = [self._summary, self._campaign, lambda: model_section(self), self._parameters,
                  self._fit, lambda: adequacy_section(self), self._identifiability,
                  self._comparison,
                  lambda: transport_section(self), lambda: posterior_section(self),
                  self._validity, self._cautions, self._reproducibility]
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
            figures=tuple(self._figures), csv=self.csv, latex=self._latex(),
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
        changed = [Path(p).name for p, _, state in self._input_states() if state != "same"]
        if changed:
            blocks.append(Text("The study read for this report is not the one that was "
                               f"fitted: {', '.join(changed)} differ or are missing. Refit "
                               "before relying on this report.", "warning"))
        blocks.append(Facts((
            ("study", f"{self.inp.study.name} ({Path(self.inp.study.path).name})"),
            ("model", str(res.model.get("label", ""))),
            ("fit folder", self._rel(self.inp.fit_dir)),
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
        profiles = get_path(self.res.extras, "profiles", default={}) or {}
        if profiles:
            est = {n: float(p["estimate"]) for n, p in params.items()
                   if p.get("estimate") is not None}
            block = self.figure(
                "profile_likelihood", "Profile likelihood of each parameter: signed root of "
                "the scaled SSE increase; the interval is where it stays between the dashed "
                "lines (±t critical value).",
                lambda: fg.profile_likelihood_figure(profiles, t_crit=get_path(
                    self.res.extras, "profile_t_crit"), estimates=est, units=self.units),
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
                            lambda: fg.correlation_figure(names, mat), "correlation heat map")
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

    def _reproducibility(self) -> Section:
        man = self.res.manifest or {}
        blocks: list[Any] = []
        rows = self._input_states()
        tones = [[None, None, "ok" if state == "same" else "fail"] for *_, state in rows]
        if rows:
            blocks.append(self.table("Input files of the fit with their SHA-256 digests, "
                                     "compared with the study files this report read.",
                                     ("file", "SHA-256 at the fit (first 16 digits)", "study read now"), rows,
                                     tones=tones))
            if any(t[2] == "fail" for t in tones):
                self.notes.append("the study read for this report differs from the files "
                                  "that were fitted (see the reproducibility section)")
        read = [(name, _short(digest)) for name, digest in self.inp.input_hashes.items()]
        blocks.append(self.table("Files of the fit folder this report was built from.",
                                 ("file", "SHA-256 (first 16 digits)"), read))
        versions = man.get("versions") or {}
        if versions:
            blocks.append(Facts(tuple((k, str(v)) for k, v in versions.items())))
        opts = man.get("options") or {}
        blocks.append(Facts((("seed", str(man.get("seed"))), ("platform",
                                                               str(man.get("platform", "?"))))
                            + tuple((f"option {k}", str(v)) for k, v in opts.items())))
        if man.get("command"):
            blocks.append(Code(_cmd(man["command"]), "command line recorded by the fit"))
        post_cmd = get_path(self.inp.posterior, "manifest", "command")
        if post_cmd:
            blocks.append(Code(_cmd(post_cmd), "command line recorded by the sampler"))
        if self.argv:
            blocks.append(Code(_cmd(self.argv), "command line of this report"))
        blocks.append(Code("\n".join(self._reproduce(man, opts)),
                           "to reproduce (run from the study file's folder)"))
        return Section("reproducibility", "Reproducibility", tuple(blocks))

    def _input_states(self) -> list[tuple[str, str, str]]:
        """(recorded path, recorded digest, state) of every input the fit recorded, compared
        with the study files read for this report (matched by path, else by file name)."""
        base = Path(self.inp.study.path).resolve().parent
        now = {str(Path(k).resolve()): v for k, v in self.inp.study.files.items()}
        by_name = {Path(k).name: v for k, v in self.inp.study.files.items()}
        rows = []
        for path, info in ((self.res.manifest or {}).get("inputs") or {}).items():
            digest = info.get("sha256") if isinstance(info, Mapping) else str(info)
            # recorded relative to the study file (older results: as typed or absolute)
            current = now.get(str((base / path).resolve()),
                              now.get(str(Path(path).resolve()), by_name.get(Path(path).name)))
            if current is None:
                state = "not read by this study"
            else:
                state = "same" if current == digest else "DIFFERENT from the fitted file"
            rows.append((self._rel(path) if Path(path).is_absolute() else str(path),
                         _short(digest), state))
        return rows

    def _rel(self, path: str | Path) -> str:
        """A path as the report records it: relative to the study file's folder."""
        return recorded_path(path, self.inp.study.path)

    def _reproduce(self, man: Mapping[str, Any], opts: Mapping[str, Any]) -> list[str]:
        study = Path(self.inp.study.path).name
        fit_dir = self._rel(self.inp.fit_dir)
        cmd = ["kinfit", "fit", study, "--out", fit_dir]
        if man.get("seed") is not None:
            cmd += ["--seed", str(man["seed"])]
        if opts.get("multistart"):
            cmd += ["--multistart", str(opts["multistart"])]
        if opts.get("profile") is False:
            cmd.append("--no-profile")
        if opts.get("bootstrap"):
            cmd += ["--bootstrap", str(opts["bootstrap"])]
            if opts.get("bootstrap_kind") == "group":
                cmd.append("--bootstrap-runs")
        cands = [str(r.get("model")) for r in list(self.res.comparison)[1:]]
        if cands:
            cmd += ["--compare", *cands]
        lines = [shlex.join(cmd)]
        sampler = get_path(self.inp.posterior, "sampler", default={}) or {}
        if sampler:
            s = ["kinfit", "sample", study, "--fit", fit_dir]
            for key, flag in (("seed", "--seed"), ("walkers", "--walkers"),
                              ("max_steps", "--steps"), ("chunk", "--chunk"),
                              ("tau_multiple", "--tau-multiple"), ("moves", "--moves")):
                if sampler.get(key) is not None:
                    s += [flag, str(sampler[key])]
            lines.append(shlex.join(s))
        out = self._rel(self.out_dir) if self.out_dir is not None else fit_dir
        lines.append(shlex.join(["kinfit", "report", study, "--fit", fit_dir, "--out", out]))
        return lines

    def _latex(self) -> str:
        post = get_path(self.inp.posterior, "parameters", default=None)
        params = dict(self.res.parameters)
        scales = self.res.fit.get("error_scales") or {}
        for name in post or {}:
            if name not in params:
                params[name] = {"estimate": scales.get(name), "unit": self.units.get(name, ""),
                                "vary": True, "ci95": None, "ci_method": None}
        return parameters_table(
            params, posterior=post,
            caption=f"Parameters of the {self.res.model.get('label', 'kinetic')} model fitted "
                    f"to study {self.res.study}: least-squares estimates (SI units) with 95 % "
                    "intervals" + ("; posterior medians with central 90 % intervals" if post
                                   else "") + ".")


def build_content(inputs: ReportInputs, *, argv: Sequence[str] | None = None,
                  out_dir: Path | None = None) -> Report:
    """Build the report's content from its inputs (see :class:`ReportBuilder`)."""
    return ReportBuilder(inputs, argv=argv, out_dir=out_dir).build()

