"""Checks of the posterior sampler, its priors, diagnostics, checkpoints and result object.

Outside references named beside each check:
- Gelman, Carlin, Stern, Dunson, Vehtari & Rubin, *Bayesian Data Analysis*, 3rd ed. (2013),
  ch. 14 (linear regression: flat prior on beta with known sigma gives
  beta | y ~ N(beta_ols, sigma^2 (X'X)^-1); with p(beta, sigma^2) ~ sigma^-2 it gives a
  multivariate t with n - k degrees of freedom, sigma^2 | y ~ Inv-chi^2(n - k, s^2)), and
  sec. 14.8 (a normal prior on a coefficient acts as one more observation); section numbers
  from memory.
- Talts, Betancourt, Simpson, Vehtari & Gelman (2018), "Validating Bayesian inference
  algorithms with simulation-based calibration", arXiv:1804.06788 (ranks of the true value
  among posterior draws are uniform).
- Sokal (1997), "Monte Carlo methods in statistical mechanics" (AR(1) integrated
  autocorrelation time (1 + rho) / (1 - rho); a textbook result, from memory).
- scipy.stats (reference library) for densities, truncated normals and quantiles.
"""

from __future__ import annotations

import json
import math
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, stats

from kinfit.errors import ConvergenceWarning, StudyError
from kinfit.estimate import convergence as cv
from kinfit.estimate.checkpoint import load_checkpoint
from kinfit.estimate.priors import Prior, from_spec, prior_table
from kinfit.estimate.problem import ErrorModel, Problem, Space
from kinfit.estimate.sampling import sample_problem
from kinfit.estimate.log_posterior import LogPosterior


# -- helpers ---------------------------------------------------------------------------------
def _quiet(**kwargs):
    """sample_problem with warnings silenced (for runs whose verdict a test does not check)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return sample_problem(**kwargs)


def _linear_problem(n=30, sigma=0.1, seed=0, error_model=None):
    """Quadratic regression y = X beta + noise (invented data from stated beta)."""
    rng = np.random.default_rng(seed)
    x = np.linspace(0.0, 1.0, n)
    X = np.c_[np.ones(n), x, x**2]
    beta = np.array([1.0, 2.0, -1.0])
    y = X @ beta + sigma * rng.standard_normal(n)
    space = Space(("b0", "b1", "b2"), np.full(3, -np.inf), np.full(3, np.inf), ("none",) * 3)
    prob = Problem(
        lambda B: B @ X.T, y, space, np.zeros(3), error_model=error_model or ErrorModel()
    )
    beta_hat = np.linalg.lstsq(X, y, rcond=None)[0]
    return prob, X, y, beta_hat


#: draws per effectively independent draw assumed by :func:`_mc_close`: a ceiling, well
#: above the integrated autocorrelation times of a few tens of steps that affine-invariant
#: ensembles show on low-dimensional Gaussian targets (Goodman & Weare 2010; Foreman-Mackey
#: et al. 2013), each step holding one draw per walker
DRAWS_PER_INDEPENDENT = 100.0


def _mc_close(post, mean_ref, sd_ref, k=4.5):
    """Posterior means and sds within k Monte Carlo standard errors, with the errors from
    the known posterior sd and a conservative floor on the effective sample size (the number
    of draws over :data:`DRAWS_PER_INDEPENDENT`), not from the sampler's own ESS."""
    d = post.draws[:, : len(mean_ref)]
    ess = max(d.shape[0] / DRAWS_PER_INDEPENDENT, 1.0)
    mean_err = sd_ref / np.sqrt(ess)
    sd_err = sd_ref / np.sqrt(2.0 * ess)  # se of a normal sd, (common practice)
    np.testing.assert_array_less(np.abs(d.mean(axis=0) - mean_ref), k * mean_err)
    np.testing.assert_array_less(np.abs(d.std(axis=0, ddof=1) - sd_ref), k * sd_err)


T_DECAY = np.array([0.0, 1, 2, 4, 6, 8, 12, 16, 20, 30])


def _decay(X):
    """First-order decay C = C0 exp(-k t), parameter columns (k, C0)."""
    return X[:, 1:2] * np.exp(-X[:, 0:1] * T_DECAY)


DECAY_SPACE = Space(("k", "C0"), np.array([0.0, 0.0]), np.array([np.inf, np.inf]), ("log", "none"))


@pytest.fixture(scope="module")
def linear_known_sigma():
    prob, X, y, beta_hat = _linear_problem()
    post = sample_problem(
        prob, start=beta_hat, scale_start=[0.1], sample_scale=False, seed=11, progress=False
    )
    return prob, X, beta_hat, post


# -- priors ----------------------------------------------------------------------------------
def test_prior_densities_match_scipy():
    # reference: scipy.stats.norm, lognorm (s = sd_log, scale = median), uniform, loguniform
    x = np.array([0.3, 1.0, 2.5, 7.0])
    np.testing.assert_allclose(Prior.normal(2.0, 1.5).logpdf(x), stats.norm(2.0, 1.5).logpdf(x))
    np.testing.assert_allclose(
        Prior.lognormal(median=1.2, sd_log=0.7).logpdf(x),
        stats.lognorm(s=0.7, scale=1.2).logpdf(x),
    )
    np.testing.assert_allclose(
        Prior.uniform(0.0, 4.0).logpdf(x[:3]), stats.uniform(0, 4).logpdf(x[:3])
    )
    np.testing.assert_allclose(
        Prior.loguniform(0.1, 10.0).logpdf(x), stats.loguniform(0.1, 10.0).logpdf(x)
    )
    assert Prior.uniform(0.0, 4.0).logpdf(5.0) == -np.inf
    assert Prior.lognormal(1.0, 0.5).logpdf(-1.0) == -np.inf
    assert not Prior.uniform().is_proper and Prior.uniform().logpdf(1e300) == 0.0


def test_prior_truncated_draws_match_scipy():
    # reference: scipy.stats.truncnorm; Kolmogorov-Smirnov test of 4000 draws
    rng = np.random.default_rng(3)
    draws = Prior.normal(1.0, 2.0).rvs(rng, 4000, lower=0.5, upper=4.0)
    ref = stats.truncnorm((0.5 - 1.0) / 2.0, (4.0 - 1.0) / 2.0, loc=1.0, scale=2.0)
    assert stats.kstest(draws, ref.cdf).pvalue > 1e-3
    ln = Prior.lognormal(median=2.0, sd_log=0.4).rvs(rng, 4000)
    assert stats.kstest(ln, stats.lognorm(s=0.4, scale=2.0).cdf).pvalue > 1e-3
    with pytest.raises(StudyError, match="improper"):
        Prior.uniform(0.0).rvs(rng, 3)


@pytest.mark.parametrize(
    ("spec", "expected"),
    [
        ({"kind": "normal", "mean": 60000, "sd": 5000}, Prior.normal(60000.0, 5000.0)),
        ("normal(60000, 5000)", Prior.normal(60000.0, 5000.0)),
        ("lognormal(1e-9, 0.5)", Prior.lognormal(median=1e-9, sd_log=0.5)),
        ("lognormal(mu=-2, sd_log=0.5)", Prior.lognormal(mu=-2.0, sd_log=0.5)),
        ({"kind": "lognormal", "median": 2.0, "sd_log": 0.1}, Prior.lognormal(2.0, 0.1)),
        ("uniform", Prior.uniform()),
        ("uniform(0, 2)", Prior.uniform(0.0, 2.0)),
        ("loguniform(1e-6, 1)", Prior.loguniform(1e-6, 1.0)),
        (None, Prior.uniform()),
    ],
)
def test_prior_spec_forms(spec, expected):
    p = from_spec(spec, "k_ref")
    assert p.kind == expected.kind
    assert p.a == pytest.approx(expected.a, rel=1e-12) and p.b == pytest.approx(expected.b)
    assert from_spec(str(p), "k_ref").kind == p.kind  # the text form parses back


@pytest.mark.parametrize(
    ("spec", "message"),
    [
        (
            "gamma(1, 2)",
            r"parameter 'k_ref': prior kind 'gamma' is not recognised; use one of "
            r"\['uniform', 'loguniform', 'normal', 'lognormal'\]",
        ),
        ({"kind": "beta"}, r"parameter 'k_ref'.*'beta' is not recognised.*'lognormal'"),
        ("normal(1)", r"parameter 'k_ref': prior 'normal' needs 'sd'"),
        ("normal(1, -2)", r"needs sd > 0, got -2"),
        ({"kind": "normal", "mean": 1, "sd": 1, "scale": 2}, r"does not take \['scale'\]"),
        ("lognormal(-1, 0.5)", r"needs median > 0"),
        ("uniform(3, 1)", r"needs min < max, got min = 3, max = 1"),
        ({"mean": 1}, r"has no 'kind'"),
        ("normal(60 kJ/mol, 5)", r"'mean' is '60 kJ/mol', not a number"),
    ],
)
def test_prior_spec_errors_name_the_parameter(spec, message):
    with pytest.raises(StudyError, match=message):
        from_spec(spec, "k_ref")


def test_prior_spec_unit_strings_and_table_names():
    p = from_spec(
        {"kind": "normal", "mean": "60 kJ/mol", "sd": "5 kJ/mol"},
        "activation_energy",
        to_si=lambda s: float(s.split()[0]) * 1e3,
    )
    assert (p.a, p.b) == (60000.0, 5000.0)
    with pytest.raises(StudyError, match=r"prior given for \['k_rf'\].*\['k_ref', 'order'\]"):
        prior_table(("k_ref", "order"), {"k_rf": "normal(1, 1)"})


# -- convergence diagnostics -----------------------------------------------------------------
def test_autocorrelation_time_of_ar1_and_ess_of_iid():
    # AR(1) x_t = rho x_{t-1} + e_t has tau = (1 + rho) / (1 - rho) = 19 for rho = 0.9 (Sokal
    # 1997; from memory). Independent draws have ESS close to their number (definition).
    rng = np.random.default_rng(7)
    n, w, rho = 6000, 16, 0.9
    e = rng.standard_normal((n, w, 1))
    x = np.empty_like(e)
    x[0] = e[0]
    for i in range(1, n):
        x[i] = rho * x[i - 1] + math.sqrt(1 - rho**2) * e[i]
    assert cv.autocorr_time(x)[0] == pytest.approx(19.0, rel=0.15)
    iid = rng.standard_normal((1000, 8, 2))
    assert np.all(np.abs(cv.ess_bulk(iid) / 8000 - 1) < 0.1)
    assert np.all(cv.split_rhat(iid) < 1.01)
    # a central 90 % interval of a normal is its HDI: +-1.6449 sd (scipy.stats.norm.ppf(0.95));
    # the default probability is 90 %, that of the central 5-95 % interval reported beside it
    assert cv.HDI_PROB == 0.90
    h = cv.hdi(rng.standard_normal((40000, 2)))
    np.testing.assert_allclose(h, [[-1.6449, 1.6449]] * 2, atol=0.05)
    np.testing.assert_allclose(h[:, 1] - h[:, 0], 2 * 1.6449, atol=0.04)


def test_rhat_flags_a_walker_that_disagrees():
    rng = np.random.default_rng(2)
    x = rng.standard_normal((2000, 8, 1))
    x[:, 0] += 3.0
    d = cv.diagnose(x, names=["a"], burn_in=0, acceptance_fraction=0.3)
    assert not d.converged and d.rhat[0] > 1.01
    assert any("R-hat of a is not below" in r for r in d.reasons)


# -- posterior against closed forms -----------------------------------------------------------
def test_linear_gaussian_known_sigma_matches_analytic_posterior(linear_known_sigma):
    # BDA3 ch. 14: flat prior, known sigma -> beta | y ~ N(beta_ols, sigma^2 (X'X)^-1)
    prob, X, beta_hat, post = linear_known_sigma
    cov = 0.1**2 * np.linalg.inv(X.T @ X)
    assert post.converged, post.verdict
    _mc_close(post, beta_hat, np.sqrt(np.diag(cov)))
    emp = np.corrcoef(post.draws.T)
    ref = cov / np.sqrt(np.outer(np.diag(cov), np.diag(cov)))
    np.testing.assert_allclose(emp, ref, atol=0.03)
    s = post.summary()["b1"]
    z = stats.norm.ppf(0.95) * math.sqrt(cov[1, 1])
    tol = 5 * math.sqrt(cov[1, 1]) / math.sqrt(post.ess[1])
    assert s["q05"] == pytest.approx(beta_hat[1] - z, abs=tol)
    assert s["q95"] == pytest.approx(beta_hat[1] + z, abs=tol)


def test_stretch_move_also_matches_the_analytic_posterior():
    # BDA3 ch. 14, as above, with emcee's stretch move (Goodman & Weare 2010) instead of DE
    prob, X, y, beta_hat = _linear_problem()
    post = sample_problem(prob, start=beta_hat, scale_start=[0.1], sample_scale=False, seed=11,
                          progress=False, moves="stretch")
    assert post.converged, post.verdict
    assert post.settings.moves == "stretch"
    _mc_close(post, beta_hat, 0.1 * np.sqrt(np.diag(np.linalg.inv(X.T @ X))))


@pytest.mark.parametrize("moves", ["de", "de-laplace"])
def test_moves_reproduce_a_correlated_eight_dimensional_gaussian(moves):
    # analytic target: y = I beta + e with a correlated design gives a Gaussian posterior of
    # known covariance (BDA3 ch. 14); 8 dimensions as in the demo campaign. Guards against a
    # move that narrows the posterior (emcee's DESnookerMove gave sds of 0.89, see MOVES), for
    # DE alone and for DE mixed with the independence move (whose Laplace proposal is exact
    # in shape here, so a wrong proposal-density ratio would show at once).
    rng = np.random.default_rng(3)
    n, p = 60, 8
    A = rng.standard_normal((n, p)) @ np.linalg.cholesky(0.6 * np.eye(p) + 0.4)
    beta = np.linspace(-1.0, 1.0, p)
    y = A @ beta + 0.05 * rng.standard_normal(n)
    space = Space(tuple(f"b{i}" for i in range(p)), np.full(p, -np.inf), np.full(p, np.inf),
                  ("none",) * p)
    prob = Problem(lambda B: B @ A.T, y, space, np.zeros(p))
    beta_hat = np.linalg.lstsq(A, y, rcond=None)[0]
    post = sample_problem(prob, start=beta_hat, scale_start=[0.05], sample_scale=False,
                          seed=5, progress=False, moves=moves)
    assert post.converged, post.verdict
    assert post.settings.moves == moves
    assert ("independence move" in post.settings.move_note) == (moves == "de-laplace")
    cov = 0.05**2 * np.linalg.inv(A.T @ A)
    _mc_close(post, beta_hat, np.sqrt(np.diag(cov)))
    ref = cov / np.sqrt(np.outer(np.diag(cov), np.diag(cov)))
    np.testing.assert_allclose(np.corrcoef(post.draws.T), ref, atol=0.04)


def test_linear_gaussian_unknown_sigma_gives_student_t():
    # BDA3 sec. 14.2: p(beta, sigma^2) ~ sigma^-2 (our default p(sigma) ~ 1/sigma) gives
    # beta | y ~ t_{n-k}(beta_ols, s^2 (X'X)^-1) and sigma^2 | y ~ Inv-chi^2(n - k, s^2)
    prob, X, y, beta_hat = _linear_problem(n=12, sigma=0.2, seed=4)
    n, k = X.shape
    s2 = float(np.sum((y - X @ beta_hat) ** 2) / (n - k))
    post = sample_problem(prob, start=beta_hat, seed=5, progress=False)
    assert post.names == ("b0", "b1", "b2", "sigma") and post.converged, post.verdict
    sd_t = np.sqrt(np.diag(s2 * np.linalg.inv(X.T @ X)) * (n - k) / (n - k - 2))
    _mc_close(post, beta_hat, sd_t, k=5.0)
    sig2 = post.draws[:, 3] ** 2
    ref = stats.invgamma((n - k) / 2, scale=(n - k) * s2 / 2)  # Inv-chi^2(nu, s^2)
    for q in (0.1, 0.5, 0.9):
        # Monte Carlo se of a quantile: sqrt(q(1-q)/ESS) / density (common practice)
        se = math.sqrt(q * (1 - q) / post.ess[3]) / ref.pdf(ref.ppf(q))
        assert np.quantile(sig2, q) == pytest.approx(ref.ppf(q), abs=5 * se)


def test_normal_prior_gives_conjugate_posterior():
    # BDA3 sec. 14.8 / sec. 2.5: a N(m0, s0^2) prior on b1 with known sigma adds precision
    # 1/s0^2 to that coefficient: cov = (X'X/sigma^2 + diag(0, 1/s0^2, 0))^-1,
    # mean = cov (X'y/sigma^2 + (0, m0/s0^2, 0))
    prob, X, y, beta_hat = _linear_problem()
    m0, s0, sig = 1.0, 0.15, 0.1
    prec = X.T @ X / sig**2 + np.diag([0.0, 1 / s0**2, 0.0])
    cov = np.linalg.inv(prec)
    mean = cov @ (X.T @ y / sig**2 + np.array([0.0, m0 / s0**2, 0.0]))
    assert abs(mean[1] - beta_hat[1]) > 3 * math.sqrt(cov[1, 1])  # the prior matters here
    post = sample_problem(
        prob,
        start=beta_hat,
        priors={"b1": f"normal({m0}, {s0})"},
        scale_start=[sig],
        sample_scale=False,
        seed=8,
        progress=False,
    )
    assert post.settings.priors["b1"] == "normal(1, 0.15)"
    _mc_close(post, mean, np.sqrt(np.diag(cov)))


def test_log_transform_keeps_the_prior_flat_in_physical_units():
    # y = a x with a log-transformed and a flat prior on a > 0: the posterior of a is
    # N(a_ols, sigma^2 / x'x) truncated at 0 (reference: scipy.stats.truncnorm). Without the
    # log-Jacobian the sampler would target that density times 1/a and its mean would be low.
    x = np.linspace(0.1, 1.0, 6)
    y = 0.5 * x + np.array([0.05, -0.1, 0.08, -0.02, 0.1, -0.06])
    sig = 0.4
    space = Space(("a",), np.array([0.0]), np.array([np.inf]), ("log",))
    prob = Problem(lambda A: A[:, :1] * x, y, space, [0.5])
    a_hat, sd = float(x @ y / (x @ x)), sig / math.sqrt(x @ x)
    ref = stats.truncnorm(-a_hat / sd, np.inf, loc=a_hat, scale=sd)
    post = sample_problem(
        prob, start=[a_hat], scale_start=[sig], sample_scale=False, seed=3, progress=False
    )
    assert post.converged, post.verdict
    _mc_close(post, np.array([ref.mean()]), np.array([ref.std()]))


def test_simulation_based_calibration_first_order_decay():
    # Talts et al. (2018), arXiv:1804.06788, Algorithm 1: draw (k, C0) from the prior, simulate
    # data, rank the truth among L = 99 posterior draws; ranks are uniform on 0..L when the
    # sampler is right. 30 replicates, 5 bins, chi-square test with a lenient threshold (0.01).
    # Measured with this seed: p = 0.45 (k), 0.62 (C0); a sampler whose noise scale is 0.4x
    # the truth gave p = 0.0012 and 0.015. tests/benchmarks/bench_sbc.py runs 200+ replicates.
    rng = np.random.default_rng(2024)
    pk, pc, sig = Prior.lognormal(median=0.1, sd_log=0.3), Prior.normal(1.0, 0.1), 0.03
    L, reps, bins = 99, 30, 5
    ranks = np.empty((reps, 2), dtype=int)
    for r in range(reps):
        truth = np.array([pk.rvs(rng, 1)[0], pc.rvs(rng, 1, lower=0.0)[0]])
        y = _decay(truth[None])[0] + sig * rng.standard_normal(T_DECAY.size)
        prob = Problem(_decay, y, DECAY_SPACE, np.array([0.1, 1.0]))
        fit = optimize.least_squares(
            lambda p, y=y: _decay(p[None])[0] - y,
            [0.1, 1.0],
            bounds=([1e-9, 0.0], [np.inf, np.inf]),
        )
        post = _quiet(
            problem=prob,
            start=fit.x,
            priors={"k": pk, "C0": pc},
            scale_start=[sig],
            sample_scale=False,
            n_walkers=16,
            max_steps=1000,
            seed=r,
            progress=False,
            stop_rule="autocorrelation",
            tau_multiple=30,
        )
        pick = post.draws[np.linspace(0, post.n_draws - 1, L).astype(int)]
        ranks[r] = np.sum(pick < truth, axis=0)
    for j in range(2):
        counts = np.histogram(ranks[:, j], bins=bins, range=(0, L + 1))[0]
        assert stats.chisquare(counts).pvalue > 0.01, (j, counts)


# -- determinism, checkpoints, interruption ----------------------------------------------------
class _Interrupting:
    """A predictor that raises ``exc`` at its ``at``-th call (counting every call)."""

    def __init__(self, predict, at, exc):
        self.predict, self.at, self.exc, self.calls = predict, at, exc, 0

    def __call__(self, X):
        self.calls += 1
        if self.calls == self.at:
            raise self.exc
        return self.predict(X)


def _decay_problem(predict=_decay):
    y = _decay(np.array([[0.1, 1.0]]))[0] + 0.03 * np.cos(np.arange(T_DECAY.size))
    return Problem(predict, y, DECAY_SPACE, np.array([0.1, 1.0]))


FIXED_LENGTH = dict(
    scale_start=[0.03],
    sample_scale=False,
    n_walkers=10,
    max_steps=600,
    chunk=200,
    seed=42,
    progress=False,
    stop_rule="autocorrelation",
    tau_multiple=1e6,
)


@pytest.fixture(scope="module")
def reference_chain():
    return _quiet(problem=_decay_problem(), start=[0.1, 1.0], **FIXED_LENGTH)


def test_same_seed_same_chain_for_any_chunk(reference_chain):
    again = _quiet(problem=_decay_problem(), start=[0.1, 1.0], **{**FIXED_LENGTH, "chunk": 77})
    np.testing.assert_array_equal(again.draws, reference_chain.draws)
    other = _quiet(problem=_decay_problem(), start=[0.1, 1.0], **{**FIXED_LENGTH, "seed": 43})
    assert not np.array_equal(other.draws, reference_chain.draws)
    assert reference_chain.chain_shape == (600, 10, 2)
    assert reference_chain.settings.seed == 42
    # seed=None draws fresh entropy and records it: the recorded seed repeats the run
    short = {**FIXED_LENGTH, "max_steps": 50}
    fresh = _quiet(problem=_decay_problem(), start=[0.1, 1.0], **{**short, "seed": None})
    repeat = _quiet(
        problem=_decay_problem(), start=[0.1, 1.0], **{**short, "seed": fresh.settings.seed}
    )
    np.testing.assert_array_equal(fresh.draws, repeat.draws)


@pytest.mark.parametrize("at", [501, 502])  # a first and a second half-step of the stretch move
def test_interrupted_run_resumes_to_the_identical_chain(tmp_path, reference_chain, at):
    ckpt = tmp_path / "chain.npz"
    stopper = _Interrupting(_decay, at, KeyboardInterrupt())
    with pytest.warns(ConvergenceWarning, match="interrupted"):
        part = sample_problem(
            _decay_problem(stopper), start=[0.1, 1.0], checkpoint=ckpt, **FIXED_LENGTH
        )
    assert part.interrupted and not part.converged and part.settings.stopped_by == "interrupted"
    saved = load_checkpoint(ckpt).n_steps
    assert 200 < saved < 600 and part.chain_shape[0] == saved
    full = _quiet(
        problem=_decay_problem(), start=[0.1, 1.0], checkpoint=ckpt, resume=True, **FIXED_LENGTH
    )
    assert full.settings.resumed_from == saved and full.chain_shape == (600, 10, 2)
    assert not full.interrupted
    np.testing.assert_array_equal(full.draws, reference_chain.draws)
    np.testing.assert_array_equal(full.log_prob, reference_chain.log_prob)
    assert full.acceptance_fraction == reference_chain.acceptance_fraction
    assert [p.name for p in tmp_path.iterdir()] == ["chain.npz"]  # no temporary file left


def test_error_keeps_the_checkpoint_and_says_so(tmp_path, reference_chain):
    class Boom(Exception):
        pass

    ckpt = tmp_path / "run.npz"
    with pytest.raises(Boom) as info:
        _quiet(
            problem=_decay_problem(_Interrupting(_decay, 700, Boom("solver died"))),
            start=[0.1, 1.0],
            checkpoint=ckpt,
            **FIXED_LENGTH,
        )
    assert "resume=True" in " ".join(info.value.__notes__)
    full = _quiet(
        problem=_decay_problem(), start=[0.1, 1.0], checkpoint=ckpt, resume=True, **FIXED_LENGTH
    )
    np.testing.assert_array_equal(full.draws, reference_chain.draws)


def test_shorter_run_extended_by_resume(tmp_path, reference_chain):
    ckpt = tmp_path / "c.npz"
    short = _quiet(
        problem=_decay_problem(),
        start=[0.1, 1.0],
        checkpoint=ckpt,
        **{**FIXED_LENGTH, "max_steps": 250},
    )
    assert short.chain_shape[0] == 250 and short.settings.stopped_by == "max_steps"
    longer = _quiet(
        problem=_decay_problem(), start=[0.1, 1.0], checkpoint=ckpt, resume=True, **FIXED_LENGTH
    )
    np.testing.assert_array_equal(longer.draws, reference_chain.draws)
    # a checkpoint from another run (other seed, other data) is refused, naming what differs
    with pytest.raises(StudyError, match=r"different run \(seed: checkpoint 42, now 7"):
        sample_problem(
            _decay_problem(),
            start=[0.1, 1.0],
            checkpoint=ckpt,
            resume=True,
            **{**FIXED_LENGTH, "seed": 7},
        )
    other = Problem(_decay, _decay_problem().y * 1.01, DECAY_SPACE, [0.1, 1.0])
    with pytest.raises(StudyError, match="problem: checkpoint"):
        sample_problem(other, start=[0.1, 1.0], checkpoint=ckpt, resume=True, **FIXED_LENGTH)
    with pytest.raises(StudyError, match='moves: checkpoint "de-laplace", now "stretch"'):
        sample_problem(_decay_problem(), start=[0.1, 1.0], checkpoint=ckpt, resume=True,
                       moves="stretch", **FIXED_LENGTH)


def test_short_chain_is_flagged_unconverged():
    with pytest.warns(ConvergenceWarning, match="not converged"):
        post = sample_problem(
            _decay_problem(),
            start=[0.1, 1.0],
            scale_start=[0.03],
            sample_scale=False,
            n_walkers=8,
            max_steps=60,
            seed=1,
            progress=False,
        )
    assert not post.converged and post.settings.stopped_by == "max_steps"
    assert any("raise max_steps" in r for r in post.reasons)
    assert post.verdict.startswith("not converged:")


# -- target, options, result object ------------------------------------------------------------
def test_non_finite_predictions_give_minus_infinity():
    def fragile(X):
        f = _decay(X)
        f[X[:, 0] > 0.12] = np.nan  # the "solver" fails for k > 0.12 1/s
        return f

    prob = _decay_problem(fragile)
    target = LogPosterior(
        prob, (Prior.uniform(), Prior.uniform()), sample_scale=False, scale_values={"sigma": 0.03}
    )
    u = target.to_internal(np.array([[0.1, 1.0], [0.13, 1.0], [0.1, -1.0]]))
    lp = target(u)
    assert np.isfinite(lp[0]) and lp[1] == -np.inf and lp[2] == -np.inf
    post = _quiet(
        problem=prob,
        start=[0.1, 1.0],
        scale_start=[0.3],
        sample_scale=False,
        max_steps=400,
        seed=2,
        progress=False,
    )
    assert post.draws[:, 0].max() <= 0.12


def test_option_and_prior_errors():
    prob = _decay_problem()
    with pytest.raises(
        StudyError,
        match=r"'n_walkers' option of sample_problem\(\) must be an "
        r"int in \[4, inf\)\. Got 3 instead",
    ):
        sample_problem(prob, start=[0.1, 1.0], n_walkers=3, sample_scale=False, progress=False)
    with pytest.raises(StudyError, match=r"prior given for \['Ea'\].*\['k', 'C0', 'sigma'\]"):
        sample_problem(prob, start=[0.1, 1.0], priors={"Ea": "normal(1, 1)"}, progress=False)
    with pytest.raises(StudyError, match="sample_scale is False"):
        sample_problem(
            prob,
            start=[0.1, 1.0],
            priors={"sigma": "loguniform(0.01, 1)"},
            sample_scale=False,
            progress=False,
        )
    with pytest.raises(StudyError, match="parameter 'C0': start value -1 .* outside its bounds"):
        sample_problem(prob, start=[0.1, -1.0], progress=False)
    with pytest.raises(StudyError, match="resume=True needs checkpoint"):
        sample_problem(prob, start=[0.1, 1.0], resume=True, progress=False)
    with pytest.raises(StudyError, match=r"scale_start names \['s'\].*\['sigma'\]"):
        sample_problem(prob, start=[0.1, 1.0], scale_start={"s": 1.0}, progress=False)
    with pytest.raises(StudyError, match=r"moves 'gibbs' is not recognised.*\['de-laplace', 'de', 'stretch'\]"):
        sample_problem(prob, start=[0.1, 1.0], moves="gibbs", progress=False)


def test_start_on_a_bound_is_moved_inside():
    # methanol-like case (COPS 3.0 methanol, Maria 1989): an optimum on the zero bound of a linear parameter
    x = np.linspace(0.0, 1.0, 8)
    space = Space(
        ("a", "b"), np.array([0.0, -np.inf]), np.array([np.inf, np.inf]), ("none", "none")
    )
    prob = Problem(lambda P: P[:, :1] * x + P[:, 1:2], 1.0 - 0.01 * x, space, [0.0, 1.0])
    post = _quiet(
        problem=prob,
        start=[0.0, 1.0],
        scale_start=[0.05],
        sample_scale=False,
        max_steps=300,
        seed=4,
        progress=False,
    )
    assert post.draws[:, 0].min() >= 0.0 and np.ptp(post.draws[:, 0]) > 0


def test_result_forms(linear_known_sigma, tmp_path):
    prob, X, beta_hat, post = linear_known_sigma
    summary = post.summary()
    assert set(summary) == {"b0", "b1", "b2"}
    for entry in summary.values():
        assert {"median", "q05", "q95", "hdi90", "rhat", "ess"} <= set(entry)
        assert entry["hdi90"][0] < entry["median"] < entry["hdi90"][1]
    d = json.loads(json.dumps(post.to_dict()))
    assert {"walkers", "steps", "burn_in", "seed"} <= set(d["sampler"])
    assert d["sampler"]["steps"] == post.chain_shape[0] and d["convergence"]["converged"]
    with pytest.raises(ValueError):
        post.draws[0, 0] = 1.0  # read-only
    frame = post.draws_frame()
    assert list(frame.columns) == ["step", "walker", "b0", "b1", "b2", "log_prob"]
    assert frame["step"].min() == post.settings.burn_in
    back = pd.read_csv(post.to_csv(tmp_path / "draws.csv"))
    np.testing.assert_allclose(back[["b0", "b1", "b2"]].to_numpy(), post.draws, rtol=1e-12)
    import xarray as xr  # a dependency of arviz-base

    path = post.to_netcdf(tmp_path / "post.nc", engine="scipy")  # NetCDF-3 on request
    with xr.open_dataset(path, engine="scipy") as ds:
        assert ds["b1"].shape == (post.chain_shape[1], post.draws.shape[0] // post.chain_shape[1])
        np.testing.assert_allclose(ds["b1"].values.T.reshape(-1), post.draws[:, 1])
        assert json.loads(ds.attrs["kinfit_settings"])["seed"] == 11
    tree = post.to_datatree()  # ArviZ layout: walkers as chains
    np.testing.assert_allclose(tree["posterior"]["b2"].values.T.reshape(-1), post.draws[:, 2])
    np.testing.assert_allclose(tree["sample_stats"]["lp"].values.T.reshape(-1), post.log_prob)
    assert "b1" in post.report() and "converged" in post.report()


def test_predictive_bands_match_the_linear_closed_form(linear_known_sigma):
    # BDA3 sec. 14.2: mean response x'beta ~ N(x'beta_ols, x'Cx); a new observation adds sigma^2
    prob, X, beta_hat, post = linear_known_sigma
    cov = 0.1**2 * np.linalg.inv(X.T @ X)
    z = stats.norm.ppf(0.95)
    mean_sd = np.sqrt(np.einsum("ij,jk,ik->i", X, cov, X))
    band = post.predictive(prob.predict, 4000, 9)
    assert band.n_draws == 4000 and not band.noise
    np.testing.assert_allclose(band.q50, X @ beta_hat, atol=0.2 * mean_sd.max())
    np.testing.assert_allclose(band.q95 - band.q05, 2 * z * mean_sd, rtol=0.12)
    noisy = post.predictive(prob.predict, 4000, np.random.default_rng(9), noise=True)
    np.testing.assert_allclose(noisy.q95 - noisy.q05, 2 * z * np.sqrt(mean_sd**2 + 0.01), rtol=0.1)


def test_checkpoint_file_content(tmp_path):
    ckpt = tmp_path / "k.npz"
    post = _quiet(
        problem=_decay_problem(),
        start=[0.1, 1.0],
        checkpoint=ckpt,
        **{**FIXED_LENGTH, "max_steps": 300},
    )
    c = load_checkpoint(ckpt)
    assert c.chain.shape == (300, 10, 2) and c.log_prob.shape == (300, 10)
    assert c.settings["seed"] == 42 and c.random_state[0] == "MT19937"
    np.testing.assert_allclose(np.exp(c.chain[-1, :, 0]), post.chain[-1, :, 0], rtol=1e-14)
    with pytest.raises(StudyError, match="does not exist"):
        load_checkpoint(Path(tmp_path) / "missing.npz")


def test_netcdf_with_arviz_groups(linear_known_sigma, tmp_path):
    # the default file is NetCDF-4 with ArviZ's groups (h5netcdf and h5py are declared
    # dependencies): read back, every draw, lp and the stored settings are the sampler's
    import xarray as xr

    post = linear_known_sigma[3]
    path = post.to_netcdf(tmp_path / "post.nc")
    assert path.read_bytes()[:8] == b"\x89HDF\r\n\x1a\n"  # HDF5 signature: NetCDF-4
    with xr.open_datatree(path, engine="h5netcdf") as tree:
        for j, name in enumerate(post.names):
            np.testing.assert_array_equal(tree["posterior"][name].values.T.reshape(-1),
                                          post.draws[:, j])
        np.testing.assert_array_equal(tree["sample_stats"]["lp"].values.T.reshape(-1),
                                      post.log_prob)
        assert tree["sample_stats"]["lp"].shape == tree["posterior"]["b0"].shape
        attrs = tree["posterior"].attrs
        assert json.loads(attrs["kinfit_settings"]) == post.settings.to_dict()
        assert json.loads(attrs["kinfit_convergence"])["converged"] == post.converged
    with pytest.raises(StudyError, match="not recognised"):
        post.to_netcdf(tmp_path / "x.nc", engine="netcdf4")


def test_proportional_error_scale_is_recovered():
    # recovery of a stated truth (invented data): y = a x (1 + 0.05 e), error model
    # "proportional"; the 90 % central posterior interval of sigma_rel should hold 0.05
    rng = np.random.default_rng(12)
    x = np.linspace(1.0, 10.0, 120)
    y = 2.0 * x * (1 + 0.05 * rng.standard_normal(x.size))
    space = Space(("a",), np.array([0.0]), np.array([np.inf]), ("log",))
    prob = Problem(lambda A: A[:, :1] * x, y, space, [2.0], error_model=ErrorModel("proportional"))
    post = _quiet(problem=prob, start=[2.0], seed=6, progress=False, max_steps=3000)
    assert post.names == ("a", "sigma_rel")
    s = post.summary()
    assert s["sigma_rel"]["q05"] < 0.05 < s["sigma_rel"]["q95"]
    assert s["a"]["q05"] < 2.0 < s["a"]["q95"]


def test_combined_error_model_posterior_matches_quadrature():
    # reference: the same posterior integrated on a grid (trapezoid rule, numpy): y = a x + e,
    # sd(e_i) = sqrt(sigma^2 + (sigma_rel a x_i)^2), flat prior on a, p(s) ~ 1/s on both
    # scales (flat in their logarithms); invented data from a = 2, sigma = 0.2, sigma_rel = 0.05
    rng = np.random.default_rng(21)
    x = np.linspace(0.1, 20.0, 300)
    f = 2.0 * x
    y = f + np.sqrt(0.2**2 + (0.05 * f) ** 2) * rng.standard_normal(x.size)
    space = Space(("a",), np.array([0.0]), np.array([np.inf]), ("log",))
    prob = Problem(lambda A: A[:, :1] * x, y, space, [2.0], error_model=ErrorModel("combined"))
    post = _quiet(problem=prob, start=[2.0], scale_start={"sigma": 0.3, "sigma_rel": 0.03},
                  seed=8, progress=False, max_steps=8000)
    assert post.names == ("a", "sigma", "sigma_rel")
    assert post.converged, post.verdict
    a = np.linspace(1.95, 2.03, 81)[:, None, None, None]
    ls = np.linspace(np.log(0.08), np.log(0.4), 71)[None, :, None, None]
    lr = np.linspace(np.log(0.03), np.log(0.075), 71)[None, None, :, None]
    var = np.exp(2 * ls) + (np.exp(lr) * a * x) ** 2
    loglik = -0.5 * np.sum((y - a * x) ** 2 / var + np.log(var), axis=-1)
    w = np.exp(loglik - loglik.max())
    w /= w.sum()
    grids = (a[..., 0], np.exp(ls[..., 0]), np.exp(lr[..., 0]))
    mean_ref = np.array([np.sum(w * g) for g in grids])
    sd_ref = np.sqrt([np.sum(w * g**2) for g in grids] - mean_ref**2)
    _mc_close(post, mean_ref, sd_ref)


# -- printed digits from the Monte Carlo standard error --------------------------------------
# Rule (kinfit.estimate.convergence.supported_digits): the last printed digit is the power of
# ten u at or above 2 MCSE, so the Monte Carlo error (about 2 MCSE at 95 %) stays within one
# unit of it; at least 2 and at most 6 significant digits. Common practice following Vehtari
# et al. (2021, Bayesian Analysis 16(2), 667-718, sec. 4.3: report only the digits the MCSE
# supports). Two runs with different seeds print identical digits unless a rounding boundary
# falls between their values: a chance event of probability about |difference| / u, so the
# test below checks the rule and that the MCSE it rests on is honest, not that two chains agree.
@pytest.mark.parametrize(
    ("value", "mcse", "sig", "text"),
    [
        (0.140045, 2.3e-4, 3, "0.140"),      # 2 MCSE = 4.6e-4 -> last digit 1e-3
        (0.140045, 4e-5, 4, "0.1400"),       # 8e-5 -> 1e-4
        (1.3383, 0.04, 2, "1.3"),            # 0.08 -> 0.1
        (1.3383, 0.4, 2, "1.3"),             # 0.8 -> 1, but never fewer than 2 digits
        (42144.2, 30.0, 3, "42100"),         # 60 -> 100: rounded, not padded with noise
        (-0.02735, 1.2e-4, 2, "−0.027"),     # 2.4e-4 -> 1e-3; negative values alike
        (1.0, 1e-12, 6, "1.00000"),          # never more than 6 digits
        (0.25, None, None, "0.2500"),        # no MCSE: the default 4 digits
        (0.25, 0.0, None, "0.2500"),
        (0.25, float("nan"), None, "0.2500"),
    ],
)
def test_posterior_summary_prints_the_digits_its_mcse_supports(value, mcse, sig, text):
    from kinfit.report.content import fmt_mc

    assert cv.supported_digits(value, mcse) == sig
    assert fmt_mc(value, mcse) == text
    if sig is not None:  # the printed value is within half a unit of the last digit
        unit = 10.0 ** (math.floor(math.log10(abs(value))) - sig + 1)
        assert unit >= 2 * mcse or sig == 2
        assert abs(float(f"{value:.{sig}g}") - value) <= 0.5 * unit


def test_quantile_mcse_is_honest_across_seeds():
    # the MCSE that sets the printed digits must describe the spread between independent runs:
    # median, q05 and q95 of two seeds (same data) differ by less than 5 sqrt(se1^2 + se2^2)
    # (5 standard deviations of a normal difference; chance of a false alarm ~1e-6 per value).
    # Reference: the quantile MCSE of Vehtari et al. (2021) through arviz-stats; also within a
    # factor of 2 of the iid form sqrt(p (1 - p) / ESS) / f(q) for this normal posterior
    prob, X, y, beta_hat = _linear_problem()
    runs = [_quiet(problem=prob, start=beta_hat, scale_start=[0.1], sample_scale=False,
                   seed=seed, progress=False, max_steps=3000) for seed in (21, 22)]
    a, b = (r.summary() for r in runs)
    sd = 0.1 * np.sqrt(np.diag(np.linalg.inv(X.T @ X)))
    for j, name in enumerate(("b0", "b1", "b2")):
        for key, p in (("median", 0.5), ("q05", 0.05), ("q95", 0.95)):
            se1, se2 = a[name]["mcse"][key], b[name]["mcse"][key]
            assert se1 > 0 and se2 > 0
            assert abs(a[name][key] - b[name][key]) < 5 * math.hypot(se1, se2), (name, key)
            density = stats.norm.pdf(stats.norm.ppf(p)) / sd[j]  # f at the p quantile
            iid = math.sqrt(p * (1 - p) / a[name]["ess"]) / density
            assert 0.5 < se1 / iid < 2.0, (name, key, se1, iid)
        lo, hi = a[name]["hdi90"]
        assert all(s > 0 for s in a[name]["mcse"]["hdi90"])
        assert lo < a[name]["median"] < hi


def test_console_summary_rounds_to_the_mcse(linear_known_sigma):
    post = linear_known_sigma[3]
    summary = post.summary()
    lines = post.report().splitlines()
    for name, s in summary.items():
        row = next(ln for ln in lines if ln.split()[:1] == [name])
        for token, key in zip(row.split()[1:4], ("median", "q05", "q95"), strict=True):
            sig = cv.supported_digits(s[key], s["mcse"][key])
            digits = token.lstrip("-").replace(".", "").split("e")[0].lstrip("0")
            assert len(digits) == sig, (name, key, token, sig)
            assert float(token) == pytest.approx(s[key], abs=10.0 ** (
                math.floor(math.log10(abs(s[key]))) - sig + 1))
    # posterior.json keeps full precision: the summary is not rounded
    assert summary["b0"]["median"] == float(np.median(post.draws[:, 0]))
