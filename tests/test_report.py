"""``kinfit report``: the report is built from a saved fit folder alone (no refitting), every
file is written atomically and is readable, the HTML is self-contained and renders in a headless
browser, sections appear as their data exist, and the tables carry the saved numbers unchanged.

The campaign is synthetic (invented test data): six batch runs made with kinfit's own physics
(power law, agitation film, no pellet model) at stated true parameters plus seeded noise. The
posterior and diagnosis files are written here in the shapes the sampler and the diagnosis
produce, from draws of the fit's own linearised covariance (also invented test input): the
report only reads them.
"""

from __future__ import annotations

import argparse
import base64
import json
import os
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from io import BytesIO
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from PIL import Image
from studies import profiles_csv, runs_csv, simulate, study_text, write_study

from kinfit.errors import StudyError


def _study(k_ref: float, kc_ref: float, a: float) -> str:
    """The study text at these values of k_ref [mol/(kg s)], kc_ref [m/s] and the agitation
    exponent (power law, agitation film, no pellet model)."""
    return study_text(
        {"k_ref": f"{k_ref} mol/(kg*s)", "activation_energy": "60 kJ/mol", "order": 1.0,
         "kc_ref": f"{kc_ref} m/s", "agitation_exponent": a,
         "size_exponent": {"value": 0.5, "vary": False}},
        name="synthetic report check (invented data)", reference_temperature="50 degC",
        reference_diameter="100 um", pellet="none",
    )


#: (run, T [degC], N [rpm], dp [um]); loading 2 g/L and C0 0.5 mol/L for all
RUNS = [("S1", 40, 300, 50), ("S2", 40, 900, 50), ("S3", 60, 300, 100), ("S4", 60, 900, 100),
        ("S5", 60, 900, 200), ("S6", 50, 600, 100)]
TIMES_MIN = np.linspace(0.0, 60.0, 9)
TRUTH = {"k_ref": 0.05, "kc_ref": 5e-6, "a": 0.6}
START = {"k_ref": 0.04, "kc_ref": 8e-6, "a": 0.4}
NOISE = 2.0  # mol/m^3


def _observations(conc: np.ndarray) -> str:
    """Observation table text: the runs' concentrations [mol/m^3] (rounded to 4 decimals) at
    TIMES_MIN."""
    n = TIMES_MIN.size
    return profiles_csv([(rid, t, round(float(c), 4)) for i, (rid, *_) in enumerate(RUNS)
                         for t, c in zip(TIMES_MIN, conc[i * n:(i + 1) * n], strict=True)])


def make_study(folder: Path) -> Path:
    """Write the synthetic campaign (invented data) and its study file; return the path."""
    runs = runs_csv([(r, T, N, dp, 2.0, 0.5) for r, T, N, dp in RUNS])
    path = write_study(folder, _study(**TRUTH), runs,
                       _observations(np.full(len(RUNS) * TIMES_MIN.size, 500.0)))
    _, _, clean = simulate(path)
    rng = np.random.default_rng(seed=20261201)
    (folder / "obs.csv").write_text(
        _observations(clean + rng.normal(loc=0.0, scale=NOISE, size=clean.size)))
    path.write_text(_study(**START))
    return path


def write_posterior_files(study_path: Path, fit_dir: Path, *, seed: int = 5) -> None:
    """posterior.json, posterior_draws.csv and posterior_bands.csv in the sampler's shapes,
    from normal draws of the fit's linearised covariance (synthetic test input)."""
    from kinfit.model.compiled import Model, ModelSpec
    from kinfit.fitting.results import FitResult
    from kinfit.study.load import load_study

    res = FitResult.load(fit_dir)
    names = list(res.correlation["names"])
    mean = np.array([res.parameters[n]["estimate"] for n in names])
    cov = np.array(res.extras["covariance"])
    rng = np.random.default_rng(seed=seed)
    walkers, kept = 12, 40
    draws = rng.multivariate_normal(mean, cov, size=walkers * kept)
    sigma = rng.normal(loc=res.fit["sigma"], scale=0.1, size=walkers * kept)
    frame = pd.DataFrame({"step": np.repeat(200 + 5 * np.arange(kept), walkers),
                          "walker": np.tile(np.arange(walkers), kept)})
    for j, n in enumerate(names):
        frame[n] = draws[:, j]
    frame["sigma"] = sigma
    frame["log_prob"] = -0.5 * np.einsum("ij,jk,ik->i", draws - mean, np.linalg.inv(cov),
                                         draws - mean)
    frame.to_csv(fit_dir / "posterior_draws.csv", index=False)
    study = load_study(study_path)
    model = Model(ModelSpec.from_study(study), study)
    t = np.concatenate([np.linspace(0.0, r.times.max(), 30) for r in study.runs])
    idx = np.repeat(np.arange(len(study.runs)), 30)
    pred = model.predict_profiles(draws[:80], t, idx)
    q = np.quantile(pred, [0.05, 0.5, 0.95], axis=0)
    pd.DataFrame({"run": np.asarray(study.run_ids)[idx], "time [s]": t, "q05": q[0],
                  "q50": q[1], "q95": q[2]}).to_csv(fit_dir / "posterior_bands.csv",
                                                     index=False)
    summary = {}
    for n in [*names, "sigma"]:
        v = frame[n].to_numpy()
        q05, q50, q95 = np.quantile(v, [0.05, 0.5, 0.95])
        summary[n] = {"median": q50, "q05": q05, "q95": q95, "hdi90": [float(np.quantile(
            v, 0.05)), float(np.quantile(v, 0.95))], "rhat": 1.002, "ess": 410.0}
    runs = {rid: {"effectiveness_factor": {"median": 1.0, "q05": 1.0, "q95": 1.0},
                  "thiele_modulus": {"median": 0.0, "q05": 0.0, "q95": 0.0},
                  "regime_probability": {"kinetic": 0.0 if r["regime"] == "film" else 0.9,
                                         "film": 0.95 if r["regime"] == "film" else 0.1,
                                         "pore": 0.0, "mixed": 0.05 if r["regime"] == "film"
                                         else 0.0}}
            for rid, r in res.runs.items()}
    (fit_dir / "posterior.json").write_text(json.dumps({
        "parameters": summary,
        "sampler": {"walkers": walkers, "steps": 400, "burn_in": 200, "thin": 5, "seed": seed,
                    "max_steps": 400, "chunk": 200, "tau_multiple": 50.0},
        "convergence": {"converged": False, "reasons": ["chain shorter than 50 tau (synthetic)"],
                        "tau": dict.fromkeys(names, 12.0), "acceptance_fraction": 0.31},
        "runs": runs,
        "manifest": {"command": ["kinfit", "sample", str(study_path), "--seed", str(seed)]},
    }, indent=1))


def write_diagnosis_file(fit_dir: Path) -> None:
    """diagnosis.json in the diagnosis' shape (synthetic test input)."""
    (fit_dir / "diagnosis.json").write_text(json.dumps({
        "model_free": [{"factor": "stirrer_speed", "runs": ["S3", "S4"], "values": [5.0, 15.0],
                        "fixed": {}, "test": "extra sum of squares F", "statistic": 41.2,
                        "df": [3, 10], "p_value": 4.1e-6, "different": True,
                        "conclusion": "the rate changes with stirrer speed: film resistance"}],
        "not_possible": [{"factor": "catalyst_loading", "message": "one loading only"}],
        "falsified": {"intrinsic_activation_energy": 61000.0,
                      "apparent_activation_energy": 44000.0,
                      "apparent_activation_energy_ci95": [39000.0, 49000.0],
                      "per_temperature": [{"temperature": 313.15, "k_apparent": 0.016},
                                          {"temperature": 333.15, "k_apparent": 0.045}],
                      "intrinsic_order": 1.09, "apparent_order": 0.8,
                      "warnings": ["the apparent activation energy is falsified by the film"]},
        "next_runs": [{"temperature": 333.15, "stirrer_speed": 25.0,
                       "particle_diameter": 5e-5, "note": "Ca below 0.05 at 1500 rpm"}],
    }))


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    """The synthetic study fitted once (no profile, a small bootstrap) and saved."""
    from dataclasses import replace

    from kinfit.fitting.fit import FitOptions, comparison_rows, fit, parse_candidate
    from kinfit.study.load import load_study

    folder = tmp_path_factory.mktemp("campaign")
    path = make_study(folder)
    study = load_study(path)
    result = fit(study, FitOptions(profile=False, bootstrap=8, seed=3),
                 argv=["kinfit", "fit", str(path), "--out", "fit", "--no-profile"])
    # a nested candidate with the agitation exponent fixed, for the comparison table
    from kinfit.fitting.fit import fit_model
    from kinfit.study.parameters import ParameterTable

    cand = parse_candidate("power/agitation/none", study)
    table = ParameterTable([replace(p, value=0.0, vary=False) if n == "agitation_exponent"
                            else p for n, p in cand.parameters.items()])
    other = fit_model(replace(cand, parameters=table, label="power/agitation/none, a = 0"),
                      study, FitOptions(profile=False))
    result = replace(result, comparison=tuple(comparison_rows(
        [result, other], ["power+agitation+none", "power/agitation/none, a = 0"],
        [set(cand.parameter_names), set(cand.parameter_names)])))
    # the fixture fits the truth before other tests rely on it (3 stderr, lmfit-style check)
    assert result.converged, result.fit["message"]
    for name, true in (("k_ref", TRUTH["k_ref"]), ("kc_ref", TRUTH["kc_ref"]),
                       ("agitation_exponent", TRUTH["a"]), ("activation_energy", 60e3)):
        p = result.parameters[name]
        assert abs(p["estimate"] - true) < 3 * p["stderr"], (name, p)
    fit_dir = folder / "fit"
    result.save(fit_dir)
    return path, fit_dir


def _block_fitting(mp: pytest.MonkeyPatch) -> None:
    """Make every fitting entry point raise: the report must read results only."""
    import kinfit.estimate.least_squares as ls
    import kinfit.fitting.fit as fitting

    def boom(*args, **kwargs):
        raise AssertionError("the report called a fitting function")

    for mod, name in ((fitting, "fit_model"), (fitting, "fit"), (ls, "fit_problem"),
                      (fitting, "fit_problem"), (fitting, "profile_intervals"),
                      (fitting, "bootstrap")):
        mp.setattr(mod, name, boom)


@pytest.fixture(scope="module")
def plain_report(fitted, tmp_path_factory):
    """The report of the saved fit alone (no posterior, no diagnosis), built with every
    fitting function made to raise, and the bytes of what it wrote."""
    from kinfit.report.build import build_report

    path, fit_dir = fitted
    out = tmp_path_factory.mktemp("plain") / "out"
    with pytest.MonkeyPatch.context() as mp:
        _block_fitting(mp)
        res = build_report(path, fit_dir, out)
    return res, {p: p.read_bytes() for p in res.paths}


@pytest.fixture(scope="module")
def full_report(fitted, tmp_path_factory):
    """A report with the posterior and diagnosis files present."""
    from kinfit.report.build import build_report

    path, fit_dir = fitted
    folder = tmp_path_factory.mktemp("full")
    fit_copy = folder / "fit"
    shutil.copytree(fit_dir, fit_copy)
    write_posterior_files(path, fit_copy)
    write_diagnosis_file(fit_copy)
    return build_report(path, fit_copy, folder / "report", argv=["kinfit", "report", "x"])


def test_report_from_saved_results_only(plain_report):
    res, files = plain_report
    for p in res.paths:
        assert p.is_file() and files[p], p
    names = {p.name for p in res.tables}
    assert names == {"parameters.csv", "runs.csv", "correlation.csv", "comparison.csv"}
    assert {p.name for p in res.figures} >= {f"{k}.{e}" for k in (
        "profiles", "parity", "residuals", "correlation", "regime_map", "effectiveness",
        "arrhenius") for e in ("png", "svg")}
    # without posterior files no posterior section or figure
    keys = [s.key for s in res.report.sections]
    assert "posterior" not in keys and "comparison" in keys
    assert not any(f.key.startswith("posterior") for f in res.report.figures)
    # nothing half-written is left behind
    assert not list(res.out_dir.rglob("*.tmp"))
    assert res.notes == ()


def test_figure_files_decode(full_report):
    for p in full_report.figures:
        if p.suffix == ".png":
            with Image.open(p) as im:
                im.verify()
        else:
            root = ET.parse(p).getroot()
            assert root.tag.endswith("svg")
    keys = {f.key for f in full_report.report.figures}
    assert {"posterior_corner", "posterior_traces", "profiles"} <= keys


def _strip_data_uris(text: str) -> str:
    return re.sub(r"data:image/png;base64,[A-Za-z0-9+/=]+", "data:", text)


def test_html_is_self_contained(full_report):
    text = full_report.html.read_text(encoding="utf-8")
    bare = _strip_data_uris(text)
    for bad in ("http:", "https:", "//", "<link", "@import", "<script", "<iframe"):
        assert bad not in bare, bad
    for m in re.finditer(r'(?:src|href)\s*=\s*"([^"]*)"', bare):
        assert m.group(1).startswith(("data:", "#")), m.group(0)
    assert all(u.startswith("#") for u in re.findall(r"url\(([^)]*)\)", bare))


def test_embedded_images_decode(full_report):
    text = full_report.html.read_text(encoding="utf-8")
    uris = re.findall(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"', text)
    assert len(uris) == len(full_report.report.figures)
    for u in uris:
        with Image.open(BytesIO(base64.b64decode(u, validate=True))) as im:
            im.load()
            assert im.size[0] > 200 and im.size[1] > 150
    svgs = re.findall(r"<svg\b.*?</svg>", text, flags=re.S)
    assert len(svgs) >= 10  # the model's equations
    for s in svgs:
        assert ET.fromstring(s).tag == "svg"


def _chromium() -> str:
    """The headless browser; a skip locally when absent, a failure in CI."""
    exe = shutil.which("chromium") or ("/usr/bin/chromium"
                                       if Path("/usr/bin/chromium").exists() else None)
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is not installed but CI is set: install Debian's 'chromium' "
                        "package (apt-get install -y chromium) so the report can be rendered")
        pytest.skip("chromium not installed (set CI to make this a failure)")
    return exe


def test_html_renders_in_headless_chromium(full_report, tmp_path):
    exe = _chromium()
    shot = tmp_path / "shot.png"
    profile = tmp_path / "profile"
    profile.mkdir()
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
           "--no-first-run", "--disable-background-networking", "--disable-component-update",
           "--disable-sync", f"--user-data-dir={profile}", f"--screenshot={shot}",
           "--window-size=1200,900", full_report.html.resolve().as_uri()]
    proc = subprocess.run(cmd, capture_output=True, timeout=60, check=False)
    assert shot.is_file(), proc.stderr.decode(errors="replace")[-2000:]
    with Image.open(shot) as im:
        rgb = np.asarray(im.convert("RGB"), dtype=int)
    assert rgb.shape[:2] == (900, 1200)
    assert len(np.unique(rgb.reshape(-1, 3), axis=0)) > 50  # not a single colour
    non_white = np.mean(np.any(rgb < 235, axis=2))
    assert 0.03 < non_white < 0.9, non_white


@pytest.mark.parametrize("width", [400, 1280])
def test_page_fits_phone_and_desktop_width(full_report, tmp_path, width):
    """At phone (400 px) and desktop (1280 px) width the page is no wider than the viewport
    (wide tables and equations scroll inside their own boxes) and every equation is drawn at
    no less than 90 % of its natural size (measured in Chromium; tests/page_probe.py)."""
    from page_probe import measure

    d = measure(_chromium(), full_report.html, width, tmp_path)
    assert d["viewport"] == width
    assert d["page"] <= width, d
    assert d["overflow"] == [], d["overflow"]
    assert len(d["equations"]) >= 10 and min(d["equations"]) >= 0.9, d["equations"]
    for key, t in d["tables"].items():  # a table wider than its card scrolls inside it
        assert t["card"] is not None and t["card"] <= width, key


DEMO = Path(__file__).resolve().parent.parent / "examples" / "demo" / "study.toml"
DEMO_FIT = Path(__file__).resolve().parent.parent / "reports" / "demo"


@pytest.mark.skipif(not (DEMO_FIT / "diagnosis.json").is_file(),
                    reason="the committed demo outputs are absent")
def test_demo_model_free_matrix_fits_one_screen(tmp_path):
    """The demo's 36 model-free tests read as one matrix (factor and held conditions by
    temperature) no taller than one 1280 x 800 screen, with the method stated once per
    kind of test and every cell's runs in the notes beneath; the report is built from the
    committed demo outputs (invented demo data) and measured in Chromium."""
    from page_probe import measure

    from kinfit.report.build import build_report

    exe = _chromium()
    fit = tmp_path / "fit"
    shutil.copytree(DEMO_FIT, fit)
    res = build_report(DEMO, fit, tmp_path / "out")
    diag = json.loads((fit / "diagnosis.json").read_text())
    table = next(b for s in res.report.sections for b in s.blocks if b.kind == "table"
                 and b.caption.startswith("Model-free tests"))
    temps = {round(t["fixed"]["temperature"], 2) for t in diag["model_free"]}
    assert len(table.rows) * len(temps) == len(diag["model_free"])
    assert len(table.header) == 2 + len(temps)
    md = (tmp_path / "out" / "report.md").read_text(encoding="utf-8")
    assert md.count("Method") <= 2  # profiles against t, and against w t for the loading
    assert all(" vs ".join(t["runs"]) in md for t in diag["model_free"])
    d = measure(exe, res.html, 1280, tmp_path)
    t8 = next(t for t in d["tables"].values() if "Model-free tests" in t["caption"])
    assert t8["height"] <= 800 and t8["width"] <= t8["card"], t8


def test_sections_follow_the_data(full_report):
    rep = full_report.report
    assert full_report.notes == ()  # no figure or section failed quietly
    keys = [s.key for s in rep.sections]
    assert keys == ["summary", "campaign", "model", "parameters", "fit", "adequacy",
                    "identifiability",
                    "comparison", "transport", "posterior", "validity", "cautions",
                    "reproducibility"]
    md = full_report.markdown.read_text(encoding="utf-8")
    for phrase in ("post. median", "Model-free tests", "Suggested conditions",
                   "apparent E_a", "Posterior probability of each regime",
                   "did NOT converge: chain shorter", "kinfit sample"):
        assert phrase in md, phrase
    # every figure and CSV linked from the Markdown exists beside it
    for link in re.findall(r"\]\(([^)#]+)\)", md):
        assert (full_report.out_dir / link).is_file(), link


def test_csv_tables_carry_the_saved_numbers(fitted, full_report):
    from kinfit.fitting.results import FitResult

    res = FitResult.load(fitted[1])
    params = pd.read_csv(full_report.out_dir / "parameters.csv").set_index("parameter")
    for name, p in res.parameters.items():
        assert params.loc[name, "estimate"] == p["estimate"]
        if p["vary"]:
            assert params.loc[name, "ci95_linear_lo"] == p["ci95_linear"][0]
            assert params.loc[name, "ci95_bootstrap_hi"] == p["ci95_bootstrap"][1]
    post = json.loads((full_report.out_dir.parent / "fit" / "posterior.json").read_text())
    assert params.loc["sigma", "posterior_median"] == post["parameters"]["sigma"]["median"]
    # the 90 % highest-density interval beside the central 90 % one (results contract: hdi90)
    assert params.loc["sigma", "posterior_hdi90_lo"] == post["parameters"]["sigma"]["hdi90"][0]
    assert not any("hdi94" in c for c in params.columns)
    assert "HDI 90 %" in (full_report.out_dir / "report.md").read_text(encoding="utf-8")
    runs = pd.read_csv(full_report.out_dir / "runs.csv").set_index("run")
    for rid, r in res.runs.items():
        assert runs.loc[rid, "regime"] == r["regime"]
        assert runs.loc[rid, "carberry [-]"] == r["carberry"]
    corr = pd.read_csv(full_report.out_dir / "correlation.csv").set_index("parameter")
    np.testing.assert_array_equal(corr.to_numpy(), np.array(res.correlation["matrix"]))
    comp = pd.read_csv(full_report.out_dir / "comparison.csv")
    assert list(comp["model"]) == [r["model"] for r in res.comparison]


def test_latex_parameter_table(full_report):
    from kinfit.report.latex import latex_number, latex_unit

    tex = full_report.latex.read_text(encoding="utf-8")
    for token in (r"\toprule", r"\midrule", r"\bottomrule", r"\begin{tabular}",
                  r"$k_\mathrm{ref}$", r"$\mathrm{mol\,kg^{-1}\,s^{-1}}$", "fixed",
                  "Posterior median", r"95\,\% interval"):
        assert token in tex, token
    body = tex[tex.index(r"\midrule"):tex.index(r"\bottomrule")]
    assert body.count(r"\\") == 7  # five varying parameters, one fixed, the error scale
    assert r"$\sigma$ & $\mathrm{mol\,m^{-3}}$" in body
    assert tex.count("{") == tex.count("}")
    assert latex_unit("J/(mol*K)") == r"$\mathrm{J\,mol^{-1}\,K^{-1}}$"
    assert latex_unit("m^2/s") == r"$\mathrm{m^{2}\,s^{-1}}$"
    assert latex_unit("1") == "--"
    assert latex_number(5.21577e-06) == r"$5.216\times10^{-6}$"
    assert latex_number(61439.0) == "$61439$"


def test_number_formatting():
    from kinfit.report.content import fmt, fmt_interval, fmt_p

    assert fmt(8.279e-5) == "8.279×10⁻⁵"
    assert fmt(60152.18) == "60152"
    assert fmt(-0.14180) == "−0.1418"
    assert fmt(9.9996e-6) == "1.000×10⁻⁵"
    assert fmt(None) == "–" and fmt(float("nan")) == "–"
    assert fmt_interval([None, 1.0]) == "[open, 1.000]"
    assert fmt_p(3e-9) == "< 1×10⁻⁶"


@pytest.mark.parametrize(("geometry", "column"), [("slab", 0), ("cylinder", 1), ("sphere", 2)])
def test_first_order_effectiveness_reference_values(geometry, column):
    """Closed forms (Thiele 1939; Aris 1957) in the Aris normalisation against values computed from them
    Table 1 ([calc], checked there against solve_bvp to 10 decimals)."""
    from kinfit.physics.pellet.effectiveness import eta_first_order

    table = {0.1: (0.9966799462, 0.9950331057, 0.9940509699),
             0.5: (0.9242343145, 0.8927799318, 0.8762494526),
             1.0: (0.7615941560, 0.6977746580, 0.6716364900),
             2.0: (0.4820137900, 0.4317613055, 0.4166728109),
             5.0: (0.1999818409, 0.1897199652, 0.1866666667),
             10.0: (0.0999999996, 0.0974670508, 0.0966666667),
             50.0: (0.0200000000, 0.0198997475, 0.0198666667)}
    phi = np.array(sorted(table))
    expected = np.array([table[p][column] for p in phi])
    np.testing.assert_allclose(eta_first_order(phi, geometry), expected, rtol=0, atol=2e-10)
    # small-modulus series: eta ~ 1 - c phi^2, c = 1/3, 1/2, 3/5 (Thiele 1939; Aris 1957)
    c = (1 / 3, 1 / 2, 3 / 5)[column]
    small = np.array([1e-4, 5e-3])
    np.testing.assert_allclose(1 - eta_first_order(small, geometry), c * small**2, rtol=2e-3)


def test_every_axis_has_a_unit(fitted, full_report):
    """Each axis that shows numbers carries a label with a unit in brackets."""
    from kinfit.report import figures as fg
    from kinfit.report import transport_figures as tf
    from kinfit.report import posterior_figures as pf

    rng = np.random.default_rng(seed=1)
    obs = pd.DataFrame({"run": ["A"] * 5 + ["B"] * 5, "time [s]": np.tile(np.arange(5.0), 2),
                        "observed": rng.uniform(1, 2, 10), "fitted": rng.uniform(1, 2, 10),
                        "residual": rng.normal(size=10)})
    draws = pd.DataFrame({"x": rng.normal(size=200), "y": rng.normal(size=200),
                          "log_prob": rng.normal(size=200)})
    figs = [
        fg.profiles_figure(obs, {}, titles={}, regimes={"A": "film"}),
        fg.parity_figure(obs, regimes={}, quantity="c", unit="mol/m^3"),
        fg.residuals_figure(obs, regimes={}, unit="mol/m^3", sigma=1.0),
        fg.rates_figure(obs, regimes={}, unit="mol/(kg*s)"),
        fg.arrhenius_figure(k_ref=0.05, activation_energy=6e4, reference_temperature=323.15,
                            temperatures=[313.15, 333.15], k_unit="mol/(kg*s)",
                            per_run=[("A", 313.15, 0.02, "film")], apparent=[(333.15, 0.1)]),
        tf.effectiveness_figure(geometry="sphere", order=1.0,
                                runs=[("A", 2.0, 0.42, "pore")]),
        tf.regime_map_figure([("A", 0.0, 0.2, "film"), ("B", 0.5, 0.001, "pore")],
                             carberry_limit=0.05, weisz_prater_limit=0.033),
        pf.correlation_figure(["x", "y"], np.array([[1.0, 0.3], [0.3, 1.0]])),
        pf.corner_figure(draws, ["x", "y"], units={"x": "m/s", "y": "1"}),
        pf.trace_figure(draws, ["x", "y"], units={"x": "m/s", "y": "1"}),
        pf.profile_likelihood_figure({"x": {"values": [0.0, 1.0, 2.0], "tau": [-2, 0, 2]}},
                                     t_crit=2.0, estimates={"x": 1.0}, units={"x": "m/s"}),
    ]
    unit = re.compile(r"\[[^\]]+\]")
    for fig in figs:
        fig.canvas.draw()
        for ax in fig.axes:
            if not ax.get_visible():
                continue
            for axis, label in ((ax.xaxis, ax.get_xlabel()), (ax.yaxis, ax.get_ylabel())):
                shown = [t for t in axis.get_ticklabels() if t.get_visible() and t.get_text()]
                if shown:
                    assert unit.search(label), (fig.axes.index(ax), label, type(fig))


def test_regime_map_labels_coincident_runs_once_and_do_not_overlap():
    """Runs that sit on the same spot share one label; no two labels overprint (checked on
    the drawn text boxes)."""
    from kinfit.report import transport_figures as tf

    runs = [("R01", 0.02, 0.03, "kinetic"), ("R02", 0.02, 0.03, "kinetic"),
            ("R11", 4.6, 0.57, "film"), ("R12", 4.6, 0.57, "film"), ("R19", 7.0, 0.68, "film"),
            ("R20", 7.0, 0.68, "film"), ("R23", 8.0, 0.50, "film"), ("R03", 2.7, 0.44, "mixed"),
            ("R15", 5.0, 0.39, "pore"), ("R07", 2.9, 0.27, "pore")]
    fig = tf.regime_map_figure(runs, carberry_limit=0.033, weisz_prater_limit=0.033)
    fig.canvas.draw()
    ax = fig.axes[0]
    labels = [t for t in ax.texts if t.get_text().startswith("R")]
    assert sorted(t.get_text() for t in labels) == sorted(
        ["R01, R02", "R11, R12", "R19, R20", "R23", "R03", "R15", "R07"])
    renderer = fig.canvas.get_renderer()
    boxes = [t.get_window_extent(renderer) for t in labels]
    for i, a in enumerate(boxes):
        for b in boxes[i + 1:]:
            assert not a.overlaps(b), (a, b)


def test_regime_map_is_the_same_in_every_process():
    """Label placement must not depend on the time it is given (adjustText's default is a
    time limit, which the demo's crowded corner reaches): two fresh interpreters draw
    byte-identical SVG from the committed demo results."""
    import subprocess
    import sys

    results = Path(__file__).resolve().parents[1] / "reports" / "demo" / "results.json"
    code = ("import json, sys; from kinfit.report import figures as fg; from kinfit.report import transport_figures as tf; "
            f"d = json.load(open({str(results)!r}))['runs']; "
            "runs = [(k, v['weisz_prater'], v['carberry'], v['regime']) for k, v in d.items()]; "
            "fig = tf.regime_map_figure(runs, carberry_limit=0.0332, weisz_prater_limit=0.0333); "
            "sys.stdout.write(fg.render(fig)[1])")
    out = [subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True, timeout=120).stdout for _ in range(2)]
    assert out[0] and out[0] == out[1]


def test_same_results_give_the_same_report(fitted, plain_report):
    from kinfit.report.build import build_report

    path, fit_dir = fitted
    first, files = plain_report
    second = build_report(path, fit_dir, first.out_dir)
    assert second.paths == first.paths
    for p in second.paths:
        if p.name != "report_manifest.json":
            assert p.read_bytes() == files[p], p.name


def test_wrong_study_or_missing_results(fitted, tmp_path):
    from kinfit.report.build import build_report

    path, fit_dir = fitted
    with pytest.raises(StudyError, match="no results at .*kinfit fit"):
        build_report(path, tmp_path / "empty", tmp_path / "r")
    other = tmp_path / "other"
    shutil.copytree(path.parent, other, ignore=shutil.ignore_patterns("fit"))
    runs = pd.read_csv(other / "runs.csv")
    runs.loc[0, "run"] = "Z9"
    runs.to_csv(other / "runs.csv", index=False)
    obs = pd.read_csv(other / "obs.csv")
    obs.loc[obs["run"] == "S1", "run"] = "Z9"
    obs.to_csv(other / "obs.csv", index=False)
    with pytest.raises(StudyError, match="does not belong to study.*run 'S1'"):
        build_report(other / "study.toml", fit_dir, tmp_path / "r")
    broken = tmp_path / "broken"
    shutil.copytree(fit_dir, broken)
    (broken / "posterior.json").write_text("{not json")
    with pytest.raises(StudyError, match="posterior.json: not valid JSON"):
        build_report(path, broken, tmp_path / "r")


def test_command_hooks_and_changed_inputs(fitted, tmp_path, capsys):
    """The command line hooks (default --fit = --out), on a study whose data changed after
    the fit: the report says so, in the summary and beside the digests."""
    from kinfit.cli.report import add_arguments as add_report_arguments
    from kinfit.cli.report import run as run_report_command

    path, fit_dir = fitted
    copy = tmp_path / "campaign"
    shutil.copytree(path.parent, copy, ignore=shutil.ignore_patterns("fit"))
    obs = pd.read_csv(copy / "obs.csv")
    obs.loc[5, "concentration [mol/m^3]"] += 50.0
    obs.to_csv(copy / "obs.csv", index=False)
    out = tmp_path / "out"
    shutil.copytree(fit_dir, out)
    parser = argparse.ArgumentParser(prog="kinfit report")
    add_report_arguments(parser)
    args = parser.parse_args([str(copy / "study.toml"), "--out", str(out)])
    assert args.fit is None
    with pytest.raises(StudyError, match="obs.csv changed since the fit"):
        run_report_command(args)  # refused unless asked for
    args = parser.parse_args([str(copy / "study.toml"), "--out", str(out),
                              "--allow-changed-data"])
    assert run_report_command(args) == 0
    captured = capsys.readouterr()
    assert "wrote" in captured.out and "differs from the files" in captured.err
    md = (out / "report.md").read_text(encoding="utf-8")
    assert "obs.csv differ or are missing" in md
    assert re.search(r"obs\.csv \| [0-9a-f]{16}… \| \*\*DIFFERENT from the fitted file", md)
    assert re.search(r"runs\.csv \| [0-9a-f]{16}… \| same", md)
    man = json.loads((out / "report_manifest.json").read_text())
    assert "report.html" in man["written"]
    # recorded relative to the study file, never as an absolute path
    assert man["inputs"]["../out/results.json"]["sha256"]
    assert man["study"] == "study.toml" and str(tmp_path) not in json.dumps(man)


def test_every_equation_renders():
    """Each equation the report can show parses in mathtext and becomes inline SVG."""
    from kinfit.report.equations import EQUATIONS, ETA_FIRST_ORDER, equation_svg

    for i, latex in enumerate([*EQUATIONS.values(), *ETA_FIRST_ORDER.values()]):
        svg = equation_svg(latex, prefix=f"t{i}")
        assert svg is not None, latex
        root = ET.fromstring(svg)
        assert root.tag == "svg" and all(el.get("id", f"t{i}-").startswith(f"t{i}-")
                                         for el in root.iter())
    assert equation_svg(r"\frac{a}{", prefix="bad") is None


def test_posterior_summaries_render_to_their_mcse_digits(fitted, tmp_path):
    # HTML, Markdown and LaTeX print a posterior median and interval to the digits its Monte
    # Carlo standard error supports (last digit: the power of ten at or above 2 MCSE, at least
    # 2 significant digits; tests/test_sampling.py checks the rule), while posterior.json and
    # parameters.csv keep full precision. Hand-worked: sigma median 0.0123456, MCSE 3e-5
    # -> 2 MCSE = 6e-5 -> last digit 1e-4 -> "0.0123"; q05 0.0111111, MCSE 4e-6 -> "0.01111";
    # q95 0.0135791, MCSE 4e-4 -> "0.014"; HDI ends 0.0109876 (MCSE 2e-4) -> "0.011" and
    # 0.0138642 (MCSE 1e-6) -> "0.01386". k_ref: median 0.140045 with MCSE 2.3e-4 -> "0.140".
    from kinfit.report.build import build_report

    path, fit_dir = fitted
    fit_copy = tmp_path / "fit"
    shutil.copytree(fit_dir, fit_copy)
    write_posterior_files(path, fit_copy)
    post = json.loads((fit_copy / "posterior.json").read_text())
    post["parameters"]["sigma"].update(
        median=0.0123456, q05=0.0111111, q95=0.0135791, hdi90=[0.0109876, 0.0138642],
        mcse={"median": 3e-5, "q05": 4e-6, "q95": 4e-4, "hdi90": [2e-4, 1e-6]})
    post["parameters"]["k_ref"].update(
        median=0.140045, q05=0.13603, q95=0.14412,
        mcse={"median": 2.3e-4, "q05": 4e-4, "q95": 4e-5, "hdi90": [None, None]})
    (fit_copy / "posterior.json").write_text(json.dumps(post))
    res = build_report(path, fit_copy, tmp_path / "report", argv=["kinfit", "report", "x"])
    out = res.out_dir
    for name in ("report.md", "report.html"):
        text = (out / name).read_text()
        assert "0.0123" in text and "0.01235" not in text, name
        assert "[0.01111, 0.014]" in text, name       # parameter table and posterior summary
        assert "[0.011, 0.01386]" in text, name       # HDI 90 %
        assert "0.140" in text and "0.1400" not in text, name
        assert "[0.136, 0.1441]" in text, name
    tex = (out / "parameters.tex").read_text()
    assert "$0.140$ & [$0.136$, $0.1441$]" in tex
    params = pd.read_csv(out / "parameters.csv").set_index("parameter")
    assert params.loc["sigma", "posterior_median"] == 0.0123456  # full precision kept


def test_regime_probability_has_one_source(fitted, tmp_path):
    """A run's regime probability appears in the console of 'kinfit diagnose' (from
    diagnosis.json) and in the report: the report takes it from diagnosis.json too, so the two
    agree even when the sampler's own summary (another subsample of draws) differs."""
    from kinfit.report.build import build_report

    path, fit_dir = fitted
    fit = tmp_path / "fit"
    shutil.copytree(fit_dir, fit)
    write_posterior_files(path, fit)
    write_diagnosis_file(fit)
    diag = json.loads((fit / "diagnosis.json").read_text())
    diag["runs"] = {"S1": {"regime_probability": {"kinetic": 0.09, "film": 0.91, "pore": 0.0,
                                                  "mixed": 0.0}}}
    diag["model"] = {"n_draws": 200}
    (fit / "diagnosis.json").write_text(json.dumps(diag))
    res = build_report(path, fit, tmp_path / "out")
    table = next(b for s in res.report.sections for b in s.blocks if b.kind == "table"
                 and b.caption.startswith("Posterior probability of each regime"))
    assert "diagnosis.json, 200 posterior draws" in table.caption
    assert [r for r in table.rows if r[0] == "S1"][0][1:3] == ("0.09", "0.91")


def test_units_as_the_user_wrote_them(full_report):
    """Temperatures in °C when the runs table gave degC, activation energy in kJ/mol (the
    trade's unit; the CSV keeps SI), micrometres written µm, never 'um' (common practice)."""
    md = (full_report.out_dir / "report.md").read_text(encoding="utf-8")
    assert "activation_energy [kJ/mol]" in md and "J/mol]" not in md.replace("kJ/mol]", "")
    assert "**T_ref:** 50 °C" in md
    assert not re.search(r"\d um\b|\bum\b", md)
    params = pd.read_csv(full_report.out_dir / "parameters.csv").set_index("parameter")
    assert params.loc["activation_energy", "unit"] == "J/mol"


def test_plain_sentences_and_thresholds_in_words(full_report):
    """No optimiser message, Python list or snake_case threshold key in the prose; the
    thresholds table has one row per criterion, in words."""
    from kinfit.report.builder import plain_message

    assert plain_message("`ftol` termination condition is satisfied.") == (
        "the sum of squares stopped falling (relative change below the tolerance)")
    assert plain_message("something else.") == "something else"
    md = (full_report.out_dir / "report.md").read_text(encoding="utf-8")
    assert "termination condition" not in md and "['" not in md
    table = next(b for s in full_report.report.sections for b in s.blocks if b.kind == "table"
                 and b.caption.startswith("Thresholds in use"))
    labels = [r[0] for r in table.rows]
    assert len(labels) == len(set(labels)) and not any(re.search(r"[a-z]_[a-z]", x)
                                                       for x in labels), labels


def _legend_covers_points(fig) -> int:
    """How many plotted markers lie inside a legend box (display coordinates)."""
    fig.canvas.draw()
    boxes = [leg.get_window_extent() for ax in fig.axes for leg in [ax.get_legend()] if leg]
    boxes += [leg.get_window_extent() for leg in fig.legends]
    hits = 0
    for ax in fig.axes:
        for line in ax.get_lines():
            if line.get_linestyle() not in ("None", "none", ""):
                continue
            xy = ax.transData.transform(np.column_stack(line.get_data()).astype(float))
            hits += sum(int(b.contains(x, y)) for b in boxes for x, y in xy)
    return hits


def test_legends_stay_off_the_data():
    """The residual and Arrhenius legends sit outside the axes: no marker under a legend box;
    in the Arrhenius plot the runs are drawn above the apparent constants (invented points)."""
    from kinfit.report import figures as fg

    rng = np.random.default_rng(4)
    n = 60
    frame = pd.DataFrame({"run": np.repeat(["A", "B", "C"], n // 3),
                          "time [s]": np.tile(np.linspace(0, 3600, n // 3), 3),
                          "fitted": rng.uniform(100, 500, n), "residual": rng.normal(0, 2, n)})
    fig = fg.residuals_figure(frame, regimes={"A": "kinetic", "B": "film", "C": "pore"},
                              unit="mol/m³", sigma=2.0)
    assert _legend_covers_points(fig) == 0
    T = [313.15, 328.15, 343.15]
    fig = fg.arrhenius_figure(k_ref=1.0, activation_energy=6e4, reference_temperature=328.15,
                              temperatures=T, k_unit="mol/(kg s)",
                              per_run=[("R1", t, float(np.exp(-6e4 / 8.314 * (1 / t - 1 / 328.15))),
                                        "kinetic") for t in T],
                              apparent=[(t, float(np.exp(-6e4 / 8.314 * (1 / t - 1 / 328.15))))
                                        for t in T], apparent_label="apparent at 300 rpm, 10 µm")
    assert _legend_covers_points(fig) == 0
    ax = fig.axes[0]
    runs = next(ln for ln in ax.get_lines() if ln.get_label() == "run (kinetic)")
    app = next(ln for ln in ax.get_lines() if ln.get_label().startswith("apparent at"))
    assert runs.get_zorder() > app.get_zorder()
