"""Falsified kinetics: the apparent activation energy and order that the campaign shows at fixed
stirrer speed and particle size, against the intrinsic ones from the transport-aware fit.

For each set of runs at one stirrer speed, one particle diameter (and one catalyst batch)
spanning two or more temperatures, a power law with no transport at all,

.. math:: r = k_{app}(T)\\,(C/C_{ref})^{n_{app}},

is fitted: to the batch profiles through the closed-form solution of dC/dt = -w r(C), or to the
observed rates of a rate campaign; one k_app per temperature and one shared apparent order.
Then ln k_app is regressed on 1/T (Arrhenius), weighted by the variances of ln k_app, with a
95 % interval for E_app.

Strong pore diffusion halves the activation energy and takes the order to (n + 1)/2
(E_app = (E + E_D)/2; Weisz & Prater 1954; Satterfield 1970; from memory,
section 2); film control gives an apparent activation energy near zero (that of the film
coefficient, through the molecular diffusivity and viscosity) and an apparent first order.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import optimize, stats

from kinfit.study import Run, Study

__all__ = [
    "GAS_CONSTANT",
    "ArrheniusFit",
    "ApparentGroup",
    "FalsifiedResult",
    "arrhenius_regression",
    "power_law_profile",
    "apparent_group",
    "falsified_kinetics",
]

Array = NDArray[np.float64]
#: molar gas constant, J/(mol K) (exact in the 2019 SI: N_A k_B)
GAS_CONSTANT = 8.314462618


@dataclass(frozen=True)
class ArrheniusFit:
    """ln k = ln k_mid - E/R (1/T - 1/T_mid) fitted to per-temperature rate constants.

    Attributes
    ----------
    activation_energy : float
        J/mol.
    stderr : float or None
        J/mol.
    ci95 : tuple of float or None
        J/mol.
    method : str
        Weighting and the quantile used.
    """

    activation_energy: float
    stderr: float | None
    ci95: tuple[float, float] | None
    method: str


def arrhenius_regression(T: Array, ln_k: Array, ln_k_se: Array | None = None) -> ArrheniusFit:
    """Weighted straight line of ln k against 1/T.

    Parameters
    ----------
    T : ndarray, shape (n,)
        Temperatures, K (n >= 2, distinct).
    ln_k : ndarray, shape (n,)
        ln of the rate constants.
    ln_k_se : ndarray, optional
        Standard errors of ln k. With them the fit is weighted by 1/se^2; with three or more
        temperatures the covariance is scaled by the reduced chi-square when it exceeds 1 (the
        Birge ratio, common practice) and the interval uses Student's t on n - 2 degrees of
        freedom; otherwise the normal quantile. Without them: ordinary least squares with t on
        n - 2 degrees of freedom (no interval from two temperatures).

    Returns
    -------
    ArrheniusFit
    """
    T = np.asarray(T, dtype=float)
    y = np.asarray(ln_k, dtype=float)
    x = 1.0 / T
    X = np.column_stack([np.ones_like(x), x - x.mean()])
    n = x.size
    weighted = ln_k_se is not None and np.all(np.isfinite(ln_k_se)) and np.all(
        np.asarray(ln_k_se) > 0)
    if weighted:
        w = 1.0 / np.asarray(ln_k_se, dtype=float) ** 2
        A = X.T @ (X * w[:, None])
        beta = np.linalg.solve(A, X.T @ (w * y))
        cov = np.linalg.inv(A)
        q = float(stats.norm.ppf(0.975))
        method = "weighted by 1/se(ln k)^2, normal quantile"
        if n > 2:
            chi2 = float(np.sum(w * (y - X @ beta) ** 2) / (n - 2))
            if chi2 > 1.0:
                cov = cov * chi2
                q = float(stats.t.ppf(0.975, n - 2))
                method = (f"weighted by 1/se(ln k)^2, scaled by the reduced chi-square "
                          f"{chi2:.3g}, t quantile on {n - 2} df")
    else:
        beta, *_ = np.linalg.lstsq(X, y, rcond=None)
        if n > 2:
            s2 = float(np.sum((y - X @ beta) ** 2) / (n - 2))
            cov = s2 * np.linalg.inv(X.T @ X)
            q = float(stats.t.ppf(0.975, n - 2))
            method = f"unweighted, t quantile on {n - 2} df"
        else:
            cov, q, method = None, None, "two temperatures without standard errors: no interval"
    E = float(-beta[1] * GAS_CONSTANT)
    if cov is None:
        return ArrheniusFit(E, None, None, method)
    se = float(np.sqrt(cov[1, 1]) * GAS_CONSTANT)
    return ArrheniusFit(E, se, (E - q * se, E + q * se), method)  # type: ignore[operator]


def power_law_profile(c0: Array, tau: Array, n: float) -> Array:
    """Solution of dc/dtau = -c^n, c(0) = c0 (dimensionless), for an order n >= 0.

    c = c0 (1 + (n - 1) tau c0^(n-1))^(-1/(n-1)); c0 exp(-tau) at n = 1; zero once consumed
    for n < 1 (derived by separation of variables).

    Parameters
    ----------
    c0 : ndarray
        Initial concentration over C_ref.
    tau : ndarray
        w k t / C_ref (dimensionless time), broadcastable with ``c0``.
    n : float
        Order, >= 0.
    """
    c0 = np.asarray(c0, dtype=float)
    tau = np.asarray(tau, dtype=float)
    if n == 1.0:
        return c0 * np.exp(-tau)
    # log1p keeps full precision for orders next to 1 (no cancellation in u / (n - 1))
    u = (n - 1.0) * tau * c0 ** (n - 1.0)
    base = 1.0 + u
    with np.errstate(divide="ignore", invalid="ignore"):
        out = c0 * np.exp(-np.log1p(np.maximum(u, -1.0 + 1e-300)) / (n - 1.0))
    return np.where(base > 0, out, 0.0)


@dataclass(frozen=True)
class ApparentGroup:
    """Apparent kinetics of the runs at one stirrer speed and particle size.

    Attributes
    ----------
    stirrer_speed : float
        rev/s.
    particle_diameter : float
        m.
    group : str or None
    runs : tuple of str
    per_temperature : list of dict
        ``temperature`` (K), ``k_apparent`` (mol/(kg s) at C_ref), ``k_apparent_ci95``,
        ``ln_k_stderr``, ``runs``.
    apparent_order : float or None
        None when the runs cannot identify it (a rate campaign with one initial
        concentration per temperature); the order then fixed is ``order_used``.
    order_stderr : float or None
    order_used : float
    arrhenius : ArrheniusFit
    """

    stirrer_speed: float
    particle_diameter: float
    group: str | None
    runs: tuple[str, ...]
    per_temperature: list[dict[str, Any]]
    apparent_order: float | None
    order_stderr: float | None
    order_used: float
    arrhenius: ArrheniusFit

    def to_dict(self) -> dict[str, Any]:
        """Plain-type form."""
        a = self.arrhenius
        return {
            "stirrer_speed": self.stirrer_speed, "particle_diameter": self.particle_diameter,
            "group": self.group, "runs": list(self.runs), "per_temperature": self.per_temperature,
            "apparent_activation_energy": a.activation_energy,
            "apparent_activation_energy_stderr": a.stderr,
            "apparent_activation_energy_ci95": None if a.ci95 is None else list(a.ci95),
            "arrhenius_method": a.method, "apparent_order": self.apparent_order,
            "apparent_order_stderr": self.order_stderr, "order_used": self.order_used,
        }


def _levels(values: list[float], rtol: float) -> list[float]:
    out: list[float] = []
    for v in sorted(values):
        if not out or abs(v - out[-1]) > rtol * abs(out[-1]):
            out.append(v)
    return out


def _index(v: float, levels: list[float]) -> int:
    return int(np.argmin([abs(v - lv) for lv in levels]))


def _start_k(r: Run, c_ref: float) -> float:
    """First-order rate constant (mol/(kg s) at C_ref) from the log-linear start of a profile."""
    c = r.concentrations
    keep = c > 0.1 * r.initial_concentration
    x = r.catalyst_loading * r.times[keep]
    if x.size >= 2 and np.ptp(x) > 0:
        slope = np.polyfit(x, np.log(c[keep] / r.initial_concentration), 1)[0]
        if slope < 0:
            return float(-slope * c_ref)
    span = max(float(r.catalyst_loading * r.times.max()), 1e-300)
    return float(c_ref / span)


def apparent_group(study: Study, runs: list[Run], *, order_if_unidentified: float = 1.0,
                   rtol: float = 0.01) -> ApparentGroup:
    """Fit k_app per temperature and one apparent order to runs at one speed and size.

    Parameters
    ----------
    study : Study
        For the campaign kind and the reference concentration.
    runs : list of Run
        At least two temperatures.
    order_if_unidentified : float
        Order used when the runs cannot identify one (rate campaign, one initial
        concentration per temperature).
    rtol : float
        Relative tolerance within which two temperatures count as equal.

    Returns
    -------
    ApparentGroup
    """
    c_ref = float(study.kinetics.get("reference_concentration", 1000.0))
    temps = _levels([r.temperature for r in runs], rtol)
    j_of_run = [_index(r.temperature, temps) for r in runs]
    nT = len(temps)
    if study.kind == "rate":
        c0_levels = [len(_levels([r.initial_concentration for r, j in zip(runs, j_of_run,
                                                                            strict=True)
                                  if j == jj], rtol)) for jj in range(nT)]
        fit_order = max(c0_levels) >= 2
        y = np.concatenate([r.rates for r in runs])
        sw = np.sqrt(np.concatenate([r.weights for r in runs]))
        jj = np.concatenate([np.full(r.n_obs, j) for r, j in zip(runs, j_of_run, strict=True)])
        c0 = np.concatenate([np.full(r.n_obs, r.initial_concentration / c_ref) for r in runs])
        k0 = np.array([max(float(np.mean(y[jj == j])), 1e-300) for j in range(nT)])

        def predict(p: Array) -> Array:
            n = p[nT] if fit_order else order_if_unidentified
            return np.exp(p[:nT])[jj] * c0**n
    else:
        fit_order = True
        y = np.concatenate([r.concentrations for r in runs])
        sw = np.sqrt(np.concatenate([r.weights for r in runs]))
        jj = np.concatenate([np.full(r.n_obs, j) for r, j in zip(runs, j_of_run, strict=True)])
        c0 = np.concatenate([np.full(r.n_obs, r.initial_concentration / c_ref) for r in runs])
        wt = np.concatenate([r.catalyst_loading * r.times for r in runs]) / c_ref
        k0 = np.array([np.exp(np.mean([np.log(_start_k(r, c_ref)) for r, j in
                                       zip(runs, j_of_run, strict=True) if j == jj_]))
                       for jj_ in range(nT)])

        def predict(p: Array) -> Array:
            return c_ref * power_law_profile(c0, np.exp(p[:nT])[jj] * wt, float(p[nT]))

    x0 = np.log(k0)
    lo, hi = np.full(nT, -np.inf), np.full(nT, np.inf)
    if fit_order:
        x0 = np.r_[x0, 1.2]
        lo, hi = np.r_[lo, 0.0], np.r_[hi, 3.0]
    scale = max(float(np.max(np.abs(y))), 1e-300)
    res = optimize.least_squares(lambda p: sw * (predict(p) - y) / scale, x0, bounds=(lo, hi),
                                 x_scale=1.0, xtol=1e-12, ftol=1e-12, gtol=1e-12)
    p = res.x
    dof = y.size - p.size
    se = np.full(p.size, np.nan)
    if dof > 0:
        s2 = float(2.0 * res.cost / dof)
        J = res.jac
        cov = s2 * np.linalg.pinv(J.T @ J)
        se = np.sqrt(np.maximum(np.diag(cov), 0.0))
    se_ln = se[:nT] if np.all(np.isfinite(se[:nT])) else None
    arr = arrhenius_regression(np.asarray(temps), p[:nT], se_ln)
    per_t = []
    z = float(stats.t.ppf(0.975, dof)) if dof > 0 else None
    for j, T in enumerate(temps):
        k = float(np.exp(p[j]))
        ci = None if se_ln is None or z is None else [float(np.exp(p[j] - z * se[j])),
                                                      float(np.exp(p[j] + z * se[j]))]
        per_t.append({"temperature": float(T), "k_apparent": k, "k_apparent_ci95": ci,
                      "ln_k_stderr": None if se_ln is None else float(se[j]),
                      "runs": [r.id for r, jr in zip(runs, j_of_run, strict=True) if jr == j]})
    order = float(p[nT]) if fit_order else None
    order_se = float(se[nT]) if fit_order and np.isfinite(se[nT]) else None
    r0 = runs[0]
    return ApparentGroup(r0.stirrer_speed, r0.particle_diameter, r0.group,
                         tuple(r.id for r in runs), per_t, order, order_se,
                         order if order is not None else float(order_if_unidentified), arr)


@dataclass(frozen=True)
class FalsifiedResult:
    """Apparent against intrinsic kinetics.

    Attributes
    ----------
    intrinsic_activation_energy : float or None
        J/mol, from the transport-aware fit.
    intrinsic_order : float or None
    groups : tuple of ApparentGroup
        One per (stirrer speed, particle size, batch) spanning two or more temperatures.
    primary : int or None
        Index of the group reported at the top level (the most temperatures, then the most
        observations).
    warnings : tuple of str
        Differences that transport limits explain, in the trade's words.
    summary : tuple of str
        Statements of agreement and of what could not be done.
    intrinsic_activation_energy_stderr : float or None
        J/mol, as the fit gave it.
    """

    intrinsic_activation_energy: float | None
    intrinsic_order: float | None
    groups: tuple[ApparentGroup, ...]
    primary: int | None
    warnings: tuple[str, ...] = field(default_factory=tuple)
    summary: tuple[str, ...] = field(default_factory=tuple)
    intrinsic_activation_energy_stderr: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """The ``falsified`` block of diagnosis.json (J/mol, K, mol/(kg s) at C_ref)."""
        g = self.groups[self.primary] if self.primary is not None else None
        a = g.arrhenius if g is not None else None
        return {
            "intrinsic_activation_energy": self.intrinsic_activation_energy,
            "intrinsic_activation_energy_stderr": self.intrinsic_activation_energy_stderr,
            "apparent_activation_energy": None if a is None else a.activation_energy,
            "apparent_activation_energy_stderr": None if a is None else a.stderr,
            "apparent_activation_energy_ci95": None if a is None or a.ci95 is None
            else list(a.ci95),
            "conditions": None if g is None else {
                "stirrer_speed": g.stirrer_speed, "particle_diameter": g.particle_diameter,
                "group": g.group},
            "per_temperature": [] if g is None else g.per_temperature,
            "intrinsic_order": self.intrinsic_order,
            "apparent_order": None if g is None else g.apparent_order,
            "apparent_order_stderr": None if g is None else g.order_stderr,
            "groups": [x.to_dict() for x in self.groups],
            "warnings": list(self.warnings),
            "summary": list(self.summary),
            "units": {"activation_energy": "J/mol", "temperature": "K",
                      "k_apparent": "mol/(kg*s) at the reference concentration",
                      "stirrer_speed": "1/s (revolutions per second)",
                      "particle_diameter": "m"},
        }


def _where(g: ApparentGroup) -> str:
    return (f"{g.stirrer_speed * 60:.4g} rpm, {g.particle_diameter * 1e6:.4g} µm"
            + (f", batch {g.group}" if g.group else ""))


def _judge(g: ApparentGroup, E: float, E_se: float | None, n: float | None
           ) -> tuple[list[str], list[str]]:
    """Warnings and agreement statements for one group against the intrinsic values."""
    warn: list[str] = []
    info: list[str] = []
    a = g.arrhenius
    Ea = a.activation_energy
    ratio = Ea / E if E > 0 else np.nan
    if a.ci95 is not None and a.stderr:
        # both uncertainties, with the quantile of the Arrhenius interval (t on few
        # temperatures); the intrinsic standard error only when it is sane (with unidentified
        # film or pore parameters the linearised one can be meaningless)
        q = 0.5 * (a.ci95[1] - a.ci95[0]) / a.stderr
        se_int = E_se if E_se is not None and 0.0 < E_se < 0.5 * abs(E) else 0.0
        significant = abs(Ea - E) > q * float(np.hypot(a.stderr, se_int))
    else:
        significant = abs(ratio - 1.0) > 0.15
    ci = "" if a.ci95 is None else f", 95 % [{a.ci95[0] / 1e3:.3g}, {a.ci95[1] / 1e3:.3g}]"
    head = (f"at {_where(g)}: apparent activation energy {Ea / 1e3:.3g} kJ/mol{ci} against "
            f"the intrinsic {E / 1e3:.3g} kJ/mol (ratio {ratio:.2f})")
    n_app = g.apparent_order
    order_txt = "" if n_app is None else f"; apparent order {n_app:.2f}"
    if not significant and abs(ratio - 1.0) <= 0.15:
        info.append(f"{head}{order_txt}: they agree, no sign of falsification by transport")
    elif not significant:
        info.append(f"{head}{order_txt}: the difference is within the uncertainty; more "
                    "temperatures would tell whether transport falsifies these runs")
    elif abs(ratio - 1.0) < 0.1:
        info.append(f"{head}{order_txt}: within 10 % although statistically different: a "
                    "small transport effect at the higher temperatures, or a small bias of "
                    "either estimate")
    elif ratio < 0.3:
        expect = "" if n_app is None else f" (found {n_app:.2f})"
        warn.append(f"{head}: near zero, as film control predicts (the film coefficient rises "
                    "only slowly with temperature, through the diffusivity and viscosity); "
                    f"film control also gives an apparent first order{expect}")
    elif ratio <= 0.65:
        nn = "" if n is None else (f"; strong pore diffusion also takes the order to (n + 1)/2 "
                                   f"= {(n + 1) / 2:.2f}"
                                   + ("" if n_app is None else f" (found {n_app:.2f})"))
        warn.append(f"{head}: about half, as strong pore diffusion predicts (E_app = (E + E_D)/2;"
                    f" Weisz & Prater 1954; Satterfield 1970){nn}")
    elif ratio < 1.0:
        warn.append(f"{head}{order_txt}: between E/2 and E, partly falsified: a mixed regime, "
                    "with transport limits growing at the higher temperatures")
    else:
        warn.append(f"{head}{order_txt}: above the intrinsic value, which transport limits "
                    "cannot cause; check the temperature measurement, catalyst deactivation "
                    "during the campaign, or the fitted model")
    if n is not None and n_app is not None and g.order_stderr is not None:
        if abs(n_app - n) > 1.96 * g.order_stderr and abs(n_app - n) > 0.1 and not (
                significant and ratio <= 0.65):
            warn.append(f"at {_where(g)}: apparent order {n_app:.2f} +- {g.order_stderr:.2f} "
                        f"differs from the intrinsic {n:.2f}; strong pore diffusion gives "
                        f"(n + 1)/2 = {(n + 1) / 2:.2f} and film control gives 1")
    return warn, info


def _compare_groups(groups: list[ApparentGroup], rtol: float) -> list[str]:
    """Warn when E_app changes with particle size (or speed) at otherwise equal conditions."""
    out = []
    for i, a in enumerate(groups):
        for b in groups[i + 1:]:
            same_n = abs(a.stirrer_speed - b.stirrer_speed) <= rtol * max(a.stirrer_speed, 1e-300)
            same_d = abs(a.particle_diameter - b.particle_diameter) <= rtol * a.particle_diameter
            if (a.group or "") != (b.group or "") or same_n == same_d:
                continue
            ea, eb = a.arrhenius, b.arrhenius
            if not (ea.stderr and eb.stderr and ea.ci95 and eb.ci95):
                continue
            # the larger of the two intervals' quantiles (t on few temperatures)
            q = max(0.5 * (ea.ci95[1] - ea.ci95[0]) / ea.stderr,
                    0.5 * (eb.ci95[1] - eb.ci95[0]) / eb.stderr)
            diff = ea.activation_energy - eb.activation_energy
            if abs(diff) > q * np.hypot(ea.stderr, eb.stderr):
                what = "particle size" if same_n else "stirrer speed"
                out.append(f"the apparent activation energy changes with {what}: "
                           f"{ea.activation_energy / 1e3:.3g} kJ/mol at {_where(a)} against "
                           f"{eb.activation_energy / 1e3:.3g} kJ/mol at {_where(b)}; transport "
                           "falsifies the kinetics where it is lower")
    return out


def falsified_kinetics(study: Study, *, intrinsic_activation_energy: float | None = None,
                       intrinsic_activation_energy_stderr: float | None = None,
                       intrinsic_order: float | None = None, rtol: float = 0.01
                       ) -> FalsifiedResult:
    """Apparent activation energy and order at each speed and size, against the intrinsic.

    Parameters
    ----------
    study : Study
    intrinsic_activation_energy : float, optional
        J/mol, from the transport-aware fit.
    intrinsic_activation_energy_stderr : float, optional
        J/mol; combined with the apparent one when it is below half the estimate (a
        linearised standard error of a poorly identified fit is ignored).
    intrinsic_order : float, optional
    rtol : float
        Relative tolerance within which two factor values count as equal.

    Returns
    -------
    FalsifiedResult
    """
    keys: list[tuple[float, float, str]] = []
    members: list[list[Run]] = []
    for r in study.runs:
        for i, (N, dp, grp) in enumerate(keys):
            if (grp == (r.group or "") and abs(r.stirrer_speed - N) <= rtol * max(N, 1e-300)
                    and abs(r.particle_diameter - dp) <= rtol * dp):
                members[i].append(r)
                break
        else:
            keys.append((r.stirrer_speed, r.particle_diameter, r.group or ""))
            members.append([r])
    groups: list[ApparentGroup] = []
    for runs in members:
        if len(_levels([r.temperature for r in runs], rtol)) < 2:
            continue
        groups.append(apparent_group(study, runs, order_if_unidentified=(
            intrinsic_order if intrinsic_order is not None else 1.0), rtol=rtol))
    summary: list[str] = []
    warn: list[str] = []
    if not groups:
        summary.append("no stirrer speed and particle size was run at two or more "
                       "temperatures: the apparent activation energy cannot be measured; run "
                       "one condition at three temperatures")
        return FalsifiedResult(intrinsic_activation_energy, intrinsic_order, (), None, (),
                               tuple(summary), intrinsic_activation_energy_stderr)
    primary = max(range(len(groups)), key=lambda i: (len(groups[i].per_temperature),
                                                      len(groups[i].runs), -i))
    if study.kind == "rate" and any(g.apparent_order is None for g in groups):
        summary.append("one initial concentration per temperature: the apparent order is not "
                       "identified; k_app uses the order "
                       f"{groups[primary].order_used:.3g}")
    if intrinsic_activation_energy is not None:
        for g in groups:
            warn_g, info_g = _judge(g, float(intrinsic_activation_energy),
                                    intrinsic_activation_energy_stderr, intrinsic_order)
            warn += warn_g
            summary += info_g
    else:
        summary.append("no intrinsic activation energy to compare with (no fit)")
    warn += _compare_groups(groups, rtol)
    return FalsifiedResult(intrinsic_activation_energy, intrinsic_order, tuple(groups), primary,
                           tuple(warn), tuple(summary), intrinsic_activation_energy_stderr)
