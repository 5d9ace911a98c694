"""Model-adequacy tests: each statistic against statsmodels / scipy references on published
data, the runs distribution against its published table and full enumeration, calibration
properties, and end to end on an invented campaign (tests/adequacy_campaign.py) where the
fitted model is right, and where it ignores transport that changes with temperature.
"""

from __future__ import annotations

import itertools
import json
import math

import numpy as np
import pandas as pd
import pytest
from adequacy_campaign import NOISE, truth_profiles, write_campaign
from nist import load, nist_dir
from scipy import stats

from kinfit.estimate.adequacy import (
    AdequacyTest,
    Subset,
    _runs_pmf,
    holm,
    lack_of_fit_test,
    predictive_tests,
    residual_tests,
    runs_test,
    scale_test,
    serial_test,
    stratified_trend_test,
    trend_test,
)

sm = pytest.importorskip("statsmodels.api")
smf = pytest.importorskip("statsmodels.formula.api")

# Anscombe (1973), "Graphs in statistical analysis", Am. Stat. 27, 17-21: data set I,
# published fit y = 3.00 + 0.500 x.
ANSCOMBE_X = np.array([10, 8, 13, 9, 11, 14, 6, 4, 12, 7, 5], dtype=float)
ANSCOMBE_Y1 = np.array([8.04, 6.95, 7.58, 8.81, 8.33, 9.96, 7.24, 4.26, 10.84, 4.82, 5.68])



@pytest.fixture
def rng():
    return np.random.default_rng(seed=20261204)


# ------------------------------------------------------------------------ the statistics
def test_trend_slope_t_matches_statsmodels_ols_on_anscombe():
    t = trend_test(ANSCOMBE_Y1, ANSCOMBE_X, factor="x")
    ols = sm.OLS(ANSCOMBE_Y1, sm.add_constant(ANSCOMBE_X)).fit()
    assert t.detail["slope"] == pytest.approx(0.500, abs=5e-4)  # Anscombe 1973
    assert t.statistic == pytest.approx(ols.tvalues[1], rel=1e-10)  # statsmodels OLS
    assert t.p == pytest.approx(ols.pvalues[1], rel=1e-8)


def test_stratified_trend_F_matches_statsmodels_anova():
    """Two strata of Anscombe's set I, each with its own intercept and slope; the F test of
    both slopes against intercepts only (statsmodels anova_lm of nested OLS fits)."""
    g = (np.arange(ANSCOMBE_X.size) % 2).astype(int)
    t = stratified_trend_test(ANSCOMBE_Y1, ANSCOMBE_X, g, factor="x")
    df = pd.DataFrame({"y": ANSCOMBE_Y1, "x": ANSCOMBE_X, "g": g})
    full = smf.ols("y ~ C(g) + C(g):x", df).fit()
    reduced = smf.ols("y ~ C(g)", df).fit()
    table = sm.stats.anova_lm(reduced, full)
    assert t.detail["df"] == [2, ANSCOMBE_X.size - 4]
    assert t.statistic == pytest.approx(table["F"].iloc[1], rel=1e-9)
    assert t.p == pytest.approx(table["Pr(>F)"].iloc[1], rel=1e-8)
    # one stratum: the square of the slope's t
    one = stratified_trend_test(ANSCOMBE_Y1, ANSCOMBE_X, np.zeros(11, int), factor="x")
    assert one.statistic == pytest.approx(trend_test(ANSCOMBE_Y1, ANSCOMBE_X,
                                                     factor="x").statistic ** 2, rel=1e-9)


@pytest.mark.skipif(nist_dir() is None, reason="NIST StRD datasets not found")
def test_lack_of_fit_matches_statsmodels_on_chwirut1():
    """Chwirut1 (NIST StRD; Chwirut 1979, ultrasonic calibration) has replicate x values. A
    straight line is the wrong model; the lack-of-fit F of Draper & Smith (1998, sec. 2.1)
    equals statsmodels' anova_lm of the line against the cell-means model."""
    d = load("Chwirut1", nist_dir())
    x, y = d.x[:, 0], d.y
    ols = sm.OLS(y, sm.add_constant(x)).fit()
    cells = np.unique(x, return_inverse=True)[1]
    res = lack_of_fit_test(ols.resid / np.sqrt(ols.scale), cells, n_params=2)
    df = pd.DataFrame({"y": y, "x": x})
    table = sm.stats.anova_lm(smf.ols("y ~ x", df).fit(), smf.ols("y ~ C(x)", df).fit())
    assert res.statistic == pytest.approx(table["F"].iloc[1], rel=1e-8)
    assert res.p == pytest.approx(table["Pr(>F)"].iloc[1], rel=1e-6, abs=1e-300)
    assert res.p < 1e-10  # the line misses the curve
    assert lack_of_fit_test(ols.resid, np.arange(y.size), n_params=2) is None  # no replicates


@pytest.mark.skipif(nist_dir() is None, reason="NIST StRD datasets not found")
def test_scale_test_at_the_certified_residual_sd_of_misra1a():
    """At the certified optimum of Misra1a (NIST StRD), the residuals scaled by the certified
    residual standard deviation give X^2 = n - p exactly (its definition), and the p-value of a
    chi-square with n - p degrees of freedom there (scipy.stats.chi2)."""
    from nist import MODELS

    d = load("Misra1a", nist_dir())
    f = MODELS[d.formula][0](d.certified[None, :], d.x)[0]
    n, p = d.y.size, d.certified.size
    t = scale_test((d.y - f) / d.rsd, dof=n - p)
    assert t.statistic == pytest.approx(n - p, rel=1e-6)
    assert t.p == pytest.approx(stats.chi2.sf(n - p, n - p), rel=1e-5)
    # noise understated two-fold: X^2 = 4 (n - p), far in the upper tail
    assert scale_test(2.0 * (d.y - f) / d.rsd, dof=n - p).p == pytest.approx(
        stats.chi2.sf(4 * (n - p), n - p), rel=1e-5)
    assert stats.chi2.sf(4 * (n - p), n - p) < 1e-5


def test_runs_distribution_against_enumeration_and_table():
    """The exact law of the number of runs (Swed & Eisenhart 1943) against full enumeration
    of all arrangements, and the table's lower critical value for n1 = n2 = 10 at 0.025 (6;
    Swed & Eisenhart 1943, Table II, from memory)."""
    n1, n2 = 5, 4
    counts: dict[int, int] = {}
    for pos in itertools.combinations(range(n1 + n2), n1):
        s = np.full(n1 + n2, -1)
        s[list(pos)] = 1
        r = 1 + int(np.sum(s[1:] != s[:-1]))
        counts[r] = counts.get(r, 0) + 1
    total = math.comb(n1 + n2, n1)
    for r, c in counts.items():
        assert _runs_pmf(r, n1, n2) == pytest.approx(c / total, rel=1e-12)
    assert sum(_runs_pmf(r, n1, n2) for r in range(2, n1 + n2 + 1)) == pytest.approx(1.0)
    below6 = sum(_runs_pmf(r, 10, 10) for r in range(2, 7))
    below7 = sum(_runs_pmf(r, 10, 10) for r in range(2, 8))
    assert below6 <= 0.025 < below7


def test_runs_normal_approximation_matches_statsmodels():
    """The z of Wald & Wolfowitz (1940) against statsmodels' runstest_1samp (no continuity
    correction), on the signs of the residuals of the straight line through Anscombe's set II
    (a parabola, so its residuals come in long runs)."""
    from statsmodels.sandbox.stats.runs import runstest_1samp

    y2 = np.array([9.14, 8.14, 8.74, 8.77, 9.26, 8.10, 6.13, 3.10, 9.13, 7.26, 4.74])
    order = np.argsort(ANSCOMBE_X)
    resid = sm.OLS(y2, sm.add_constant(ANSCOMBE_X)).fit().resid[order]
    r, mid_p, z = runs_test(resid)
    z_ref, _ = runstest_1samp(resid, cutoff=0.0, correction=False)
    assert z == pytest.approx(z_ref, rel=1e-10)
    assert r == 1 + int(np.sum(np.sign(resid[1:]) != np.sign(resid[:-1])))
    n1, n2 = int(np.sum(resid > 0)), int(np.sum(resid < 0))
    assert mid_p == pytest.approx(sum(_runs_pmf(x, n1, n2) for x in range(2, r))
                                  + 0.5 * _runs_pmf(r, n1, n2))


def test_serial_fisher_combination_and_its_calibration(rng):
    """Fisher (1932): -2 sum ln p against chi-square with 2k degrees of freedom; and on
    independent normal residuals (24 groups of 15) the combined test's false-alarm rate at
    0.05 lies inside a binomial 99.9 % interval around 0.05 (mid-p values, Lancaster 1961)."""
    groups = np.repeat(np.arange(24), 15)
    z = rng.standard_normal(size=groups.size)
    t = serial_test(z, groups)
    ps = [runs_test(z[groups == g])[1] for g in range(24)]
    x2 = -2.0 * np.sum(np.log(ps))
    assert t.statistic == pytest.approx(x2, rel=1e-12)
    assert t.p == pytest.approx(stats.chi2.sf(x2, 2 * 24), rel=1e-10)
    n_rep = 400
    hits = sum(serial_test(rng.standard_normal(size=groups.size), groups).p <= 0.05
               for _ in range(n_rep))
    lo, hi = stats.binom.ppf([0.0005, 0.9995], n_rep, 0.05)
    assert lo <= hits <= hi, hits


def test_holm_matches_statsmodels_multipletests():
    from statsmodels.stats.multitest import multipletests

    p = np.array([0.01, 0.04, 0.03, 0.005, 0.2, 0.0125])
    ours = [t.rejected for t in holm([AdequacyTest("trend", 0.0, float(q)) for q in p], 0.05)]
    ref = multipletests(p, alpha=0.05, method="holm")[0]
    assert ours == list(ref)


def test_trend_tests_alarm_at_nominal_rate_on_pure_noise(rng):
    """Group means of unit normal residuals regressed on a covariate: the slope test's
    false-alarm rate at 0.05 lies inside a binomial 99.9 % interval (OLS theory)."""
    groups = np.repeat(np.arange(12), 8)
    cov = {"x": np.linspace(0.0, 1.0, 12)}
    subsets = {"x": [Subset("half", np.arange(12) % 2 == 0),
                     Subset("strata", np.ones(12, bool), np.arange(12) // 4)]}
    n_rep = 400
    hits = np.zeros(3)
    for _ in range(n_rep):
        tests = residual_tests(rng.standard_normal(size=groups.size), groups, n_params=0,
                               covariates=cov, subsets=subsets)
        trends = [t for t in tests if t.name == "trend"]
        assert len(trends) == 3
        hits += [t.p <= 0.05 for t in trends]
    lo, hi = stats.binom.ppf([0.0005, 0.9995], n_rep, 0.05)
    assert np.all((lo <= hits) & (hits <= hi)), hits


def test_predictive_p_values_of_a_right_model_do_not_alarm_beyond_nominal(rng):
    """Posterior predictive p-values (Gelman et al. 2013, ch. 6) with the draws at the truth:
    each replicated statistic has the observed one's law, so the p-values are uniform and the
    rate at 0.05 lies inside a binomial 99.9 % interval."""
    groups = np.repeat(np.arange(10), 6)
    f = np.tile(np.linspace(1.0, 2.0, groups.size), (50, 1))
    sd = np.full_like(f, 0.1)
    n_rep = 300
    hits: dict[str, int] = {}
    for _ in range(n_rep):
        y = f[0] + 0.1 * rng.standard_normal(size=f.shape[1])
        for t in predictive_tests(y, f, sd, groups, covariates={"x": np.arange(10.0)},
                                  rng=rng):
            hits[t.name] = hits.get(t.name, 0) + (t.p <= 0.05)
    assert set(hits) == {"residual_scale", "serial", "trend"}
    hi = stats.binom.ppf(0.9995, n_rep, 0.05)
    assert all(v <= hi for v in hits.values()), hits
    # and a misfit (a trend across groups the "model" lacks) is caught
    y = f[0] + 0.05 * groups + 0.1 * rng.standard_normal(size=f.shape[1])
    tests = predictive_tests(y, f, sd, groups, covariates={"x": np.arange(10.0)}, rng=rng)
    assert any(t.rejected and t.name == "trend" for t in tests)


# ------------------------------------------------------------------------ end to end
@pytest.fixture(scope="module")
def truths(tmp_path_factory):
    folder = tmp_path_factory.mktemp("adequacy")
    return {k: truth_profiles(folder / k, transport=k) for k in ("blind", "viscosity")}


def _fit(folder, model, y):
    from kinfit.fitting import FitOptions, fit
    from kinfit.study import load_study

    return fit(load_study(write_campaign(folder, y, model)), FitOptions(profile=False))


def test_temperature_dependent_transport_fitted_without_it_is_inadequate(truths, tmp_path):
    """Invented campaign generated with viscosity-scaled De and kc (water, 40-70 degC) and
    fitted with temperature-blind transport: over three noise seeds every fit fails adequacy
    and names temperature (in the benchmark 50 of 50 such campaigns alarm)."""
    model, f = truths["viscosity"]
    for seed in (11, 12, 13):
        y = f + np.random.default_rng(seed).normal(scale=NOISE, size=f.size)
        res = _fit(tmp_path / str(seed), model, y)
        a = res.fit["adequacy"]
        assert a["adequate"] is False, a["message"]
        assert "temperature" in a["message"]
        assert 'temperature_scaling = "viscosity"' in a["message"]
        assert any(t["rejected"] and t["factor"] == "temperature" for t in a["tests"])


def test_right_model_alarms_no_more_than_nominal(truths, tmp_path):
    """Campaigns from the fitted model itself: Holm's rule keeps the family-wise false-alarm
    rate at or below 0.05, so over 10 seeds 3 or more alarms have probability below 0.012
    (binomial); the test allows at most 2."""
    model, f = truths["blind"]
    alarms = 0
    for seed in range(10):
        y = f + np.random.default_rng(100 + seed).normal(scale=NOISE, size=f.size)
        a = _fit(tmp_path / str(seed), model, y).fit["adequacy"]
        assert {"adequate", "tests", "message"} <= set(a)
        for t in a["tests"]:
            assert {"name", "statistic", "p", "factor"} <= set(t)
        alarms += not a["adequate"]
    assert alarms <= 2, alarms


def test_require_adequate_exit_code_and_results_json(truths, tmp_path, capsys):
    from kinfit.cli import main

    model, f = truths["viscosity"]
    y = f + np.random.default_rng(5).normal(scale=NOISE, size=f.size)
    path = write_campaign(tmp_path / "bad", y, model)
    out = tmp_path / "out"
    code = main(["fit", str(path), "--out", str(out), "--no-profile", "--quiet",
                 "--require-adequate"])
    text = capsys.readouterr()
    assert code == 1
    assert "model adequacy: NOT ADEQUATE" in text.out
    assert "temperature" in text.err
    saved = json.loads((out / "results.json").read_text())["fit"]["adequacy"]
    assert saved["adequate"] is False and saved["tests"]
    # without the option the same fit exits 0 (it converged)
    assert main(["fit", str(path), "--out", str(tmp_path / "o2"), "--no-profile",
                 "--quiet"]) == 0


def test_report_shows_adequacy_before_estimates(truths, tmp_path):
    from kinfit.report import build_report

    model, f = truths["viscosity"]
    y = f + np.random.default_rng(6).normal(scale=NOISE, size=f.size)
    path = write_campaign(tmp_path / "bad", y, model)
    res = _fit(tmp_path / "bad", model, y)
    res.save(tmp_path / "fit")
    rep = build_report(path, tmp_path / "fit", tmp_path / "report")
    keys = [s.key for s in rep.report.sections]
    assert "adequacy" in keys
    md = rep.markdown.read_text(encoding="utf-8")
    summary = md[: md.index("Estimates")]
    assert "the intervals below hold only if the model is right" in summary
    assert "Model adequacy" in md


@pytest.mark.filterwarnings("ignore::kinfit.errors.ConvergenceWarning")
def test_posterior_predictive_checks_in_posterior_json(truths, tmp_path):
    """posterior.json carries an adequacy block of posterior predictive p-values from a
    subsample of draws; on the campaign with temperature-dependent transport fitted without it
    the temperature trends alarm there too. A short chain: the draws sit near the optimum,
    which is all this check needs (the sampler's convergence is tested elsewhere)."""
    from kinfit.bayes import SampleOptions, sample_study
    from kinfit.study import load_study

    model, f = truths["viscosity"]
    y = f + np.random.default_rng(7).normal(scale=NOISE, size=f.size)
    path = write_campaign(tmp_path / "bad", y, model)
    res = _fit(tmp_path / "bad", model, y)
    out = tmp_path / "fit"
    res.save(out)
    _, content = sample_study(load_study(path), res, out, SampleOptions(
        walkers=16, max_steps=200, chunk=200, seed=3, progress=False, n_predictive=200))
    a = json.loads((out / "posterior.json").read_text())["adequacy"]
    assert a == json.loads(json.dumps(content["adequacy"]))
    assert a["kind"] == "posterior predictive" and 0 < a["draws"] <= 200
    assert {t["name"] for t in a["tests"]} >= {"residual_scale", "serial", "trend"}
    assert a["adequate"] is False and "temperature" in a["message"]


@pytest.mark.parametrize("kind", ["constant", "proportional", "combined"])
def test_error_models_and_weights_standardise_to_unit_normal(kind, rng):
    """Standardised residuals follow the error model (sigma_i = s_abs, s_rel |f_i|, or
    sqrt(s_abs^2 + (s_rel f_i)^2), divided by sqrt(w_i)): data drawn from that model give
    residual-scale p-values whose rate at 0.05 lies inside a binomial 99.9 % interval."""
    from kinfit.estimate.adequacy import standardised_residuals
    from kinfit.estimate.problem import ErrorModel

    em = ErrorModel(kind)
    f = np.linspace(10.0, 800.0, 60)
    w = np.where(np.arange(60) % 3 == 0, 4.0, 1.0)
    sd = {"constant": 6.0 / np.sqrt(w), "proportional": 0.02 * f / np.sqrt(w),
          "combined": np.sqrt(36.0 + (0.02 * f) ** 2) / np.sqrt(w)}[kind]
    n_rep, hits = 400, 0
    for _ in range(n_rep):
        y = f + sd * rng.standard_normal(size=f.size)
        z = standardised_residuals(y, f, error_model=em, s_abs=6.0, s_rel=0.02, weights=w)
        assert z == pytest.approx((y - f) / sd, rel=1e-12)
        hits += scale_test(z, dof=f.size).p <= 0.05
    lo, hi = stats.binom.ppf([0.0005, 0.9995], n_rep, 0.05)
    assert lo <= hits <= hi, hits


def test_audit_caution_when_the_transport_aware_refit_is_inadequate():
    """Behaviour only (no outside source applies): the audit's verdict gets a caution when its
    transport-aware refit fails adequacy, and none when it passes or was not run."""
    from kinfit.audit_report import refit_inadequacy

    bad = {"adequate": False, "failed": ["the residuals trend with temperature"]}
    assert "temperature" in refit_inadequacy({"transport_aware": {"adequacy": bad}})
    assert refit_inadequacy({"transport_aware": {"adequacy": {"adequate": True}}}) is None
    assert refit_inadequacy({"as_observed": {"adequacy": bad}}) is None
