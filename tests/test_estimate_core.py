"""The chemistry-free estimation core: least squares, error models, multistart, uncertainty,
identifiability and model comparison, checked against outside references and invariances.

References used below: statsmodels OLS/WLS (Seabold & Perktold 2010) for linear standard
errors, intervals, log-likelihoods and nested tests; Bates & Watts (1988, ch. 6) for the profile
t of a linear model being exactly linear; Carroll & Ruppert (1988, ch. 2) for the fixed point of
generalised least squares; Burnham & Anderson (2002) for Akaike weights.
"""

from __future__ import annotations

import json
import warnings
from concurrent.futures import ThreadPoolExecutor
from dataclasses import FrozenInstanceError

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.optimize import minimize
from scipy.stats import t as student_t

import kinfit.estimate.least_squares as lsq
from kinfit.errors import ConvergenceWarning, StudyError
from kinfit.estimate.compare import compare_fits
from kinfit.estimate.least_squares import fit_problem
from kinfit.estimate.problem import PENALTY, ErrorModel, Problem, Space
from kinfit.estimate.statistics import fit_statistics, ml_error_scales
from kinfit.estimate.uncertainty import (
    bootstrap,
    identifiability,
    linearised_intervals,
    profile_intervals,
)


def free_space(names: tuple[str, ...]) -> Space:
    p = len(names)
    return Space(names, np.full(p, -np.inf), np.full(p, np.inf), ("none",) * p)


def positive_space(names: tuple[str, ...]) -> Space:
    p = len(names)
    return Space(names, np.zeros(p), np.full(p, np.inf), ("log",) * p)


# ------------------------------------------------------------------------------------------
# linear model against statsmodels
# ------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def quadratic_data() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    rng = np.random.default_rng(20240611)
    x = np.linspace(0.0, 5.0, 25)
    design = np.column_stack([np.ones_like(x), x, x**2])
    y = design @ np.array([1.0, -0.5, 0.3]) + rng.normal(loc=0.0, scale=0.2, size=x.size)
    return x, design, y


def linear_problem(
    design: np.ndarray, y: np.ndarray, weights: np.ndarray | None = None, *, analytic: bool = False
) -> Problem:
    names = tuple(f"c{i}" for i in range(design.shape[1]))
    return Problem(
        lambda b: b @ design.T,
        y,
        free_space(names),
        np.zeros(design.shape[1]),
        weights=weights,
        jacobian=(lambda b: design) if analytic else None,
    )


def test_linear_fit_matches_statsmodels_ols(quadratic_data) -> None:
    _, design, y = quadratic_data
    est = fit_problem(linear_problem(design, y))
    ref = sm.OLS(y, design).fit()
    # finite-difference Jacobian while iterating: agreement to ~1e-8
    np.testing.assert_allclose(est.x, ref.params, rtol=1e-7)
    exact = fit_problem(linear_problem(design, y, analytic=True))
    # exact Jacobian: the solver stops at xtol = 1e-12 and both sides solve through LAPACK
    # (rounding ~ eps cond(X)^2 for the covariance): 1e-9 on estimates, 1e-8 on stderr
    np.testing.assert_allclose(exact.x, ref.params, rtol=1e-9)
    np.testing.assert_allclose(exact.stderr, ref.bse, rtol=1e-8)
    np.testing.assert_allclose(est.stderr, ref.bse, rtol=1e-6)
    np.testing.assert_allclose(est.sigma**2, ref.scale, rtol=1e-9)
    lin = linearised_intervals(est, level=0.95)
    ci = ref.conf_int(alpha=0.05)
    np.testing.assert_allclose(lin.lower, ci[:, 0], rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(lin.upper, ci[:, 1], rtol=1e-6, atol=1e-9)
    # same Gaussian log-likelihood; kinfit counts sigma in k, statsmodels does not. The SSE is
    # stationary at the optimum, so the ~1e-8 estimate error enters only squared (~1e-16)
    assert est.loglike == pytest.approx(ref.llf, rel=1e-10)
    assert est.aic == pytest.approx(ref.aic + 2.0, rel=1e-10)
    assert est.bic == pytest.approx(ref.bic + np.log(y.size), rel=1e-10)
    np.testing.assert_allclose(
        est.correlation, ref.cov_params() / np.outer(ref.bse, ref.bse), atol=1e-6
    )


def test_weighted_fit_matches_statsmodels_wls(quadratic_data) -> None:
    x, design, y = quadratic_data
    w = 1.0 + x  # relative precision weights
    est = fit_problem(linear_problem(design, y, weights=w, analytic=True))
    ref = sm.WLS(y, design, weights=w).fit()
    # xtol = 1e-12 and LAPACK rounding on both sides: 1e-9; SSE and log-likelihood are
    # stationary at the optimum (second-order in the estimate error)
    np.testing.assert_allclose(est.x, ref.params, rtol=1e-9)
    np.testing.assert_allclose(est.stderr, ref.bse, rtol=1e-6)
    assert est.sse == pytest.approx(ref.ssr, rel=1e-9)
    assert est.loglike == pytest.approx(ref.llf, rel=1e-10)  # includes +1/2 sum ln w


def test_profile_t_of_a_linear_model_is_the_linearised_interval(quadratic_data) -> None:
    """For a linear model S(theta) is quadratic, so the profile t is exactly linear and the
    profile interval equals the t interval (Bates & Watts 1988, §6.1)."""
    _, design, y = quadratic_data
    problem = linear_problem(design, y)
    est = fit_problem(problem)
    prof = profile_intervals(problem, est)
    lin = linearised_intervals(est)
    np.testing.assert_allclose(prof.intervals.lower, lin.lower, rtol=1e-6)
    np.testing.assert_allclose(prof.intervals.upper, lin.upper, rtol=1e-6)
    tr = prof.traces[1]
    slope = np.diff(tr.tau) / np.diff(tr.values)
    np.testing.assert_allclose(slope, 1.0 / est.stderr[1], rtol=1e-5)


def test_nested_comparison_matches_statsmodels(quadratic_data) -> None:
    _, design, y = quadratic_data
    full = fit_problem(linear_problem(design, y))
    reduced = fit_problem(linear_problem(design[:, :2], y))
    res = compare_fits({"line": reduced, "quadratic": full}, nested=[("line", "quadratic")])
    ref_full, ref_red = sm.OLS(y, design).fit(), sm.OLS(y, design[:, :2]).fit()
    lr, lr_p, lr_df = ref_full.compare_lr_test(ref_red)
    fs, fp, f_df = ref_full.compare_f_test(ref_red)
    test = res.tests[0]
    assert test.df == lr_df == f_df == 1
    assert test.lr_statistic == pytest.approx(lr, rel=1e-8)
    assert test.lr_pvalue == pytest.approx(lr_p, rel=1e-6, abs=1e-300)
    assert test.f_statistic == pytest.approx(fs, rel=1e-8)
    assert test.f_pvalue == pytest.approx(fp, rel=1e-6, abs=1e-300)
    table = res.table
    assert table["weight"].sum() == pytest.approx(1.0)
    assert res.best == table["aicc"].idxmin()
    delta = table["aicc"] - table["aicc"].min()
    w = np.exp(-delta / 2) / np.exp(-delta / 2).sum()  # Burnham & Anderson (2002)
    np.testing.assert_allclose(table["weight"], w)
    json.dumps(res.to_dict())
    with pytest.raises(StudyError, match="cannot be nested"):
        compare_fits({"line": reduced, "quadratic": full}, nested=[("quadratic", "line")])
    other = fit_problem(linear_problem(design, y + 1.0))
    with pytest.raises(StudyError, match="different observations"):
        compare_fits([full, other])


# ------------------------------------------------------------------------------------------
# invariances and properties
# ------------------------------------------------------------------------------------------
T_DECAY = np.linspace(0.0, 4.0, 12)


def decay(x: np.ndarray) -> np.ndarray:
    return x[:, :1] * np.exp(-x[:, 1:2] * T_DECAY)


def decay_data(seed: int, sigma: float = 0.05, truth=(2.0, 0.8)) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return decay(np.array([truth]))[0] + rng.normal(loc=0.0, scale=sigma, size=T_DECAY.size)


def test_integer_weights_equal_duplicated_observations() -> None:
    y = decay_data(1)
    w = np.array([1, 2, 3, 1, 1, 2, 1, 4, 1, 1, 2, 1], dtype=float)
    space = positive_space(("a", "k"))
    weighted = fit_problem(Problem(decay, y, space, np.array([1.0, 1.0]), weights=w))
    idx = np.repeat(np.arange(y.size), w.astype(int))
    dup = fit_problem(Problem(lambda x: decay(x)[:, idx], y[idx], space, np.array([1.0, 1.0])))
    # two iterative fits of one problem: both stop within ftol = xtol = 1e-12 of the optimum;
    # 1e-8 relative on the estimates, and the SSE (stationary there) to 1e-10
    np.testing.assert_allclose(weighted.x, dup.x, rtol=1e-8)
    assert weighted.sse == pytest.approx(dup.sse, rel=1e-10)
    info_w = weighted.covariance / weighted.sigma**2
    info_d = dup.covariance / dup.sigma**2
    np.testing.assert_allclose(info_w, info_d, rtol=1e-6)  # same (J'WJ)^-1


def test_starting_at_the_optimum_takes_about_no_iterations() -> None:
    y = decay_data(2)
    space = positive_space(("a", "k"))
    first = fit_problem(Problem(decay, y, space, np.array([1.0, 1.0])))
    again = fit_problem(Problem(decay, y, space, np.asarray(first.x)))
    # one iteration at most (a trial step or two may be rejected on rounding noise)
    assert again.converged and again.njev <= 2 and again.nfev <= 5
    np.testing.assert_allclose(again.x, first.x, rtol=1e-9)


def test_jacobian_is_one_batched_call() -> None:
    """Forward differences use one predict call of p+1 rows, the final covariance one call of
    2p+1 rows (central differences)."""
    sizes: list[int] = []

    def counting(x: np.ndarray) -> np.ndarray:
        sizes.append(x.shape[0])
        return decay(x)

    est = fit_problem(Problem(counting, decay_data(3), positive_space(("a", "k")), np.ones(2)))
    assert est.converged
    assert set(sizes) <= {1, 3, 5}
    assert sizes.count(5) == 1 and sizes.count(3) == est.njev


def test_analytic_jacobian_is_chained_through_the_log_transform() -> None:
    y = decay_data(4)

    def jac(x: np.ndarray) -> np.ndarray:
        e = np.exp(-x[1] * T_DECAY)
        return np.column_stack([e, -x[0] * T_DECAY * e])

    space = positive_space(("a", "k"))
    fd = fit_problem(Problem(decay, y, space, np.ones(2)))
    an = fit_problem(Problem(decay, y, space, np.ones(2), jacobian=jac))
    np.testing.assert_allclose(an.x, fd.x, rtol=1e-8)
    np.testing.assert_allclose(an.stderr, fd.stderr, rtol=1e-6)
    np.testing.assert_allclose(an.jacobian, jac(np.asarray(an.x)), rtol=1e-12)


def test_central_differences_at_a_bound_are_one_sided_second_order() -> None:
    """At an upper bound the 2p+1-row scheme switches to the one-sided three-point formula,
    which is exact for a quadratic (common practice; e.g. Fornberg 1988, Math. Comp. 51, 699)."""
    x = np.linspace(0.0, 1.0, 5)

    def quad(b: np.ndarray) -> np.ndarray:
        return b[:, :1] * x + b[:, 1:2] ** 2

    space = Space(("a", "b"), np.array([-1.0, -1.0]), np.array([1.0, 0.5]), ("none", "none"))
    problem = Problem(quad, x, space, np.array([0.0, 0.5]))
    u = np.array([0.3, 0.5])  # b on its upper bound
    ev = lsq.Evaluator(problem)
    d = lsq.jacobian_internal(problem, ev, u, central=True)
    np.testing.assert_allclose(d, np.column_stack([x, np.full(5, 2 * 0.5)]), rtol=1e-9, atol=1e-10)
    assert ev.n_calls == 1  # one batched call of 2p + 1 rows


def test_nan_region_is_penalised_never_passed_to_the_optimiser(monkeypatch) -> None:
    """The predictor returns NaN at half the observations for k > 0.8 and raises for a > 5:
    the optimiser only ever sees finite residuals and Jacobians, a trial step into the NaN
    region is rejected, and the fit still reaches the optimum."""
    seen: list[bool] = []
    real = lsq.least_squares

    def spy(fun, x0, jac, **kw):
        def fun2(z):
            r = fun(z)
            seen.append(bool(np.all(np.isfinite(r))))
            return r

        def jac2(z):
            j = jac(z)
            seen.append(bool(np.all(np.isfinite(j))))
            return j

        return real(fun2, x0, jac=jac2, **kw)

    monkeypatch.setattr(lsq, "least_squares", spy)

    def fragile(x: np.ndarray) -> np.ndarray:
        if np.any(x[:, 0] > 5.0):
            raise ValueError("amplitude above 5 is not computable")
        out = decay(x)
        out[np.ix_(x[:, 1] > 0.8, np.arange(0, T_DECAY.size, 2))] = np.nan
        return out

    y = decay_data(5, truth=(2.0, 0.5))
    space = Space(("a", "k"), np.array([0.0, 0.0]), np.array([10.0, 5.0]), ("log", "log"))
    ref = fit_problem(Problem(decay, y, positive_space(("a", "k")), np.array([2.0, 0.5])))
    est = fit_problem(Problem(fragile, y, space, np.array([1.0, 0.05])))
    assert all(seen) and len(seen) > 0
    assert est.converged and est.n_penalised >= 1
    assert est.penalty_reasons == (
        "predictor returned non-finite values at 6 of 12 observations (1x)",
    )
    np.testing.assert_allclose(est.x, ref.x, rtol=1e-6)
    # screening a Sobol design that reaches into both failure regions
    multi = fit_problem(Problem(fragile, y, space, np.array([1.0, 0.05])), multistart=16, seed=3)
    assert multi.converged and all(seen)
    assert any("raised ValueError: amplitude above 5" in r for r in multi.penalty_reasons)
    np.testing.assert_allclose(multi.x, ref.x, rtol=1e-6)


def test_penalty_is_large_and_finite() -> None:
    assert np.isfinite(PENALTY) and PENALTY >= 1e6


def test_pathological_fits_warn() -> None:
    y = decay_data(6)
    space = positive_space(("a", "k"))
    with pytest.warns(ConvergenceWarning, match="did not converge"):
        est = fit_problem(Problem(decay, y, space, np.array([50.0, 20.0])), max_nfev=2)
    assert not est.converged and est.status == 0

    def never(x: np.ndarray) -> np.ndarray:
        return np.full((x.shape[0], y.size), np.nan)

    with pytest.warns(ConvergenceWarning, match="prediction fails"):
        est = fit_problem(Problem(never, y, space, np.ones(2)))
    assert not est.converged and est.n_penalised > 0
    assert np.all(np.isnan(est.covariance))

    def walled(x: np.ndarray) -> np.ndarray:
        out = decay(x)
        out[x[:, 1] > 1.2] = np.nan
        return out

    # the descent direction points into the failure region: the optimiser stops at its edge,
    # which must not be reported as an optimum
    y2 = decay_data(5, truth=(2.0, 1.1))
    box = Space(("a", "k"), np.array([0.0, 0.0]), np.array([10.0, 5.0]), ("none", "none"))
    with pytest.warns(
        ConvergenceWarning, match="stalled next to a region where the predictor fails"
    ):
        est = fit_problem(Problem(walled, y2, box, np.array([3.0, 1.15])))
    assert not est.converged


def test_estimate_is_immutable_and_serialisable() -> None:
    est = fit_problem(Problem(decay, decay_data(7), positive_space(("a", "k")), np.ones(2)))
    with pytest.raises(FrozenInstanceError):
        est.sse = 0.0  # type: ignore[misc]
    with pytest.raises(ValueError):
        est.x[0] = 0.0
    d = est.to_dict()
    text = json.dumps(d)
    assert json.loads(text)["names"] == ["a", "k"]
    assert set(d) >= {"converged", "status", "message", "nfev", "njev", "n_obs", "n_params",
                      "sse", "sigma", "statistics", "n_distinct_optima", "at_bound", "unmoved"}  # fmt: skip
    assert d["statistics"]["k"] == 3
    frame = est.to_frame()
    assert list(frame.index) == ["a", "k"] and est.value("k") == frame.loc["k", "estimate"]
    with pytest.raises(StudyError, match="no parameter named 'b'"):
        est.value("b")


def test_unmoved_and_unidentified_parameters_are_flagged() -> None:
    """c has no effect on the predictions; a and b enter only as the product a*b."""

    def model(x: np.ndarray) -> np.ndarray:
        return (x[:, 0:1] * x[:, 1:2]) * np.exp(-0.8 * T_DECAY) + 0.0 * x[:, 2:3]

    y = model(np.array([[1.0, 2.0, 0.0]]))[0] + 0.01 * np.sin(5 * T_DECAY)
    space = Space(
        ("a", "b", "c"), np.array([0.0, 0.0, -5.0]), np.full(3, np.inf), ("log", "log", "none")
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        est = fit_problem(Problem(model, y, space, np.array([1.0, 1.0, 0.3])))
    assert est.unmoved.tolist() == [False, False, True]
    assert est.rank < 3
    flags = identifiability(est)
    assert flags.near_singular and flags.condition_number == np.inf
    assert flags.unmoved == ("c",)
    assert set(flags.undetermined) == {"a", "b", "c"}
    # the weakest direction mixes ln a and ln b with opposite signs, or is c alone; here two
    # directions are null, so check that the product direction is orthogonal to it
    coef = dict(flags.weakest_direction)
    assert abs(coef.get("a", 0.0) + coef.get("b", 0.0)) < 1e-6
    json.dumps(flags.to_dict())


def test_weakest_direction_names_the_product() -> None:
    """Only a*b is identified: the least determined direction is ln a - ln b."""

    def model(x: np.ndarray) -> np.ndarray:
        return x[:, 0:1] * x[:, 1:2] * np.exp(-x[:, 2:3] * T_DECAY) + 1e-4 * x[:, 0:1] * T_DECAY

    y = model(np.array([[1.0, 2.0, 0.8]]))[0] + 0.002 * np.cos(3 * T_DECAY)
    est = fit_problem(
        Problem(model, y, positive_space(("a", "b", "k")), np.array([1.5, 1.5, 1.0]))
    )
    flags = identifiability(est)
    coef = dict(flags.weakest_direction)
    assert coef["a"] == pytest.approx(-coef["b"], abs=0.02)
    assert abs(coef["a"]) == pytest.approx(np.sqrt(0.5), abs=0.02)
    assert flags.near_singular and ("a", "b") in {(p, q) for p, q, _ in flags.high_correlations}
    assert "ln(a)" in flags.weakest_direction_text and "ln(b)" in flags.weakest_direction_text


def test_profile_that_does_not_close_is_open_ended() -> None:
    """y = a (1 - exp(-k t)) observed only late: large k cannot be told apart, so the upper
    side of k's profile reaches its bound without closing."""
    t = np.linspace(5.0, 10.0, 8)

    def rise(x: np.ndarray) -> np.ndarray:
        return x[:, :1] * (1 - np.exp(-x[:, 1:2] * t))

    y = rise(np.array([[3.0, 1.5]]))[0] + 0.02 * np.sin(4 * t)
    space = Space(("a", "k"), np.array([0.0, 0.0]), np.array([10.0, 20.0]), ("none", "none"))
    problem = Problem(rise, y, space, np.array([2.0, 1.0]))
    est = fit_problem(problem)
    prof = profile_intervals(problem, est, names=["k"])
    iv = prof.intervals
    assert iv.lower_closed[0] and not iv.upper_closed[0]
    assert iv.upper[0] == 20.0
    assert any("open-ended" in n for n in iv.notes)


# ------------------------------------------------------------------------------------------
# error models
# ------------------------------------------------------------------------------------------
def test_proportional_error_is_a_gls_fixed_point_and_matches_wls() -> None:
    """Carroll & Ruppert (1988, ch. 2): at convergence the estimate solves weighted least
    squares with weights 1/f(theta_hat)^2; statsmodels WLS with those weights on the linearised
    problem gives the same step (zero)."""
    rng = np.random.default_rng(8)
    truth = np.array([5.0, 0.6])
    f_true = decay(truth[None, :])[0]
    y = f_true * (1 + 0.05 * rng.normal(size=f_true.size))
    problem = Problem(
        decay, y, positive_space(("a", "k")), np.ones(2), error_model=ErrorModel("proportional")
    )
    est = fit_problem(problem)
    assert est.converged and est.irls_cycles >= 2
    f = np.asarray(est.fitted)
    np.testing.assert_allclose(est.fit_weights, 1.0 / f**2, rtol=1e-6)
    # Gauss-Newton step of the weighted problem at the estimate is zero (statsmodels WLS)
    step = sm.WLS(y - f, np.asarray(est.jacobian), weights=1.0 / f**2).fit().params
    assert np.all(np.abs(step) < 1e-6 * np.abs(est.x))
    assert est.scale_names == ("sigma_rel",)
    assert 0.03 < est.scale[0] < 0.08  # true relative sd 0.05
    assert est.sigma == pytest.approx(est.scale[0], rel=1e-6)
    assert est.statistics.k == 3


def test_combined_error_scales_are_maximum_likelihood() -> None:
    rng = np.random.default_rng(9)
    f = np.linspace(0.1, 20.0, 400)
    sd = np.sqrt(0.3**2 + (0.1 * f) ** 2)
    y = f + sd * rng.normal(size=f.size)
    em = ErrorModel("combined")
    sc = ml_error_scales(em, y, f)

    def negll(z: np.ndarray) -> float:
        return -float(em.loglike(y, f, s_abs=np.exp(z[0]), s_rel=np.exp(z[1])))

    ref = minimize(
        negll, np.log([1.0, 1.0]), method="Nelder-Mead", options={"xatol": 1e-10, "fatol": 1e-12}
    )
    np.testing.assert_allclose([sc["sigma"], sc["sigma_rel"]], np.exp(ref.x), rtol=1e-4)
    assert 0.2 < sc["sigma"] < 0.4 and 0.08 < sc["sigma_rel"] < 0.12


def test_combined_error_model_fit() -> None:
    """60 observations spanning a factor 20 in the response, sd = sqrt(0.02^2 + (0.04 f)^2):
    the combined model recovers both scales and is preferred by AIC over the pure forms."""
    t = np.linspace(0.0, 6.0, 60)

    def model(x: np.ndarray) -> np.ndarray:
        return x[:, :1] * np.exp(-x[:, 1:2] * t)

    rng = np.random.default_rng(10)
    truth = np.array([8.0, 0.5])
    f_true = model(truth[None, :])[0]
    y = f_true + np.sqrt(0.02**2 + (0.04 * f_true) ** 2) * rng.normal(size=f_true.size)
    fits = {
        kind: fit_problem(
            Problem(model, y, positive_space(("a", "k")), np.ones(2), error_model=ErrorModel(kind))
        )
        for kind in ("constant", "proportional", "combined")
    }
    est = fits["combined"]
    assert est.converged and est.scale_names == ("sigma", "sigma_rel")
    assert est.statistics.n_scale == 2 and est.statistics.k == 4
    assert np.all(np.abs(est.x - truth) < 3 * est.stderr)
    assert 0.01 < est.scale[0] < 0.04 and 0.025 < est.scale[1] < 0.06
    assert est.aic < min(fits["constant"].aic, fits["proportional"].aic)
    table = compare_fits(fits).table
    assert table["weight"].idxmax() == "combined"


def test_statistics_convention() -> None:
    """-2 lnL = n [ln(2 pi S / n) + 1] for the constant model, k = p + 1 (Akaike 1974; common practice)."""
    y = np.array([1.0, 2.0, 4.0, 3.0, 5.0])
    f = np.array([1.2, 2.1, 3.5, 3.2, 4.9])
    st = fit_statistics(y, f, n_params=2)
    s, n = float(np.sum((y - f) ** 2)), 5
    assert -2 * st.loglike == pytest.approx(n * (np.log(2 * np.pi * s / n) + 1))
    assert st.aic == pytest.approx(-2 * st.loglike + 2 * 3)
    assert st.aicc == pytest.approx(st.aic + 2 * 3 * 4 / (n - 3 - 1))
    assert st.bic == pytest.approx(-2 * st.loglike + 3 * np.log(n))


# ------------------------------------------------------------------------------------------
# multistart, executors, bootstrap
# ------------------------------------------------------------------------------------------
T_WAVE = np.linspace(0.0, 6.0, 40)


def wave(x: np.ndarray) -> np.ndarray:
    return np.sin(x[:, :1] * T_WAVE)


def test_multistart_finds_the_global_optimum_and_counts_optima() -> None:
    """sin(b t) has many local minima in b; a start at 0.5 stalls in one of them."""
    y = np.sin(2.7 * T_WAVE) + 0.05 * np.cos(11 * T_WAVE)
    space = Space(("b",), np.array([0.1]), np.array([5.0]), ("none",))
    problem = Problem(wave, y, space, np.array([0.5]))
    single = fit_problem(problem)
    multi = fit_problem(problem, multistart=32, seed=42, n_refine=8)
    assert multi.x[0] == pytest.approx(2.7, abs=0.01)
    assert abs(single.x[0] - 2.7) > 0.1
    assert multi.n_distinct_optima >= 2 and multi.sse < single.sse
    assert multi.optima_sse[0] == pytest.approx(multi.sse, rel=1e-12)
    again = fit_problem(problem, multistart=32, seed=42, n_refine=8)
    np.testing.assert_array_equal(again.x, multi.x)
    with ThreadPoolExecutor(max_workers=2) as pool:
        par = fit_problem(problem, multistart=32, seed=42, n_refine=8, executor=pool)
    np.testing.assert_array_equal(par.x, multi.x)
    assert par.n_distinct_optima == multi.n_distinct_optima


def test_bootstrap_residual_and_group() -> None:
    rng = np.random.default_rng(12)
    runs = 6
    t = np.tile(T_DECAY, runs)
    groups = np.repeat(np.arange(runs), T_DECAY.size)

    def model(x: np.ndarray) -> np.ndarray:
        return x[:, :1] * np.exp(-x[:, 1:2] * t)

    y = model(np.array([[2.0, 0.8]]))[0] + rng.normal(scale=0.05, size=t.size)
    problem = Problem(model, y, positive_space(("a", "k")), np.ones(2), groups=groups)
    est = fit_problem(problem)
    res = bootstrap(problem, est, n_boot=60, seed=1, progress=False)
    assert res.replicates.shape == (60, 2) and res.n_failed == 0
    lin = linearised_intervals(est)
    width_ratio = (res.intervals.upper - res.intervals.lower) / (lin.upper - lin.lower)
    assert np.all((0.6 < width_ratio) & (width_ratio < 1.5))
    again = bootstrap(problem, est, n_boot=60, seed=1, progress=False)
    np.testing.assert_array_equal(again.replicates, res.replicates)
    with ThreadPoolExecutor(max_workers=2) as pool:
        par = bootstrap(problem, est, n_boot=60, seed=1, progress=False, executor=pool)
    np.testing.assert_array_equal(par.replicates, res.replicates)
    grp = bootstrap(problem, est, n_boot=40, kind="group", seed=2, progress=False)
    assert grp.replicates.shape == (40, 2) and grp.kind == "group"
    assert np.all(grp.intervals.lower < est.x) and np.all(est.x < grp.intervals.upper)
    json.dumps(grp.to_dict())
    no_groups = Problem(model, y, positive_space(("a", "k")), np.ones(2))
    with pytest.raises(StudyError, match="needs problem.groups"):
        bootstrap(no_groups, est, kind="group", progress=False)


def test_interval_coverage_quick_monte_carlo() -> None:
    """40 replicates of an exponential decay with known noise: the 95 % linearised and profile
    intervals must contain the truth in a plausible fraction. With true coverage 0.95 the
    chance of fewer than 33 hits out of 40 is 0.3 % (binomial)."""
    truth = np.array([2.0, 0.8])
    hits_lin = np.zeros(2)
    hits_prof = np.zeros(2)
    space = positive_space(("a", "k"))
    for seed in range(40):
        y = decay_data(1000 + seed, sigma=0.05, truth=tuple(truth))
        problem = Problem(decay, y, space, np.ones(2))
        est = fit_problem(problem)
        lin = linearised_intervals(est)
        hits_lin += (lin.lower <= truth) & (truth <= lin.upper)
        prof = profile_intervals(problem, est).intervals
        hits_prof += (prof.lower <= truth) & (truth <= prof.upper)
    assert np.all(hits_lin >= 33) and np.all(hits_prof >= 33)


# ------------------------------------------------------------------------------------------
# option validation
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("options", "pattern"),
    [
        ({"method": "newton"}, r"'method' option of fit_problem\(\) must be a str among"),
        ({"multistart": -1}, r"'multistart' option .* must be an int >= 0. Got -1"),
        ({"max_nfev": 0}, r"'max_nfev' option"),
        ({"xtol": 2.0}, r"'xtol' option .* in \[0, 1\)"),
        ({"seed": "abc"}, r"'seed' option"),
        ({"n_refine": 0}, r"'n_refine' option"),
    ],
)
def test_invalid_options_are_named(options, pattern) -> None:
    problem = Problem(decay, decay_data(13), positive_space(("a", "k")), np.ones(2))
    with pytest.raises(StudyError, match=pattern):
        fit_problem(problem, **options)


def test_lm_refuses_bounds_and_log_start_at_zero() -> None:
    box = Space(("a", "k"), np.zeros(2), np.array([10.0, 10.0]), ("none", "none"))
    problem = Problem(decay, decay_data(14), box, np.ones(2))
    with pytest.raises(StudyError, match="'lm', which cannot honour bounds"):
        fit_problem(problem, method="lm")
    zero = Problem(decay, decay_data(14), positive_space(("a", "k")), np.array([0.0, 1.0]))
    with pytest.raises(StudyError, match="cannot start at 0"):
        fit_problem(zero)
    # a log parameter bounded only by 0 has no finite internal bound, so lm is allowed
    logs = Problem(decay, decay_data(14), positive_space(("a", "k")), np.ones(2))
    assert fit_problem(logs, method="lm").converged


def test_interval_options_are_validated() -> None:
    problem = Problem(decay, decay_data(15), positive_space(("a", "k")), np.ones(2))
    est = fit_problem(problem)
    with pytest.raises(StudyError, match="'level' option of linearised_intervals"):
        linearised_intervals(est, level=95)
    with pytest.raises(StudyError, match="unknown parameters \\['z'\\]"):
        profile_intervals(problem, est, names=["z"])
    with pytest.raises(StudyError, match="'kind' option of bootstrap"):
        bootstrap(problem, est, kind="wild", progress=False)
    tc = student_t.ppf(0.975, est.dof)
    lin = linearised_intervals(est)
    np.testing.assert_allclose(lin.upper - est.x, tc * est.stderr)
