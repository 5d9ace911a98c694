"""The transport diagnosis: model-free tests against reference statistics libraries, falsified
kinetics against the published strong-pore-diffusion result, and synthetic campaigns made with
kinfit's own physics (seeded noise) whose regimes and test conclusions are known.

The synthetic campaigns are invented data, generated here from stated true parameters.
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import stats
from scipy.integrate import solve_ivp
from studies import profile_rows, profiles_csv, runs_csv, simulate, study_text, write_study

from kinfit.criteria import Thresholds
from kinfit.diagnose.falsified import (
    GAS_CONSTANT,
    arrhenius_regression,
    falsified_kinetics,
    power_law_profile,
)
from kinfit.diagnose.model_free import (
    _fit_levels,
    compare_rates,
    extra_sum_of_squares,
    model_free_tests,
    spline_design,
)
from kinfit.diagnose.next_runs import next_runs
from kinfit.diagnose.per_run import posterior_matrix
from kinfit.diagnostics import (
    add_diagnose_arguments,
    diagnose,
    model_for_fit,
    run_diagnose_command,
)
from kinfit.errors import StudyError
from kinfit.fitting import FitOptions, fit
from kinfit.model import Model, ModelSpec
from kinfit.results import FitResult
from kinfit.simulate import run_table
from kinfit.study import comparison_sets, load_study


# ----------------------------------------------------------------------------- synthetic studies
def _study(parameters: dict, *, name: str, film: str, pellet: str) -> str:
    """A power-law study at 55 degC reference (agitation film referred to 600 rpm, 100 um)."""
    return study_text(parameters, name=name, reference_temperature="55 degC",
                      reference_diameter="100 um", film=film, pellet=pellet)


def write_campaign(folder: Path, rows, *, k_ref="0.05 mol/(kg*s)", ea="60 kJ/mol", order=1.0,
                   film="agitation", kc_ref="2e-5 m/s", a=0.6, b=0.5, De=None, kind="profile",
                   sigma=2.0, rel_sigma=0.02, n_rep=3, t_end=90.0, n_t=12, seed=7,
                   name="synthetic (invented)"):
    """Write a study with kinfit's own physics at the true parameters, plus seeded noise.

    rows: (run, T [degC], N [rpm], dp [um], w [g/L], C0 [mol/L]). Profiles get Gaussian noise
    of ``sigma`` mol/m^3; rates get relative noise ``rel_sigma`` on ``n_rep`` replicates.
    """
    parameters = {"k_ref": k_ref, "activation_energy": ea, "order": order}
    if film == "agitation":
        parameters.update(kc_ref=kc_ref, agitation_exponent=a, size_exponent=b)
    if De is not None:
        parameters["effective_diffusivity"] = De
    text = _study(parameters, name=name, film=film, pellet="none" if De is None else "direct")
    if kind == "profile":
        t = np.linspace(0.0, t_end, n_t)
        obs = profiles_csv([(r[0], ti, r[5]) for r in rows for ti in t], unit="mol/L")
    else:
        obs = "run,rate [mol/(kg*s)]\n" + "".join(f"{r[0]},0.01\n" * n_rep for r in rows)
    path = write_study(folder, text, runs_csv(rows), obs)
    _, m, y = simulate(path)
    rng = np.random.default_rng(seed)
    ids = np.asarray(m.run_ids)[m.run_index]
    if kind == "profile":
        yn = np.maximum(y + rng.normal(loc=0.0, scale=sigma, size=y.size), 0.0)
        text = profiles_csv(profile_rows(m, yn, fmt="repr", scale=1000.0), unit="mol/L")
    else:
        yn = y * (1.0 + rng.normal(loc=0.0, scale=rel_sigma, size=y.size))
        text = "run,rate [mol/(kg*s)]\n" + "".join(
            f"{i},{float(v)!r}\n" for i, v in zip(ids, yn, strict=True))
    (folder / "obs.csv").write_text(text)
    study = load_study(path)
    return study, m.x0.copy()


def _grid(temps, speeds, sizes, loading=2, c0=0.5):
    rows, i = [], 0
    for T in temps:
        for N in speeds:
            for dp in sizes:
                i += 1
                rows.append((f"R{i:02d}", T, N, dp, loading, c0))
    return rows


@pytest.fixture(scope="module")
def film_campaign(tmp_path_factory):
    """Film-limited at low speed with large particles, kinetic with small ones; no pores.

    Truth: k_ref 0.05 mol/(kg s) at 55 degC, Ea 60 kJ/mol, first order, kc_ref 2e-5 m/s at
    600 rpm and 100 um, a = 0.6, b = 0.5; invented.
    """
    rows = _grid((40, 70), (200, 1200), (30, 300))
    rows.append(("R09", 70, 1200, 30, 4, 0.5))
    study, truth = write_campaign(tmp_path_factory.mktemp("film"), rows)
    model = Model(ModelSpec.from_study(study), study)
    true_runs = run_table(model, truth)
    # the fixture must hold both regimes for the checks below to mean anything
    labels = {r["regime"] for r in true_runs.values()}
    assert {"film", "kinetic"} <= labels
    result = fit(study, FitOptions(profile=False))
    assert result.converged
    return study, truth, true_runs, result


# ----------------------------------------------------------------------------- statistics
def test_extra_sum_of_squares_matches_statsmodels():
    # the extra-sum-of-squares F test of nested OLS fits (Bates & Watts 1988) against
    # statsmodels' RegressionResults.compare_f_test on the same data (reference library)
    import statsmodels.api as sm  # a declared test dependency: missing is a failure
    rng = np.random.default_rng(3)
    x = np.tile(np.linspace(0.0, 1.0, 10), 3)
    level = np.repeat(np.arange(3), 10)
    y = 500 * np.exp(-(2.0 + 0.2 * level) * x) + rng.normal(scale=3.0, size=x.size)
    fit_ = _fit_levels(x, y, np.ones_like(y), level, 3,
                       lambda z: spline_design(z, 3, (0.5,)), "test")
    test = extra_sum_of_squares(fit_.sse_pooled, y.size - fit_.rank_pooled, fit_.sse_separate,
                                y.size - fit_.rank_separate)
    B = spline_design(x, 3, (0.5,))
    full_X = np.hstack([B * (level == g)[:, None] for g in range(3)])
    full = sm.OLS(y, full_X).fit()
    reduced = sm.OLS(y, B).fit()
    F, p, df = full.compare_f_test(reduced)
    # both sides solve linear least squares through LAPACK (rounding ~1e-13 on these
    # well-conditioned designs); the p value amplifies that by |d ln p / d ln F| < 1e3: 1e-9
    assert test.statistic == pytest.approx(F, rel=1e-9)
    assert test.p_value == pytest.approx(p, rel=1e-9)
    assert test.df == (int(df), int(full.df_resid))


def test_rate_comparison_is_one_way_anova(tmp_path):
    # one-way analysis of variance (Fisher 1925) against scipy.stats.f_oneway (reference library)
    rows = [("A", 55, 300, 30, 2, 0.5), ("B", 55, 600, 30, 2, 0.5), ("C", 55, 1200, 30, 2, 0.5)]
    study, _ = write_campaign(tmp_path, rows, kind="rate", kc_ref="3e-6 m/s", n_rep=4)
    study = type(study)(**{**study.__dict__, "error_model": "constant"})
    (cs,) = comparison_sets(study, "stirrer_speed")
    res = compare_rates(study, cs)
    ref = stats.f_oneway(*[study.run(r).rates for r in ("A", "B", "C")])
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-9)
    assert res.p_value == pytest.approx(ref.pvalue, rel=1e-9, abs=1e-300)
    assert res.df == (2, 9)
    # strongly film-limited (kc_ref 3e-6 m/s): faster at the higher speed
    assert res.different and res.direction == "faster at higher"
    assert "film resistance at the lower speed" in res.conclusion


def test_rate_comparison_without_replicates_is_not_possible(tmp_path):
    rows = [("A", 55, 300, 30, 2, 0.5), ("B", 55, 1200, 30, 2, 0.5)] + [
        (f"T{T}", T, 600, 30, 2, 0.5) for T in (30, 40, 60, 70)]
    study, _ = write_campaign(tmp_path, rows, kind="rate", n_rep=1)
    res = model_free_tests(study)
    assert not res.tests
    msg = [n.message for n in res.not_possible if n.factor == "stirrer_speed"][0]
    assert "no rate is replicated" in msg and "repeat one of these runs" in msg


def test_profile_test_keeps_its_false_alarm_rate():
    # identical first-order profiles with noise: the F test must reject in about alpha of the
    # cases (the definition of a level-alpha test; binomial 99.9 % bound for 400 trials)
    from kinfit.diagnose.model_free import _select_basis

    rng = np.random.default_rng(11)
    rejections = 0
    trials = 400
    for _ in range(trials):
        t1 = np.linspace(0.0, 1.0, 12)
        t2 = np.sort(rng.uniform(0.0, 1.0, 10))
        x = np.r_[t1, t2]
        y = 500 * np.exp(-3.0 * x) + rng.normal(scale=2.0, size=x.size)
        level = np.r_[np.zeros(12, int), np.ones(10, int)]
        f = _select_basis(x, y, np.ones_like(y), level, 2)
        res = extra_sum_of_squares(f.sse_pooled, y.size - f.rank_pooled, f.sse_separate,
                                   y.size - f.rank_separate)
        rejections += res.p_value < 0.05
    upper = stats.binom.ppf(0.999, trials, 0.05) / trials
    assert rejections / trials <= upper


# ----------------------------------------------------------------------------- falsified kinetics
def _eta_sphere_radius(phi):
    # first-order sphere, radius form: eta = 3/phi^2 (phi coth phi - 1) (Thiele 1939)
    return 3.0 / phi**2 * (phi / np.tanh(phi) - 1.0)


@pytest.mark.parametrize(("phi_500", "ratio"), [(0.1, 0.99932), (1.0, 0.93947), (3.0, 0.72305),
                                                 (20.0, 0.52599), (100.0, 0.50499)])
def test_apparent_activation_energy_halves_in_strong_pore_diffusion(phi_500, ratio):
    # check values computed from the closed form (Thiele 1939; Weisz & Prater 1954) (sphere, first order, E = 100 kJ/mol, De
    # independent of T; Satterfield 1970; Weisz & Prater 1954): E_app/E at phi_R(500 K).
    # The tabulated numbers are the Arrhenius secant between 500 and 501 K (they are
    # reproduced to all five digits that way; the local slope at phi_R = 1 is 0.94074)
    E = 1.0e5
    T = np.array([500.0, 501.0])
    k = np.exp(-E / GAS_CONSTANT * (1 / T - 1 / 500.0))
    phi = phi_500 * np.sqrt(k)
    r = k * _eta_sphere_radius(phi)
    fit_ = arrhenius_regression(T, np.log(r))
    assert fit_.activation_energy / E == pytest.approx(ratio, abs=2e-5)


def test_falsified_kinetics_warns_of_pore_diffusion(tmp_path):
    # a rate campaign in strong pore diffusion (rates made from the first-order sphere closed
    # form at phi_R = 20 at 500 K; invented): E_app about E/2 must raise the pore warning
    E = 1.0e5
    temps = [480.0, 490.0, 500.0, 510.0, 520.0]
    rows = [(f"T{i}", T - 273.15, 600, 100, 2, 0.5) for i, T in enumerate(temps)]
    (tmp_path / "runs.csv").write_text(runs_csv(rows))
    rng = np.random.default_rng(5)
    lines = ["run,rate [mol/(kg*s)]"]
    for (rid, *_), T in zip(rows, temps, strict=True):
        k = np.exp(-E / GAS_CONSTANT * (1 / T - 1 / 500.0))
        r = 0.01 * k * _eta_sphere_radius(20.0 * np.sqrt(k))
        lines += [f"{rid},{float(v)!r}" for v in r * (1 + rng.normal(scale=0.01, size=3))]
    (tmp_path / "obs.csv").write_text("\n".join(lines) + "\n")
    (tmp_path / "study.toml").write_text(_study(
        {"k_ref": "0.01 mol/(kg*s)", "activation_energy": "100 kJ/mol", "order": 1.0},
        name="pore", film="none", pellet="none"))
    study = load_study(tmp_path / "study.toml")
    res = falsified_kinetics(study, intrinsic_activation_energy=E, intrinsic_order=1.0)
    d = res.to_dict()
    assert d["apparent_activation_energy"] / E == pytest.approx(0.526, abs=0.02)
    assert d["apparent_order"] is None  # one initial concentration: not identified
    assert len(d["per_temperature"]) == 5
    assert any("strong pore diffusion" in w for w in d["warnings"])
    lo, hi = d["apparent_activation_energy_ci95"]
    assert lo < d["apparent_activation_energy"] < hi < E


@pytest.mark.parametrize("n", [0.5, 1.0, 2.0])
def test_power_law_profile_against_solve_ivp(n):
    # closed-form batch profile dc/dtau = -c^n against scipy's solve_ivp at tight tolerance
    tau = np.linspace(0.0, 1.5, 16)
    c = power_law_profile(0.8, tau, n)
    sol = solve_ivp(lambda _, y: -np.maximum(y, 0.0) ** n, (0, 1.5), [0.8], t_eval=tau,
                    rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(c, sol.y[0], rtol=1e-8, atol=1e-12)


def test_falsified_kinetics_recovers_intrinsic_when_kinetic(tmp_path):
    # kinetic regime (no film, no pores): apparent Ea and order equal the true ones within
    # their intervals (recovery of a known truth)
    rows = [(f"K{i}", T, 600, 30, 2, c0) for i, (T, c0) in enumerate(
        [(T, c0) for T in (40, 55, 70) for c0 in (0.3, 0.8)])]
    study, _ = write_campaign(tmp_path, rows, film="none", order=1.5, sigma=1.0)
    res = falsified_kinetics(study, intrinsic_activation_energy=6e4, intrinsic_order=1.5)
    d = res.to_dict()
    lo, hi = d["apparent_activation_energy_ci95"]
    assert lo < 6e4 < hi
    assert abs(d["apparent_order"] - 1.5) < 3 * d["apparent_order_stderr"]
    assert not d["warnings"]
    assert any("they agree" in s for s in d["summary"])


# ----------------------------------------------------------------------------- synthetic campaigns
def test_film_campaign_labels_and_model_free_conclusions(film_campaign):
    study, truth, true_runs, result = film_campaign
    diag = diagnose(study, result)
    # labels from the fit equal the true ones wherever the truth is not on a boundary
    for rid, tr in true_runs.items():
        shares = tr["shares"].values()
        near_kinetic = abs(tr["shares"]["reaction"] - 0.95) < 0.02
        if min(abs(s - 0.5) for s in shares) > 0.05 and not near_kinetic:
            assert diag.runs[rid]["regime"] == tr["regime"], rid
    assert diag.runs["R06"]["regime"] == "film"  # 70 degC, 200 rpm, 300 um
    # intrinsic flags equal the true ones wherever the true Carberry number is not within
    # 30 % of its limit (a fitted kc a few per cent off moves runs near the limit)
    for rid, tr in true_runs.items():
        limit = tr["thresholds"]["carberry"]
        if not 0.7 < tr["carberry"] / limit < 1.3:
            assert (rid in diag.intrinsic_runs) == tr["intrinsic"], rid
    speed_tests = [t for t in diag.model_free if t.factor == "stirrer_speed"]
    large = [t for t in speed_tests if t.fixed["particle_diameter"] > 1e-4]
    assert large and all(t.different and t.direction == "faster at higher" for t in large)
    assert all("film resistance at the lower speed" in t.conclusion for t in large)
    size_low_speed = [t for t in diag.model_free if t.factor == "particle_diameter"
                      and t.fixed["stirrer_speed"] < 5]
    assert size_low_speed and all(t.different for t in size_low_speed)
    # the cross-reference with the speed test at the larger size says it is film
    assert all("found a film effect" in t.conclusion for t in size_low_speed)
    loading = [t for t in diag.model_free if t.factor == "catalyst_loading"]
    assert len(loading) == 1 and not loading[0].different
    assert "no difference in the rate per catalyst mass" in loading[0].conclusion
    assert loading[0].p_value > 0.05


def test_speed_without_effect_but_size_with_one(tmp_path):
    # the classic trap (common practice): a film coefficient
    # that does not change with agitation (Sh -> 2 regime, kc ~ 1/dp; invented) shows no speed
    # effect although the film limits; particle size does show it
    rows = _grid((70,), (300, 1200), (30, 300))
    study, truth = write_campaign(tmp_path, rows, kc_ref="1.2e-5 m/s", a=0.0, b=1.0)
    res = model_free_tests(study)
    speed = [t for t in res.tests if t.factor == "stirrer_speed"]
    size = [t for t in res.tests if t.factor == "particle_diameter"]
    assert speed and not any(t.different for t in speed)
    assert all("leaves the pores untested" in t.conclusion for t in speed)
    assert size and all(t.different and t.direction == "slower at higher" for t in size)
    assert all("holds only if the film coefficient does change" in t.conclusion for t in speed)


def test_pore_campaign_speed_no_effect_size_effect(tmp_path):
    # pore-limited, film negligible (invented truth): stirrer speed makes no difference,
    # particle size does, the cross-reference names pore diffusion, and the large particles
    # are labelled 'pore'
    rows = _grid((55, 70), (300, 1200), (30, 300))
    study, truth = write_campaign(tmp_path, rows, kc_ref="1e-3 m/s", De="5e-11 m^2/s")
    model = Model(ModelSpec.from_study(study), study)
    true_runs = run_table(model, truth)
    assert [true_runs[r]["regime"] for r in ("R01", "R02", "R03", "R04")] == [
        "kinetic", "pore", "kinetic", "pore"]
    diag = diagnose(study)
    speed = [t for t in diag.model_free if t.factor == "stirrer_speed"]
    size = [t for t in diag.model_free if t.factor == "particle_diameter"]
    assert speed and not any(t.different for t in speed)
    assert size and all(t.different for t in size)
    assert all("it is pore diffusion" in t.conclusion for t in size)
    for rid, tr in true_runs.items():
        assert diag.runs[rid]["regime"] == tr["regime"], rid
    # E_app of the large particles is lower than of the small ones (falsified by pores)
    assert any("changes with particle size" in w for w in diag.falsified.warnings)


def test_not_possible_names_the_missing_runs(tmp_path):
    # speed varies only together with particle size; loading never varies
    rows = [("A", 55, 300, 30, 2, 0.5), ("B", 55, 1200, 300, 2, 0.5), ("C", 70, 1200, 300, 2, 0.5)]
    study, _ = write_campaign(tmp_path, rows)
    res = model_free_tests(study)
    msgs = {n.factor: n.message for n in res.not_possible}
    assert "never alone" in msgs["stirrer_speed"] and "particle diameter" in msgs["stirrer_speed"]
    assert "2 g/L in every run" in msgs["catalyst_loading"]
    assert "repeat run 'C'" in msgs["catalyst_loading"] and "4 g/L" in msgs["catalyst_loading"]


# ----------------------------------------------------------------------------- posterior
def test_posterior_intervals_and_regime_probabilities(film_campaign):
    study, _, _, result = film_campaign
    model, theta = model_for_fit(study, result)
    cov = np.asarray(result.extras["covariance"])
    rng = np.random.default_rng(2)
    draws = rng.multivariate_normal(theta, cov, size=400)
    diag = diagnose(study, result, posterior=draws, n_draws=150, seed=4)
    assert 0 < diag.model["n_draws"] <= 150
    for r in diag.runs.values():
        probs = r["regime_probability"]
        assert sum(probs.values()) == pytest.approx(1.0)
        for crit in ("carberry", "mears", "effectiveness_factor"):
            lo, hi = r["intervals"][crit]
            assert lo <= r[crit] * (1 + 1e-9) + 1e-15 and r[crit] <= hi * (1 + 1e-9) + 1e-15
    assert diag.runs["R03"]["regime_probability"]["kinetic"] == 1.0  # Ca 0.3 %
    # a mapping of column -> draws gives the same matrix
    m2 = posterior_matrix(model, {c: draws[:, j] for j, c in enumerate(model.columns)})
    np.testing.assert_array_equal(m2, draws)
    # an object with names and draws (as the sampler's Posterior), error scale last
    from types import SimpleNamespace

    post = SimpleNamespace(names=(*model.columns[::-1], "sigma"),
                           draws=np.column_stack([draws[:, ::-1], np.ones(len(draws))]))
    np.testing.assert_array_equal(posterior_matrix(model, post), draws)
    with pytest.raises(StudyError, match="posterior draws must be a matrix"):
        posterior_matrix(model, draws[:, :2])
    with pytest.raises(StudyError, match="no draws of parameter 'k_ref'"):
        posterior_matrix(model, SimpleNamespace(names=("sigma",), draws=np.ones((3, 1))))


# ----------------------------------------------------------------------------- next runs
def test_next_runs_speed_meets_carberry_closed_form(film_campaign):
    # first order, no pores: Ca = k1/(kc a_m + k1) (series resistances, derived), so the
    # speed reaching Ca = 0.05 is N = N_ref (kc*/ (kc_ref (dp/dp_ref)^-b))^(1/a) with
    # kc* = k1 (1 - Ca)/(Ca a_m) and k1 = k(T)/C_ref
    study, truth, _, _ = film_campaign
    model = Model(ModelSpec.from_study(study), study)
    recs = next_runs(model, truth)
    assert [r.temperature for r in recs] == pytest.approx([313.15, 343.15])
    k_ref, Ea, _, kc_ref, a, b = truth
    branches = set()
    for rec in recs:
        k1 = k_ref * math.exp(-Ea / GAS_CONSTANT * (1 / rec.temperature - 1 / 328.15)) / 1000.0
        need = k1 * (1 - 0.05) / 0.05  # kc a_m at Ca = 0.05
        dp = 3e-4  # the campaign's largest particles
        N = 10.0 * (need / (kc_ref * (dp / 1e-4) ** (-b) * 6.0 / (1500.0 * dp))) ** (1 / a)
        if N <= 50.0:
            branches.add("speed")
            assert rec.particle_diameter == pytest.approx(dp)
            assert rec.stirrer_speed == pytest.approx(N, rel=1e-6)
        else:
            branches.add("size")
            # at 3000 rpm: kc_ref 5^a (dp/dp_ref)^-b 6/(rho dp) = need, solved for dp
            dp_star = (kc_ref * 5.0**a * 1e-4**b * 6.0 / (1500.0 * need)) ** (1 / (1 + b))
            assert rec.stirrer_speed == pytest.approx(50.0)
            assert rec.particle_diameter == pytest.approx(dp_star, rel=1e-6)
            assert "no speed up to 3000 rpm suffices" in rec.note
        assert rec.carberry == pytest.approx(0.05, rel=1e-5)
    assert branches == {"speed", "size"}


def test_next_runs_says_when_no_speed_suffices(tmp_path):
    rows = _grid((70,), (300, 1200), (300,))
    study, truth = write_campaign(tmp_path, rows, kc_ref="3e-6 m/s")
    model = Model(ModelSpec.from_study(study), study)
    (rec,) = next_runs(model, truth)
    assert "no speed up to 3000 rpm suffices" in rec.note
    assert rec.particle_diameter is not None and rec.particle_diameter < 3e-4
    assert rec.carberry < 0.05 * (1 + 1e-6)


# ----------------------------------------------------------------------------- outputs and CLI
def test_diagnosis_json_shape(film_campaign, tmp_path):
    study, _, _, result = film_campaign
    diag = diagnose(study, result)
    path = diag.save(tmp_path / "out")
    data = json.loads(path.read_text())
    for key in ("model_free", "not_possible", "runs", "intrinsic_runs", "falsified", "next_runs",
                "thresholds", "sources"):
        assert key in data
    t = data["model_free"][0]
    assert set(t) >= {"factor", "runs", "values", "fixed", "test", "statistic", "df", "p_value",
                      "different", "conclusion"}
    assert isinstance(t["different"], bool)
    r = data["runs"]["R01"]
    assert set(r) >= {"thiele_modulus", "effectiveness_factor", "weisz_prater", "mears",
                      "carberry", "regime", "shares", "intrinsic"}
    assert set(r["shares"]) == {"film", "pore", "reaction"}
    f = data["falsified"]
    assert set(f) >= {"intrinsic_activation_energy", "apparent_activation_energy",
                      "apparent_activation_energy_ci95", "per_temperature", "intrinsic_order",
                      "apparent_order", "warnings"}
    assert {"temperature", "k_apparent"} <= set(f["per_temperature"][0])
    assert set(data["next_runs"][0]) >= {"temperature", "stirrer_speed", "particle_diameter",
                                        "note"}
    # sphere: Psi_L where the first-order eta is 0.95 (closed form of Thiele 1939), Psi_R/9
    assert data["thresholds"]["weisz_prater"] == pytest.approx(0.7671 / 9, abs=3e-5)
    assert "Mears 1971" in data["sources"]["mears"]
    assert not list((tmp_path / "out").glob(".*.tmp"))  # atomic write left nothing behind
    text = diag.report()
    assert "1. from the data alone" in text and "4. next runs" in text


def _parser():
    p = argparse.ArgumentParser()
    add_diagnose_arguments(p)
    return p


def test_diagnose_command_with_saved_fit(film_campaign, tmp_path, capsys):
    study, _, _, result = film_campaign
    result.save(tmp_path / "fit")
    loaded = FitResult.load(tmp_path / "fit")
    args = _parser().parse_args([str(study.path), "--fit", str(tmp_path / "fit"), "--out",
                                 str(tmp_path / "diag")])
    assert run_diagnose_command(args) == 0
    data = json.loads((tmp_path / "diag" / "diagnosis.json").read_text())
    direct = diagnose(study, loaded).to_dict()
    assert data["runs"] == direct["runs"]
    assert "transport diagnosis" in capsys.readouterr().out
    assert "regime_probability" not in data["runs"]["R01"]


def test_diagnose_command_reads_posterior_draws_of_the_fit_folder(film_campaign, tmp_path):
    # the draws table as the sampler writes it: step, walker, one column per quantity (here
    # with an error scale that is not a model column), log_prob
    import pandas as pd

    study, _, _, result = film_campaign
    result.save(tmp_path / "fit")
    model, theta = model_for_fit(study, result)
    rng = np.random.default_rng(8)
    draws = rng.multivariate_normal(theta, np.asarray(result.extras["covariance"]), size=60)
    frame = pd.DataFrame(draws, columns=list(model.columns))
    frame.insert(0, "walker", np.arange(60) % 12)
    frame.insert(0, "step", np.arange(60) // 12)
    frame["sigma"] = 2.0
    frame["log_prob"] = -1.0
    frame.to_csv(tmp_path / "fit" / "posterior_draws.csv", index=False)
    args = _parser().parse_args([str(study.path), "--fit", str(tmp_path / "fit"), "--out",
                                 str(tmp_path / "diag"), "--n-draws", "40"])
    assert run_diagnose_command(args) == 0
    data = json.loads((tmp_path / "diag" / "diagnosis.json").read_text())
    assert data["model"]["n_draws"] == 40
    assert set(data["runs"]["R06"]["intervals"]) >= {"carberry", "effectiveness_factor"}
    assert sum(data["runs"]["R06"]["regime_probability"].values()) == pytest.approx(1.0)


@pytest.mark.parametrize(("argv", "match"), [
    (["--fit", "nowhere"], "no results at"),
    (["--alpha", "1.5"], "alpha"),
    (["--carberry", "-1"], "--carberry must be a number > 0"),
    (["--max-speed", "3000 kg"], "--max-speed"),
])
def test_diagnose_command_bad_input(film_campaign, tmp_path, argv, match):
    study, _, _, result = film_campaign
    result.save(tmp_path / "fit")
    base = [str(study.path), "--out", str(tmp_path / "d")]
    if "--fit" not in argv:
        base += ["--fit", str(tmp_path / "fit")]
    with pytest.raises(StudyError, match=match):
        run_diagnose_command(_parser().parse_args(base + [
            str(tmp_path / a) if a == "nowhere" else a for a in argv]))


def test_fit_of_another_model_is_rejected(film_campaign, tmp_path):
    study, _, _, result = film_campaign
    params = {k: v for k, v in result.parameters.items() if k != "kc_ref"}
    other = FitResult(study=result.study, model=result.model, parameters=params,
                      runs=result.runs, fit=result.fit, correlation=result.correlation)
    with pytest.raises(StudyError, match="no estimate of 'kc_ref'"):
        diagnose(study, other)


def test_thresholds_change_the_intrinsic_set(film_campaign):
    study, _, _, result = film_campaign
    strict = diagnose(study, result, thresholds=Thresholds(carberry=0.001))
    loose = diagnose(study, result)
    assert set(strict.intrinsic_runs) < set(loose.intrinsic_runs)
