"""Phase-plane solution of the isothermal n-th order pellet: the exact effectiveness factor on
the nodes of the interpolation tables of :mod:`kinfit.physics.pellet._power_table` (private).

The pellet problem for :math:`r_v = k_v (C/C_{ref})^n` in a slab, infinite cylinder or sphere
(shape index :math:`a` = 0, 1, 2) is, with :math:`u = C/C_s` and :math:`\\xi = r/R`,

.. math:: u'' + \\frac{a}{\\xi} u' = \\phi_R^2 u^n, \\qquad u'(0) = 0,\\; u(1) = 1,
          \\qquad \\eta = \\frac{(a+1)\\,u'(1)}{\\phi_R^2},

and the generalised modulus is :math:`\\Phi = \\phi_R \\sqrt{(n+1)/2}/(a+1)`.

How the table is built (derived here; no boundary-value solves):

* **Scaling.** If :math:`v(t)` solves :math:`v'' + (a/t) v' = v^n`, :math:`v(0) = 1`,
  :math:`v'(0) = 0`, then :math:`u(\\xi) = v(T\\xi)/v(T)` solves the pellet problem with
  :math:`\\phi_R^2 = T^2 v(T)^{n-1}`. With :math:`z = t v'/v` and :math:`q = t^2 v^{n-1}` the
  whole family is one trajectory of the autonomous system (:math:`\\tau = \\ln t`)

  .. math:: \\dot z = q + (1-a) z - z^2, \\qquad \\dot q = q\\,(2 + (n-1) z),

  leaving the origin along :math:`z = q/(a+1)`. On it :math:`q = \\phi_R^2`, :math:`z = u'(1)`
  and :math:`\\eta = (a+1) z/q`.
* **Dead zone** (:math:`n < 1`). The trajectory ends at the fixed point
  :math:`z = p = 2/(1-n)`, :math:`q_c = p(p-1+a)`: the profile :math:`u = \\xi^p` whose centre
  concentration just reaches zero, at :math:`\\Phi_c = \\sqrt{q_c (n+1)/2}/(a+1)`
  (slab: :math:`\\Phi_c = (1+n)/(1-n)`) with :math:`\\eta_c = (a+1)/(p-1+a)`. Beyond it a dead
  core of radius :math:`\\xi_c` forms. In :math:`Z = 1/z`, :math:`R = q/z^2` and the time
  :math:`d\\theta = z\\,d\\tau` those profiles form the unstable manifold of the saddle
  :math:`(0, (n+1)/2)` (a vanishing active shell), which ends at the same fixed point.
* **Strong diffusion.** Near :math:`Z = 0` the manifold is a power series
  :math:`R = \\sum_k r_k Z^k` (recursion below), which gives the large-modulus expansion
  :math:`\\eta\\Phi = 1 - a(n+1)/((n+3)(a+1)\\Phi) + O(\\Phi^{-2})`. For :math:`n > 1` the series
  stops before the resonant order :math:`k = 2(n+1)/(n-1)`, where the centre of the pellet
  enters.
* **Small modulus:** :math:`\\eta = 1 - \\frac{2n(1+a)}{(n+1)(3+a)}\\Phi^2 + O(\\Phi^4)`.

The trajectories are integrated with ``solve_ivp`` (DOP853, rtol 1e-12), all orders of a group at
once; :func:`grid_values` returns the values on the nodes of the three tables (see
:mod:`kinfit.physics.pellet._power_table`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.interpolate import make_interp_spline

from kinfit.errors import SolverError
from kinfit.physics.geometry import GEOMETRIES


def _solve_ivp(*args, **kwargs):
    """scipy's solve_ivp, imported on first use (only table builds need it)."""
    from scipy.integrate import solve_ivp

    return solve_ivp(*args, **kwargs)

__all__ = [
    "SHAPE_INDEX",
    "GRIDS",
    "nodes",
    "critical_modulus",
    "small_modulus_coefficient",
    "large_modulus_coefficient",
    "grid_values",
]

Array = NDArray[Any]          # float, index and mask arrays alike

#: Shape index a of the pellet equation u'' + (a/xi) u' = phi^2 u^n for each geometry name.
SHAPE_INDEX = {g: i for i, g in enumerate(GEOMETRIES)}
_RTOL = 1e-12
_LN10 = np.log(10.0)
#: Table grids as (first, last, step): log10 Phi and orders of the ``high`` table, orders of the
#: low-order tables, omega of the ``centre`` table and mu of the ``dead`` table.
GRIDS = {
    "x": (-4.2, 6.2, 0.02),
    "n_high": (0.45, 3.0, 0.05),
    "n_low": (0.0, 0.6, 0.05),
    "omega": (-21.0, 25.0, 0.1),
    "mu": (-22.0, 32.0, 0.1),
}


def nodes(spec: tuple[float, float, float]) -> Array:
    """Uniform grid nodes of a (first, last, step) specification."""
    first, last, step = spec
    count = int(round((last - first) / step)) + 1
    return first + step * np.arange(count)


def critical_modulus(n: Array, a: int) -> Array:
    """Generalised modulus at which the centre concentration reaches zero (orders < 1).

    .. math:: \\Phi_c = \\frac{\\sqrt{p(p-1+a)(n+1)/2}}{a+1}, \\qquad p = \\frac{2}{1-n}

    (derived: the profile is then exactly :math:`u = \\xi^p`); ``inf`` for ``n >= 1``.
    """
    n = np.asarray(n, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        p = 2.0 / (1.0 - n)
        phi_c = np.sqrt(p * (p - 1.0 + a) * (n + 1.0) * 0.5) / (a + 1.0)
    return np.where(n < 1.0, phi_c, np.inf)


def small_modulus_coefficient(n: Array, a: int) -> Array:
    """c in eta = 1 - c Phi^2 + O(Phi^4): c = 2n(1+a)/((n+1)(3+a)) (derived; 1/3, 1/2, 3/5 at
    first order)."""
    n = np.asarray(n, dtype=float)
    return 2.0 * n * (1.0 + a) / ((n + 1.0) * (3.0 + a))


def large_modulus_coefficient(n: Array, a: int) -> Array:
    """c1 in eta Phi = 1 - c1/Phi + O(Phi^-2): c1 = a(n+1)/((n+3)(a+1)) (derived from the
    slow-manifold series; 1/3 sphere and 1/4 cylinder at first order, 0 for a slab)."""
    n = np.asarray(n, dtype=float)
    return a * (n + 1.0) / ((n + 3.0) * (a + 1.0))


# ---------------------------------------------------------------------------------------------
# series


def _manifold_series(a: int, n: float, K: int) -> Array:
    """Coefficients r_0..r_K of the invariant manifold R(Z) through (0, (n+1)/2).

    Substituting R = sum r_k Z^k into Z (1 - R - (1-a) Z) R' = R (2aZ + n + 1 - 2R) gives
    r_k [k (1 - r_0) + 2 r_0] = (terms in r_1..r_{k-1}).
    """
    r = np.zeros(K + 1)
    r[0] = 0.5 * (n + 1.0)
    for k in range(1, K + 1):
        # coefficients of (1 - R - (1-a) Z) and (2aZ + n + 1 - 2R) with r_k still zero
        A = -r[: k + 1].copy()
        A[0] = 1.0 - r[0]
        A[1] -= 1.0 - a
        B = -2.0 * r[: k + 1]
        B[0] = 0.0
        B[1] += 2.0 * a
        lhs = sum(A[k - j] * j * r[j] for j in range(1, k))
        rhs = sum(r[j] * B[k - j] for j in range(0, k))
        r[k] = (rhs - lhs) / (k * A[0] + 2.0 * r[0])
    return r


def _series_order(n: float) -> int:
    """Number of manifold terms that stay clear of the resonance k = 2(n+1)/(n-1)."""
    if n <= 1.0:
        return 10
    k_res = 2.0 * (n + 1.0) / (n - 1.0)
    return int(min(10, np.ceil(k_res) - 1))


def _series_log_y(a: int, n: float, phi: Array) -> Array:
    """ln(eta Phi) from the manifold series at large Phi."""
    r = _manifold_series(a, n, _series_order(n))
    c = np.sqrt(0.5 * (n + 1.0)) / ((a + 1.0) * phi)      # Z = c sqrt(R)
    Z = c * np.sqrt(r[0])
    for _ in range(60):
        Z_new = c * np.sqrt(np.polyval(r[::-1], Z))
        done = np.all(np.abs(Z_new - Z) <= 1e-16 * Z)
        Z = Z_new
        if done:
            break
    return 0.5 * (np.log(r[0]) - np.log(np.polyval(r[::-1], Z)))


def _origin_state(a: int, n: Array, t2: Array) -> tuple[Array, Array, Array]:
    """(z, q, ln v) near the pellet centre from v = 1 + alpha t^2 + beta t^4 (t^2 given)."""
    alpha = 1.0 / (2.0 * (1.0 + a))
    beta = n / (8.0 * (1.0 + a) * (3.0 + a))
    q = t2 * (1.0 + (n - 1.0) * alpha * t2)
    z = 2.0 * alpha * t2 + (4.0 * beta - 2.0 * alpha**2) * t2**2
    lnv = alpha * t2 + (beta - 0.5 * alpha**2) * t2**2
    return z, q, lnv


# ---------------------------------------------------------------------------------------------
# trajectories


def _check(sol, what: str) -> None:
    if not sol.success:
        raise SolverError(f"power-law effectiveness table: {what} integration failed "
                          f"({sol.message})")


def _centre_branch_high(a: int, n: Array, x: Array) -> Array:
    """ln eta on the centre branch for orders >= 1 at log10 Phi nodes ``x``, shape
    (len(n), len(x)).

    Integrated in x = log10 Phi up to a switch modulus, the manifold series beyond it.
    """
    n = np.asarray(n, dtype=float)
    out = np.empty((n.size, x.size))
    # first order: the centre term is exponentially small beyond Phi = 20; above first order it
    # decays only as a power of Phi (large for n near 1), so integrate to 1e4
    groups = [(n <= 1.0 + 1e-12, np.log10(20.0)), (n > 1.0 + 1e-12, 4.0)]
    for mask, x_sw in groups:
        if not mask.any():
            continue
        ng = n[mask]
        x0 = x[0] - 0.4
        qfac = (a + 1.0) ** 2 * 2.0 / (ng + 1.0)          # q = qfac Phi^2
        q0 = qfac * 10.0 ** (2 * x0)
        alpha = 1.0 / (2.0 * (1.0 + a))
        t2 = q0.copy()
        for _ in range(4):
            t2 = q0 / (1.0 + (ng - 1.0) * alpha * t2)
        z0, _, _ = _origin_state(a, ng, t2)

        def rhs(xx, z, ng=ng, qfac=qfac):
            q = qfac * 10.0 ** (2.0 * xx)
            return 2.0 * _LN10 * (q + (1.0 - a) * z - z * z) / (2.0 + (ng - 1.0) * z)

        inside = x <= x_sw + 1e-12
        sol = _solve_ivp(rhs, (x0, x[inside][-1]), z0, method="DOP853", rtol=_RTOL,
                        atol=1e-300, t_eval=x[inside])
        _check(sol, "centre-branch (order >= 1)")
        Z = sol.y                                          # (len(ng), n_inside)
        q = qfac[:, None] * 10.0 ** (2.0 * x[inside])[None, :]
        rows = np.flatnonzero(mask)
        out[rows[:, None], np.flatnonzero(inside)[None, :]] = np.log((a + 1.0) * Z / q)
        phi_out = 10.0 ** x[~inside]
        for k, (row, nk) in enumerate(zip(rows, ng, strict=True)):
            out[row, ~inside] = _series_log_y(a, float(nk), phi_out) - np.log(phi_out)
            # the series must meet the integrated branch at the switch
            at_switch = _series_log_y(a, float(nk), np.array([10.0 ** x[inside][-1]]))[0]
            gap = abs(at_switch - np.log(Z[k, -1] * np.sqrt(0.5 * (nk + 1.0) / q[k, -1])))
            if gap > 1e-9:
                raise SolverError(f"power-law effectiveness table: large-modulus series misses "
                                  f"the integrated branch by {gap:.1e} (order {nk}, shape {a})")
    return out


@dataclass(frozen=True)
class _CentreLow:
    omega: Array        # fine omega nodes
    log_phi: Array      # (len(n), len(omega)) ln(Phi)
    log_eta: Array      # (len(n), len(omega))


def _centre_branch_low(a: int, n: Array, omega: Array) -> _CentreLow:
    """Centre branch for orders < 1 in omega = ln(1/w - 1), w = u_c^((1-n)/2).

    d omega/d tau = g z (1 + e^-omega) with g = (1-n)/2, so (z, q) are integrated in omega for all
    orders at once; the branch approaches its end point exponentially in omega.
    """
    n = np.asarray(n, dtype=float)
    g = 0.5 * (1.0 - n)
    om0 = omega[0] - 1.0
    lnv = np.log1p(np.exp(om0)) / g
    alpha = 1.0 / (2.0 * (1.0 + a))
    beta = n / (8.0 * (1.0 + a) * (3.0 + a))
    t2 = lnv / alpha
    for _ in range(4):
        t2 = (lnv - (beta - 0.5 * alpha**2) * t2**2) / alpha
    z0, q0, _ = _origin_state(a, n, t2)
    k = n.size

    def rhs(om, s):
        z, q = s[:k], s[k:]
        rate = g * z * (1.0 + np.exp(-om))
        dz = (q + (1.0 - a) * z - z * z) / rate
        return np.concatenate([dz, q * (2.0 + (n - 1.0) * z) / rate])

    sol = _solve_ivp(rhs, (om0, omega[-1]), np.concatenate([z0, q0]), method="DOP853", rtol=_RTOL,
                    atol=1e-300, t_eval=omega)
    _check(sol, "centre-branch (order < 1)")
    z, q = sol.y[:k], sol.y[k:]
    log_phi = 0.5 * np.log(q * 0.5 * (n[:, None] + 1.0)) - np.log(a + 1.0)
    log_eta = np.minimum(np.log((a + 1.0) * z / q), 0.0)
    return _CentreLow(omega, log_phi, log_eta)


def _dead_branch(a: int, n: Array, mu: list[Array]) -> list[Array]:
    """ln(eta Phi) on the dead-core branch for orders ``n`` (< 1) at mu = ln(q/q_c - 1).

    ``mu[k]`` are the nodes wanted for order ``n[k]``. All orders are integrated together in
    theta from the saddle (Z = 1e-9, R from the manifold series) until every one has reached
    its end point; each order's theta at the wanted mu is then found by Newton steps on the
    dense output.
    """
    n = np.asarray(n, dtype=float)
    if a == 0:
        return [np.zeros_like(m) for m in mu]     # slab: eta Phi = 1 exactly (first integral)
    k = n.size
    p = 2.0 / (1.0 - n)
    qc = p * (p - 1.0 + a)
    Z0 = 1e-9
    R0 = np.array([np.polyval(_manifold_series(a, float(nk), 6)[::-1], Z0) for nk in n])

    def rhs(th, s):
        Z, R = s[:k], s[k:]
        dZ = Z * (1.0 - R - (1.0 - a) * Z)
        return np.concatenate([dZ, R * (2.0 * a * Z + n + 1.0 - 2.0 * R)])

    def arrived(th, s):
        return np.max(s[k:] / s[:k] ** 2 / qc - 1.0) - 1e-12

    arrived.terminal = True  # type: ignore[attr-defined]
    sol = _solve_ivp(rhs, (0.0, 1e5), np.concatenate([np.full(k, Z0), R0]), method="DOP853",
                    rtol=_RTOL, atol=1e-300, dense_output=True, events=[arrived])
    _check(sol, "dead-core branch")
    if sol.status != 1:
        raise SolverError("power-law effectiveness table: dead-core branch did not reach its end "
                          f"point (shape {a})")
    # Newton on theta for every (order, node) pair at once, from the step points
    comp = np.concatenate([np.full(m.size, i, dtype=np.intp) for i, m in enumerate(mu)])
    target = np.concatenate(mu)
    th = np.empty(target.size)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio_steps = sol.y[k:] / sol.y[:k] ** 2 / qc[:, None]
        mu_steps = np.log(ratio_steps - 1.0)      # decreasing in theta until round-off
    t_lo, t_hi = np.empty(target.size), np.empty(target.size)
    for i in range(k):
        ok = np.flatnonzero(np.isfinite(mu_steps[i]) & (mu_steps[i] > np.log(1e-13)))
        sel = comp == i
        th[sel] = np.interp(target[sel], mu_steps[i, ok][::-1], sol.t[ok][::-1])
        t_lo[sel], t_hi[sel] = sol.t[ok[0]], sol.t[ok[-1]]
    cols = np.arange(target.size)

    def state(th):
        Y = sol.sol(th)
        return Y[comp, cols], Y[k + comp, cols]

    def mu_of(Z, R):
        return np.log(R / Z**2 / qc[comp] - 1.0)

    for _ in range(4):
        Z, R = state(th)
        ratio = R / Z**2 / qc[comp]
        dmu = ratio / (ratio - 1.0) * (n[comp] - 1.0 + 2.0 * Z)
        th = np.clip(th - (mu_of(Z, R) - target) / dmu, t_lo, t_hi)
    Z, R = state(th)
    # near the end point mu is only known to ~1e-16/(q/q_c - 1); what matters is q itself
    miss = np.abs(mu_of(Z, R) - target) * np.minimum(1.0, np.exp(target))
    if not np.all(miss <= 1e-9):
        raise SolverError(f"power-law effectiveness table: dead-core inversion failed "
                          f"(shape {a}, miss {np.nanmax(miss):.1e})")
    log_y = np.minimum(0.5 * (np.log(0.5 * (n[comp] + 1.0)) - np.log(R)), 0.0)
    return [log_y[comp == i] for i in range(k)]


def _centre_to_x(centre: _CentreLow, row: int, x: Array) -> Array:
    """ln eta of one order < 1 at log10 Phi nodes below Phi_c, from the omega splines."""
    lp = make_interp_spline(centre.omega, centre.log_phi[row], k=5)
    le = make_interp_spline(centre.omega, centre.log_eta[row], k=5)
    dlp = lp.derivative()
    target = x * _LN10
    om = np.interp(target, centre.log_phi[row], centre.omega)
    for _ in range(5):
        om = np.clip(om - (lp(om) - target) / np.maximum(dlp(om), 1e-300),
                     centre.omega[0], centre.omega[-1])
    return le(om)


def grid_values(a: int) -> dict[str, Array]:
    """Node values of the three tables for shape index ``a`` (the expensive part)."""
    x = nodes(GRIDS["x"])
    n_high = nodes(GRIDS["n_high"])
    n_low = nodes(GRIDS["n_low"])
    omega = nodes(GRIDS["omega"])
    mu = nodes(GRIDS["mu"])
    high = np.empty((n_high.size, x.size))
    upper = n_high >= 1.0 - 1e-12
    high[upper] = _centre_branch_high(a, n_high[upper], x)
    # orders < 1: the low grid plus the high-grid orders above it, integrated together
    n_sub = np.concatenate([n_low, n_high[~upper & (n_high > n_low[-1] + 1e-12)]])
    fine = omega[0] + 0.02 * np.arange(int(round((omega[-1] - omega[0]) / 0.02)) + 1)
    centre = _centre_branch_low(a, n_sub, fine)
    stride = int(round(GRIDS["omega"][2] / 0.02))
    rows = [int(np.argmin(np.abs(n_sub - nk))) for nk in n_high[~upper]]
    # dead-core nodes: the mu grid for low-grid orders, log10 Phi nodes above Phi_c for the rest
    mu_wanted = [mu.copy() if r < n_low.size else np.empty(0) for r in range(n_sub.size)]
    above = {}
    for r in rows:
        ratio = 10.0 ** x / critical_modulus(n_sub[r], a)
        above[r] = ratio >= 1.0
        rr = ratio[above[r]]
        mu_x = np.log(np.maximum((rr - 1.0) * (rr + 1.0), np.exp(GRIDS["mu"][0])))
        mu_wanted[r] = np.concatenate([mu_wanted[r], mu_x])
    dead_all = _dead_branch(a, n_sub, mu_wanted)
    for j, r in zip(np.flatnonzero(~upper), rows, strict=True):
        row = np.empty(x.size)
        b = ~above[r]
        row[b] = _centre_to_x(centre, r, x[b])
        n_mu = mu.size if r < n_low.size else 0
        row[~b] = dead_all[r][n_mu:] - x[~b] * _LN10
        high[j] = row
    low_phi_c = np.log(critical_modulus(n_low, a))
    centre_phi = centre.log_phi[: n_low.size, ::stride] - low_phi_c[:, None]
    centre_eta = centre.log_eta[: n_low.size, ::stride]
    dead = np.array([dead_all[r][: mu.size] for r in range(n_low.size)])
    return {"high": high, "centre_phi": np.minimum(centre_phi, 0.0), "centre_eta": centre_eta,
            "dead": dead}
