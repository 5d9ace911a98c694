"""What the data prove without any kinetic model: runs that differ only in stirrer speed, particle
size or catalyst loading, compared with a test that accounts for the measurement noise.

Profiles (batch campaigns). The runs of a set are grouped by the level of the factor (replicate
runs at one level share a curve). One smooth curve C(x) is fitted to all points of the set
(the *pooled* model) and one curve per level (the *separate* model), with the same regression
spline basis in x; the extra sum of squares

.. math:: F = \\frac{(S_{pooled} - S_{separate}) / (\\nu_{pooled} - \\nu_{separate})}
                {S_{separate} / \\nu_{separate}}

is compared with the F distribution (the extra-sum-of-squares principle for nested least
squares models; Bates & Watts 1988, *Nonlinear Regression Analysis and Its Applications*;
Draper & Smith 1998, *Applied Regression Analysis*; from memory). The noise is estimated from
the separate fits. x is the time, except for catalyst loading, where it is the time multiplied
by the loading (w t): a slurry batch obeys dC/dt = -w r(C), so profiles plotted against w t
coincide exactly when the rate per catalyst mass is unchanged (derived).

The basis is a cubic B-spline in x scaled to [0, 1] with 0-4 interior knots at quantiles of the
pooled times (lower degrees for short runs); the number of knots minimises the BIC (Schwarz
1978) of the pooled fit, so that one curve follows the profiles closely enough that lack of fit
does not pass for a difference between levels. Choosing it on the separate fits instead would
favour the separate model and raise the false-alarm rate (about 10 % at a nominal 5 % in a
simulation of identical exponential profiles; choosing on the pooled fit gave 4-7 %).
When the study's error model is ``proportional``, both models are refitted with weights
1/c^2 taken from the pooled curve (two-stage weighted least squares). Unweighted, identical
profiles with 4 % relative noise were called different in 28 % of 400 simulated pairs at a
nominal 5 %; weighted, in 4 % (``tests/test_model_free_weighting.py``). A ``combined`` error
model is not weighted for, and the result says so.

Rates (differential or initial-rate campaigns). A constant per level against one constant: the
same F test, which is one-way analysis of variance (Fisher 1925; checked against
``scipy.stats.f_oneway`` in the tests). When no level has replicates, the noise is taken from
replicate rates elsewhere in the study, if there are any (constant noise assumed).

Conclusions follow the trade's logic (common practice): no change with
stirrer speed rules out film resistance only (and only if the film coefficient does change with
speed over that range); no change with particle size at a fixed speed rules out film and pore
resistance together; no change of the rate per catalyst mass with the loading rules out a supply
limit per reactor volume (gas-liquid transfer), not particle transport.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import stats
from scipy.interpolate import BSpline

from kinfit.study import FACTORS, ComparisonSet, Run, Study, comparison_sets

__all__ = [
    "TESTED_FACTORS",
    "NestedTest",
    "FactorTest",
    "NotPossible",
    "ModelFreeResult",
    "extra_sum_of_squares",
    "spline_design",
    "compare_profiles",
    "compare_rates",
    "model_free_tests",
    "format_factor",
]

Array = NDArray[np.float64]

#: factors the model-free tests vary (temperature and initial concentration are kinetic factors)
TESTED_FACTORS = ("stirrer_speed", "particle_diameter", "catalyst_loading")

_NAMES = {
    "temperature": "temperature", "stirrer_speed": "stirrer speed",
    "particle_diameter": "particle diameter", "catalyst_loading": "catalyst loading",
    "initial_concentration": "initial concentration",
}
_MEANING = {
    "stirrer_speed": "film resistance",
    "particle_diameter": "film and pore resistance together",
    "catalyst_loading": "a supply limit per reactor volume (gas-liquid transfer)",
}
#: largest stirrer speed suggested for a new run (common practice for lab autoclaves)
_MAX_SUGGESTED_RPM = 3000.0


def format_factor(factor: str, value: float) -> str:
    """A factor value in lab units, e.g. ``'1200 rpm'``, ``'30 µm'``, ``'55 °C'``.

    Parameters
    ----------
    factor : str
        One of :data:`kinfit.study.FACTORS`.
    value : float
        SI value (K, rev/s, m, kg/m^3, mol/m^3).
    """
    if factor == "temperature":
        return f"{value - 273.15:.4g} °C"
    if factor == "stirrer_speed":
        return f"{value * 60.0:.4g} rpm"
    if factor == "particle_diameter":
        return f"{value * 1e6:.4g} µm"
    if factor == "catalyst_loading":
        return f"{value:.3g} g/L"
    if factor == "initial_concentration":
        return f"{value / 1000.0:.4g} mol/L"
    raise KeyError(factor)


def _conditions(factor: str, fixed: dict[str, float]) -> str:
    keys = [f for f in ("temperature", "particle_diameter", "stirrer_speed", "catalyst_loading")
            if f != factor]
    return ", ".join(format_factor(f, fixed[f]) for f in keys if f in fixed)


# ----------------------------------------------------------------------------- the F test
@dataclass(frozen=True)
class NestedTest:
    """Extra-sum-of-squares F test of a reduced (pooled) against a full (separate) model.

    Attributes
    ----------
    statistic : float
        F.
    df : tuple of int
        (numerator, denominator) degrees of freedom.
    p_value : float
    sse_reduced, sse_full : float
        Weighted residual sums of squares (units of the response squared).
    """

    statistic: float
    df: tuple[int, int]
    p_value: float
    sse_reduced: float
    sse_full: float


def extra_sum_of_squares(sse_reduced: float, dof_reduced: int, sse_full: float, dof_full: int,
                         *, noise: tuple[float, int] | None = None) -> NestedTest:
    """F test of nested least-squares fits (Bates & Watts 1988; from memory).

    Parameters
    ----------
    sse_reduced, dof_reduced : float, int
        Residual sum of squares and residual degrees of freedom of the reduced model.
    sse_full, dof_full : float, int
        The same for the full model (dof_full < dof_reduced).
    noise : (float, int), optional
        An outside estimate of the noise (sum of squares, degrees of freedom) used as the
        denominator instead of the full model's residuals.

    Returns
    -------
    NestedTest
    """
    df1 = int(dof_reduced - dof_full)
    ss_den, df2 = (sse_full, int(dof_full)) if noise is None else (noise[0], int(noise[1]))
    if df1 <= 0 or df2 <= 0:
        raise ValueError(f"degrees of freedom must be positive, got ({df1}, {df2})")
    extra = max(sse_reduced - sse_full, 0.0)
    scale = max(abs(sse_reduced), 1e-300)
    if ss_den <= 1e-28 * scale or ss_den <= 0.0:
        # noise-free data: identical curves give no extra sum of squares at all
        F, p = (0.0, 1.0) if extra <= 1e-12 * scale else (np.inf, 0.0)
    else:
        F = (extra / df1) / (ss_den / df2)
        p = float(stats.f.sf(F, df1, df2))
    return NestedTest(float(F), (df1, df2), float(p), float(sse_reduced), float(sse_full))


def spline_design(x: Array, degree: int, knots: Sequence[float]) -> Array:
    """Design matrix (n, degree + 1 + len(knots)) of a clamped B-spline basis on [0, 1].

    Parameters
    ----------
    x : ndarray
        Abscissae scaled to [0, 1].
    degree : int
        Polynomial degree (3: cubic).
    knots : sequence of float
        Interior knots, strictly inside (0, 1), increasing.
    """
    t = np.r_[np.zeros(degree + 1), np.asarray(knots, dtype=float), np.ones(degree + 1)]
    xc = np.clip(np.asarray(x, dtype=float), 0.0, 1.0)
    return BSpline.design_matrix(xc, t, degree).toarray()


def _spline_basis(degree: int, knots: tuple[float, ...]) -> Callable[[Array], Array]:
    """The design-matrix function of one spline basis."""
    def basis(x: Array) -> Array:
        return spline_design(x, degree, knots)
    return basis


def _wls(X: Array, y: Array, sw: Array) -> tuple[float, int, Array]:
    """Weighted least squares: (SSE, rank, coefficients)."""
    coef, _, rank, _ = np.linalg.lstsq(X * sw[:, None], y * sw, rcond=None)
    res = (y - X @ coef) * sw
    return float(res @ res), int(rank), np.asarray(coef, dtype=np.float64)


@dataclass(frozen=True)
class _LevelFit:
    sse_pooled: float
    rank_pooled: int
    sse_separate: float
    rank_separate: int
    coefs: list[Array]
    basis: Callable[[Array], Array]
    label: str


def _fit_levels(x: Array, y: Array, sw: Array, level: NDArray[np.int_], n_levels: int,
                basis: Callable[[Array], Array], label: str) -> _LevelFit:
    X = basis(x)
    sse_p, rank_p, _ = _wls(X, y, sw)
    sse_s, rank_s, coefs = 0.0, 0, []
    for g in range(n_levels):
        m = level == g
        s, r, c = _wls(X[m], y[m], sw[m])
        sse_s += s
        rank_s += r
        coefs.append(c)
    return _LevelFit(sse_p, rank_p, sse_s, rank_s, coefs, basis, label)


def _select_basis(x: Array, y: Array, sw: Array, level: NDArray[np.int_], n_levels: int
                  ) -> _LevelFit | None:
    """The spline basis (degree, interior knots) with the lowest BIC of the pooled fit."""
    counts = np.bincount(level, minlength=n_levels)
    n_min = int(counts.min())
    ux = np.unique(x)
    candidates: list[tuple[int, tuple[float, ...]]] = [(1, ()), (2, ()), (3, ())]
    for k in range(1, 5):
        quantiles = np.unique(np.quantile(ux, np.arange(1, k + 1) / (k + 1)))
        knots = tuple(float(v) for v in quantiles if 0.0 < v < 1.0)
        if len(knots) == k:
            candidates.append((3, knots))
    best: tuple[float, _LevelFit] | None = None
    n = x.size
    for degree, knots in candidates:
        size = degree + 1 + len(knots)
        if size > n_min - 2:
            continue
        fit = _fit_levels(x, y, sw, level, n_levels, _spline_basis(degree, knots),
                          f"degree {degree}, {len(knots)} interior knots")
        if n - fit.rank_separate <= 0:
            continue
        bic = n * np.log(max(fit.sse_pooled, 1e-300) / n) + fit.rank_pooled * np.log(n)
        if best is None or bic < best[0] - 1e-9:
            best = (bic, fit)
    return None if best is None else best[1]


# ----------------------------------------------------------------------------- results
@dataclass(frozen=True)
class FactorTest:
    """One model-free comparison of runs that differ only in one factor.

    Attributes
    ----------
    factor : str
    runs : tuple of str
    values : tuple of float
        The distinct levels of the factor, SI (rev/s, m, kg/m^3).
    fixed : dict
        The other factors, SI.
    test : str
        What was compared and how.
    statistic : float
        F.
    df : tuple of int
    p_value : float
    different : bool
        p_value < alpha.
    direction : str
        ``"faster at higher"``, ``"slower at higher"``, ``"no consistent trend"`` (of the
        rate against the factor value), or ``"none"`` when not different.
    levels : list of dict
        Per level: ``value``, ``runs`` and ``measure`` (conversion at a common w t or time,
        or the mean rate).
    measure : str
        What ``measure`` is, with its unit.
    conclusion : str
        The trade's reading of the result, with its limits.
    """

    factor: str
    runs: tuple[str, ...]
    values: tuple[float, ...]
    fixed: dict[str, float]
    test: str
    statistic: float
    df: tuple[int, int]
    p_value: float
    different: bool
    direction: str
    levels: list[dict[str, Any]]
    measure: str
    conclusion: str

    def to_dict(self) -> dict[str, Any]:
        """Plain-type form (the ``model_free`` entries of diagnosis.json)."""
        return {
            "factor": self.factor, "runs": list(self.runs), "values": list(self.values),
            "fixed": dict(self.fixed), "test": self.test, "statistic": self.statistic,
            "df": list(self.df), "p_value": self.p_value, "different": bool(self.different),
            "direction": self.direction, "levels": self.levels, "measure": self.measure,
            "conclusion": self.conclusion,
        }


@dataclass(frozen=True)
class NotPossible:
    """A model-free test the data cannot support, and the runs that would make it possible."""

    factor: str
    message: str

    def to_dict(self) -> dict[str, str]:
        """Plain-type form."""
        return {"factor": self.factor, "message": self.message}


@dataclass(frozen=True)
class ModelFreeResult:
    """All model-free tests of a study."""

    tests: tuple[FactorTest, ...]
    not_possible: tuple[NotPossible, ...]
    alpha: float
    notes: tuple[str, ...] = field(default_factory=tuple)


# ----------------------------------------------------------------------------- comparisons
def _levels(runs: Sequence[Run], factor: str, values: Sequence[float], rtol: float
            ) -> NDArray[np.int_]:
    vals = np.asarray(values, dtype=float)
    out = []
    for r in runs:
        v = r.factor(factor)
        out.append(int(np.argmin(np.abs(vals - v) / np.maximum(np.abs(vals), 1e-300))))
    return np.asarray(out)


def _direction(values: Sequence[float], measure: Sequence[float]) -> str:
    order = np.argsort(values)
    d = np.diff(np.asarray(measure, dtype=float)[order])
    if np.all(d > 0):
        return "faster at higher"
    if np.all(d < 0):
        return "slower at higher"
    return "no consistent trend"


def compare_profiles(study: Study, cs: ComparisonSet, *, alpha: float = 0.05,
                     rtol: float = 0.01) -> FactorTest | NotPossible:
    """Extra-sum-of-squares F test of one smooth profile against one per level.

    Parameters
    ----------
    study : Study
        A batch (profile) campaign.
    cs : ComparisonSet
        Runs that differ only in ``cs.factor``.
    alpha : float
        Significance level.
    rtol : float
        Relative tolerance within which two factor values count as equal.

    Returns
    -------
    FactorTest, or NotPossible when the runs have too few points.
    """
    runs = [study.run(r) for r in cs.runs]
    level_of_run = _levels(runs, cs.factor, cs.values, rtol)
    scaled = cs.factor == "catalyst_loading"
    x = np.concatenate([r.times * (r.catalyst_loading if scaled else 1.0) for r in runs])
    y = np.concatenate([r.concentrations for r in runs])
    sw = np.sqrt(np.concatenate([r.weights for r in runs]))
    level = np.concatenate([np.full(r.n_obs, level_of_run[i]) for i, r in enumerate(runs)])
    x_max = float(x.max())
    if not x_max > 0:
        return NotPossible(cs.factor, f"runs {', '.join(cs.runs)} have no time span; a test "
                                      "needs points along each profile")
    xs = x / x_max
    n_levels = len(cs.values)
    fit = _select_basis(xs, y, sw, level, n_levels)
    weighting = ""
    if fit is not None and study.error_model == "proportional":
        # noise proportional to the concentration: weights 1/yhat^2 from the pooled curve,
        # the same for both models so that they stay nested (two-stage weighted least
        # squares; Carroll & Ruppert 1988, ch. 2, from memory)
        X = fit.basis(xs)
        _, _, coef = _wls(X, y, sw)
        yhat = np.abs(X @ coef)
        floor = 1e-3 * float(np.max(np.abs(y))) if y.size else 1.0
        sw = sw / np.maximum(yhat, max(floor, 1e-300))
        fit = _fit_levels(xs, y, sw, level, n_levels, fit.basis, fit.label)
        weighting = ", weighted 1/c^2 from the pooled curve (proportional noise)"
    if fit is None:
        counts = np.bincount(level, minlength=n_levels)
        return NotPossible(
            cs.factor,
            f"runs {', '.join(cs.runs)} differ only in {_NAMES[cs.factor]} but the level with "
            f"the fewest points has {int(counts.min())}; a test needs at least 4 points per "
            "profile (6 or more to follow its curvature): sample these runs more often",
        )
    n = y.size
    test = extra_sum_of_squares(fit.sse_pooled, n - fit.rank_pooled, fit.sse_separate,
                                n - fit.rank_separate)
    # direction: mean conversion of each level's smooth curve over the range every level
    # covers (the end point alone sits where conversion is nearly complete and noise rules)
    x_common = min(float(xs[level == g].max()) for g in range(n_levels))
    B = fit.basis(np.linspace(0.0, x_common, 41))
    c0 = float(np.mean([r.initial_concentration for r in runs]))
    conv = [float(np.mean(1.0 - (B @ fit.coefs[g]) / c0)) for g in range(n_levels)]
    levels = [{"value": float(v), "runs": [r.id for r, g in zip(runs, level_of_run, strict=True)
                                           if g == i], "measure": conv[i]}
              for i, v in enumerate(cs.values)]
    xname = "w t" if scaled else "t"
    xunit = "kg s/m^3" if scaled else "s"
    measure = (f"mean conversion [-] over {xname} = 0 to {x_common * x_max:.4g} {xunit} "
               "(smooth fit)")
    what = ("profiles against time multiplied by loading (w t)" if scaled
            else "profiles against time")
    label = (f"extra-sum-of-squares F test: one smooth curve vs one per level, {what}, "
             f"cubic regression spline ({fit.label}){weighting}, noise from the separate fits")
    different = bool(test.p_value < alpha)
    direction = _direction(cs.values, conv) if different else "none"
    return FactorTest(
        factor=cs.factor, runs=cs.runs, values=tuple(map(float, cs.values)),
        fixed=dict(cs.fixed), test=label, statistic=test.statistic, df=test.df,
        p_value=test.p_value, different=different, direction=direction, levels=levels,
        measure=measure, conclusion=_conclusion(cs, test.p_value, different, direction),
    )


def _replicate_noise(study: Study, log: bool) -> tuple[float, int]:
    """Pooled within-run sum of squares and its degrees of freedom over every run with
    replicate rates."""
    ss, df = 0.0, 0
    for r in study.runs:
        if r.rates.size >= 2:
            v = np.log(r.rates) if log else r.rates
            w = r.weights
            mean = np.sum(w * v) / np.sum(w)
            ss += float(np.sum(w * (v - mean) ** 2))
            df += r.rates.size - 1
    return ss, df


def compare_rates(study: Study, cs: ComparisonSet, *, alpha: float = 0.05,
                  rtol: float = 0.01) -> FactorTest | NotPossible:
    """One-way analysis of variance of the rates of the levels of a comparison set.

    Rates are per catalyst mass, so catalyst loading is compared directly. With a proportional
    or combined error model the logarithms of the rates are compared.

    Parameters
    ----------
    study : Study
        A rate campaign.
    cs : ComparisonSet
        Runs that differ only in ``cs.factor``.
    alpha : float
        Significance level.
    rtol : float
        Relative tolerance within which two factor values count as equal.

    Returns
    -------
    FactorTest, or NotPossible when the noise cannot be estimated.
    """
    runs = [study.run(r) for r in cs.runs]
    level_of_run = _levels(runs, cs.factor, cs.values, rtol)
    rates = np.concatenate([r.rates for r in runs])
    log = study.error_model != "constant" and bool(np.all(rates > 0))
    y = np.log(rates) if log else rates
    sw = np.sqrt(np.concatenate([r.weights for r in runs]))
    level = np.concatenate([np.full(r.n_obs, level_of_run[i]) for i, r in enumerate(runs)])
    n_levels = len(cs.values)
    fit = _fit_levels(y * 0.0, y, sw, level, n_levels, lambda z: np.ones((z.size, 1)),
                      "one constant per level")
    n = y.size
    noise = None
    source = "noise from replicates within the levels"
    if n - fit.rank_separate <= 0:
        ss, df = _replicate_noise(study, log)
        if df <= 0:
            return NotPossible(
                cs.factor,
                f"runs {', '.join(cs.runs)} differ only in {_NAMES[cs.factor]} but no rate is "
                "replicated anywhere in the study, so the noise is unknown; repeat one of "
                "these runs (or any run) at least once",
            )
        noise, source = (ss, df), f"noise from replicate rates elsewhere in the study ({df} df)"
    test = extra_sum_of_squares(fit.sse_pooled, n - fit.rank_pooled, fit.sse_separate,
                                n - fit.rank_separate, noise=noise)
    means = []
    for g in range(n_levels):
        m = level == g
        means.append(float(np.sum(sw[m] ** 2 * rates[m]) / np.sum(sw[m] ** 2)))
    levels = [{"value": float(v), "runs": [r.id for r, g in zip(runs, level_of_run, strict=True)
                                           if g == i], "measure": means[i]}
              for i, v in enumerate(cs.values)]
    label = (f"one-way analysis of variance of {'ln rate' if log else 'rate'} per catalyst "
             f"mass (extra-sum-of-squares F test), {source}")
    different = bool(test.p_value < alpha)
    direction = _direction(cs.values, means) if different else "none"
    return FactorTest(
        factor=cs.factor, runs=cs.runs, values=tuple(map(float, cs.values)),
        fixed=dict(cs.fixed), test=label, statistic=test.statistic, df=test.df,
        p_value=test.p_value, different=different, direction=direction, levels=levels,
        measure="mean observed rate per catalyst mass [mol/(kg*s)]",
        conclusion=_conclusion(cs, test.p_value, different, direction),
    )


# ----------------------------------------------------------------------------- words
def _p(p: float) -> str:
    return f"p = {p:.2g}" if p >= 1e-4 else "p < 0.0001"


def _conclusion(cs: ComparisonSet, p: float, different: bool, direction: str) -> str:
    f = cs.factor
    head = (f"{_NAMES[f]} {' vs '.join(format_factor(f, v) for v in cs.values)} at "
            f"{_conditions(f, dict(cs.fixed))}")
    if f == "stirrer_speed":
        if not different:
            return (f"{head}: no difference ({_p(p)}): film resistance negligible at these "
                    "conditions; this comparison leaves the pores untested (and holds only if "
                    "the film coefficient does change over this speed range, with the "
                    "particles suspended at the lowest speed)")
        if direction == "faster at higher":
            return (f"{head}: differ ({_p(p)}), faster at the higher speed: film resistance "
                    "at the lower speed(s); these runs are not intrinsic, raise the speed "
                    "until the rate stops changing")
        if direction == "slower at higher":
            return (f"{head}: differ ({_p(p)}), slower at the higher speed: not a film effect "
                    "(film transport only improves with speed); look for catalyst attrition, "
                    "a vortex drawing gas in, or a drift between runs")
        return (f"{head}: differ ({_p(p)}) with no consistent trend in speed: run-to-run "
                "variation beyond the noise rather than film resistance; repeat a run to "
                "check reproducibility")
    if f == "particle_diameter":
        if not different:
            return (f"{head}: no difference ({_p(p)}): at one stirrer speed the size leaves "
                    "the rate unchanged, so neither the film nor the pores limit it here "
                    "(eta = 1)")
        if direction == "slower at higher":
            return (f"{head}: differ ({_p(p)}), slower in the larger particles: transport "
                    "resistance in the larger particles, pore diffusion (eta < 1) and/or film "
                    "(the external area per mass falls as 1/dp); a stirrer-speed test at the "
                    "larger size separates the two")
        if direction == "faster at higher":
            return (f"{head}: differ ({_p(p)}), faster in the larger particles: not what film "
                    "or pore transport predicts; check that the sieve fractions are the same "
                    "catalyst (active-phase distribution such as an egg-shell, damage from "
                    "crushing) and for a drift between runs")
        return (f"{head}: differ ({_p(p)}) with no consistent trend in size: run-to-run "
                "variation beyond the noise; repeat a run to check reproducibility")
    # catalyst loading: compared per catalyst mass
    if not different:
        return (f"{head}: no difference in the rate per catalyst mass ({_p(p)}): the rate "
                "scales with the catalyst mass, so no supply limit per reactor volume (such "
                "as gas-liquid transfer of a dissolved reactant); film and pore transport at "
                "the particles are not tested, since they scale with the catalyst mass too")
    if direction == "slower at higher":
        return (f"{head}: differ ({_p(p)}), the rate per catalyst mass falls as the loading "
                "rises: a supply per reactor volume limits at the higher loading (gas-liquid "
                "transfer of a dissolved reactant, or heat removal); use the lower loading")
    if direction == "faster at higher":
        return (f"{head}: differ ({_p(p)}), the rate per catalyst mass rises with the "
                "loading: not a transport effect; a poison consumed by the catalyst (a fixed "
                "amount titrated away) or an error in the weighed catalyst mass")
    return (f"{head}: differ ({_p(p)}) with no consistent trend in loading: run-to-run "
            "variation beyond the noise; repeat a run to check reproducibility")


def _cross_reference(tests: list[FactorTest], rtol: float) -> list[FactorTest]:
    """Add to each particle-size difference what the stirrer-speed test at the larger size
    says (film present or not), which tells pore diffusion from film resistance."""
    from dataclasses import replace

    speed_tests = [t for t in tests if t.factor == "stirrer_speed"]
    out = []
    for t in tests:
        if t.factor == "particle_diameter" and t.different and t.direction == "slower at higher":
            dp = max(t.values)
            for s in speed_tests:
                same = all(
                    abs(s.fixed[k] - t.fixed[k]) <= rtol * abs(t.fixed[k])
                    for k in ("temperature", "catalyst_loading", "initial_concentration")
                ) and abs(s.fixed["particle_diameter"] - dp) <= rtol * dp
                if not same or not any(abs(v - t.fixed["stirrer_speed"]) <= rtol * v
                                       for v in s.values):
                    continue
                if s.different and s.direction == "faster at higher":
                    extra = (f"; the stirrer-speed test at {format_factor('particle_diameter', dp)}"
                             " found a film effect, so at least part of it is film resistance")
                else:
                    extra = (f"; the stirrer-speed test at {format_factor('particle_diameter', dp)}"
                             " found no film effect, so it is pore diffusion (eta < 1 in the "
                             "larger particles)")
                t = replace(t, conclusion=t.conclusion + extra)
                break
        out.append(t)
    return out


def _transport_prone(study: Study) -> Run:
    """The run where transport limits bite hardest: highest temperature, largest particles,
    lowest speed."""
    return max(study.runs, key=lambda r: (r.temperature, r.particle_diameter, -r.stirrer_speed))


def _suggest(factor: str, run: Run) -> str:
    v = run.factor(factor)
    if factor == "stirrer_speed":
        new = 2 * v if 2 * v * 60 <= _MAX_SUGGESTED_RPM else v / 2
        return format_factor(factor, new)
    if factor == "particle_diameter":
        return f"{format_factor(factor, v / 2)} (a finer sieve fraction)"
    return format_factor(factor, 2 * v)


def _not_possible(study: Study, factor: str, rtol: float) -> NotPossible:
    varied = study.varied_factors(rtol)
    run = _transport_prone(study)
    tail = (f"repeat run '{run.id}' (highest temperature, largest particles: where transport "
            f"bites hardest) at {_NAMES[factor]} {_suggest(factor, run)} with everything else "
            "unchanged")
    if factor not in varied:
        value = format_factor(factor, study.runs[0].factor(factor))
        return NotPossible(factor, f"{_NAMES[factor]} is {value} in every run, so "
                                   f"{_MEANING[factor]} cannot be tested from the data; {tail}")
    others = [f for f in FACTORS if f != factor]
    best: tuple[int, list[str]] | None = None
    for i, a in enumerate(study.runs):
        for b in study.runs[i + 1:]:
            if abs(a.factor(factor) - b.factor(factor)) <= rtol * abs(a.factor(factor)):
                continue
            diff = [f for f in others
                    if abs(a.factor(f) - b.factor(f)) > rtol * abs(a.factor(f))]
            if (a.group or "") != (b.group or ""):
                diff.append("group")
            if best is None or len(diff) < best[0]:
                best = (len(diff), diff)
    levels = ", ".join(format_factor(factor, v) for v in varied[factor])
    also = ", ".join(_NAMES.get(f, f) for f in (best[1] if best else []))
    return NotPossible(factor, f"{_NAMES[factor]} takes the values {levels} but never alone: "
                               f"runs that differ in it also differ in {also}; {tail}")


def model_free_tests(study: Study, *, alpha: float = 0.05, rtol: float = 0.01
                     ) -> ModelFreeResult:
    """Every model-free transport test the study supports.

    Parameters
    ----------
    study : Study
    alpha : float
        Significance level of the tests (default 0.05).
    rtol : float
        Relative tolerance within which two factor values count as equal.

    Returns
    -------
    ModelFreeResult
        The tests that could be made, and for each factor that could not be tested, why not
        and which runs would make it possible.
    """
    tests: list[FactorTest] = []
    missing: list[NotPossible] = []
    for factor in TESTED_FACTORS:
        sets = comparison_sets(study, factor, rtol=rtol)
        if not sets:
            missing.append(_not_possible(study, factor, rtol))
            continue
        for cs in sets:
            compare = compare_rates if study.kind == "rate" else compare_profiles
            res = compare(study, cs, alpha=alpha, rtol=rtol)
            if isinstance(res, FactorTest):
                tests.append(res)
            else:
                missing.append(res)
    notes = []
    if len(tests) >= 5:
        chance = sum(t.different for t in tests)
        notes.append(f"{len(tests)} model-free tests at alpha = {alpha:g}: about "
                     f"{len(tests) * alpha:.1f} differences are expected by chance alone "
                     f"({chance} found); a difference with p just below alpha that breaks the "
                     "pattern of the other tests deserves a repeat run before it is believed")
    if study.kind == "profile" and study.error_model == "combined":
        notes.append("the model-free profile tests weight for a constant or a proportional "
                     "noise level along each profile, not for the study's 'combined' error "
                     "model; they were run with constant noise")
    return ModelFreeResult(tuple(_cross_reference(tests, rtol)), tuple(missing), float(alpha),
                           tuple(notes))
