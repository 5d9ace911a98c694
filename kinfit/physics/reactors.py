"""Reactor models for a single reaction A -> products: stirred batch slurry and differential
(initial-rate) tables, each vectorised over runs and parameter sets.

Batch: dCb/dt = -w r_obs(Cb). The profile follows from the time integral

.. math:: t(C) = \\int_C^{C_0} \\frac{dC'}{w\\, r_{obs}(C')}
              = \\int_{u(C)}^{u_0} \\frac{C' - C_{eq}}{w\\, r_{obs}(C')}\\, du,
   \\qquad u = \\ln (C - C_{eq}),

on a fixed grid of u per run (Gauss-Legendre panels), inverted at the sampling times by cubic
Hermite interpolation with the exact slopes du/dt = -w r_obs/(C - C_eq) at the nodes. In u the
integrand is nearly constant (exactly so at first order), so few panels reach 1e-6 relative.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

from kinfit.errors import SolverError

__all__ = ["batch_profiles", "differential_rates", "BatchGrid"]

Array = NDArray[np.float64]


class BatchGrid:
    """The fixed integration grid of the batch reactor: panels uniform in u = ln(C - C_eq).

    Inside each panel dt/du is sampled at both ends and at ``interior`` Gauss-Legendre points
    and represented by the interpolating polynomial, integrated exactly; the time at any u is
    then a polynomial that Newton inverts without further rate evaluations.

    Parameters
    ----------
    n_panels : int
        Panels between C0 and the deepest node.
    depth : float
        (C - C_eq)/(C0 - C_eq) at the deepest node; later times continue on the last slope.
    interior : int
        Interior points per panel (polynomial degree interior + 1).
    """

    def __init__(self, *, n_panels: int = 10, depth: float = 1e-5, interior: int = 4) -> None:
        self.n_panels, self.depth, self.interior = n_panels, depth, interior
        x, _ = np.polynomial.legendre.leggauss(interior)
        tau = np.concatenate([[0.0], 0.5 * (x + 1.0), [1.0]])  # local points in a panel
        k = tau.size
        vander = tau[:, None] ** np.arange(k)[None, :]
        #: maps the k samples of dt/du in a panel to monomial coefficients in tau
        self.to_coef = np.linalg.inv(vander)
        self.tau = tau
        s_nodes = np.linspace(0.0, 1.0, n_panels + 1)
        h = 1.0 / n_panels
        inner = (s_nodes[:-1, None] + h * tau[None, 1:-1]).ravel()
        #: fractional positions s in [0, 1] (u = u0 + s ln depth): nodes first, then interiors
        self.s = np.concatenate([s_nodes, inner])
        self.n_nodes = n_panels + 1
        self.k = k


def _panel_time(coef: Array, tau: Array) -> tuple[Array, Array]:
    """Integral of the panel polynomial from 0 to tau (per unit |du|), and its integrand."""
    k = coef.shape[-1]
    powers = np.arange(1, k + 1)
    integral = np.zeros_like(tau)
    value = np.zeros_like(tau)
    for i in range(k - 1, -1, -1):  # Horner
        integral = integral * tau + coef[..., i] / powers[i]
        value = value * tau + coef[..., i]
    return integral * tau, value


def batch_profiles(
    rate: Callable[[Array], Array],
    C0: Array,
    C_eq: Array,
    loading: Array,
    times: Array,
    run_index: NDArray[np.int_],
    *,
    grid: BatchGrid | None = None,
) -> tuple[Array, Array]:
    """Bulk concentrations at the observation times of every run, for every parameter set.

    Parameters
    ----------
    rate : callable
        ``rate(C)`` with C of shape (m, R, K) returning the observed rate per catalyst mass
        (mol/(kg s)) of the same shape; per-run quantities are closed over with shape (m, R, 1).
    C0 : ndarray, shape (R,) or (m, R)
        Initial concentrations, mol/m^3.
    C_eq : ndarray, broadcastable to (m, R)
        Equilibrium concentrations (0 for an irreversible reaction).
    loading : ndarray, shape (R,)
        Catalyst mass per liquid volume, kg/m^3.
    times : ndarray, shape (n,)
        Observation times, s.
    run_index : ndarray of int, shape (n,)
        Run of each observation.

    Returns
    -------
    C : ndarray, shape (m, n)
        Predicted bulk concentrations.
    rate_at_obs : ndarray, shape (m, n)
        Observed rate at the predicted concentrations (mol/(kg s)), from the interpolant.

    Raises
    ------
    SolverError
        When the rate is zero, negative or not finite inside a run.
    """
    grid = grid or BatchGrid()
    C0 = np.atleast_2d(np.asarray(C0, dtype=float))
    ceq = np.asarray(C_eq, dtype=float)
    shape = np.broadcast_shapes(C0.shape, ceq.shape)
    C0, ceq = np.broadcast_to(C0, shape), np.broadcast_to(ceq, shape)
    span = C0 - ceq
    if np.any(span <= 0):
        raise SolverError("a run starts at or below its equilibrium concentration; "
                          "the batch profile is flat")
    ln_depth = np.log(grid.depth)
    du = -ln_depth / grid.n_panels  # |du| per panel
    u = np.log(span)[..., None] + grid.s * ln_depth  # (m?, R, K)
    C = ceq[..., None] + np.exp(u)
    r = rate(C)
    m, R = r.shape[0], r.shape[1]
    u = np.broadcast_to(u, r.shape)
    C = np.broadcast_to(C, r.shape)
    ceq = np.broadcast_to(ceq, (m, R))
    w = np.asarray(loading, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        g = (C - ceq[..., None]) / (w[None, :, None] * r)  # dt/d(-u), s
    if not np.all(np.isfinite(g) & (g > 0)):
        raise SolverError("the observed rate is zero, negative or not finite inside a batch "
                          "run; check the rate parameters")
    nn, P = grid.n_nodes, grid.n_panels
    g_nodes = g[..., :nn]
    g_in = g[..., nn:].reshape(m, R, P, grid.interior)
    samples = np.concatenate([g_nodes[..., :-1, None], g_in, g_nodes[..., 1:, None]], axis=-1)
    coef = samples @ grid.to_coef.T  # (m, R, P, k)
    full, _ = _panel_time(coef, np.ones(coef.shape[:-1]))
    t_nodes = np.concatenate([np.zeros((m, R, 1)), np.cumsum(du * full, axis=-1)], axis=-1)

    ri = np.asarray(run_index)
    t = np.asarray(times, dtype=float)
    tn = t_nodes[:, ri, :]  # (m, n, nn)
    j = np.clip(np.sum(tn <= t[None, :, None], axis=-1) - 1, 0, P - 1)
    c_obs = np.take_along_axis(coef[:, ri], j[..., None, None], axis=2)[:, :, 0, :]
    t0 = _take(tn, j)
    target = (t[None, :] - t0) / du  # integral of the panel polynomial to reach
    # Newton on tau in [0, 1], from the linear guess; the integrand is positive
    tau = np.clip(target / np.maximum(_take(full[:, ri], j), 1e-300), 0.0, 1.0)
    for _ in range(30):
        val, dval = _panel_time(c_obs, tau)
        step = (val - target) / dval
        tau_new = np.clip(tau - step, 0.0, 1.0)
        if np.max(np.abs(tau_new - tau)) < 1e-14:
            tau = tau_new
            break
        tau = tau_new
    u_node = _take(u[:, ri, :nn], j)
    u_t = u_node + tau * ln_depth / P
    _, g_t = _panel_time(c_obs, tau)
    beyond = t[None, :] > tn[..., -1]
    u_last = u[:, ri, nn - 1]
    g_last = g_nodes[:, ri, -1]
    u_t = np.where(beyond, u_last - (t[None, :] - tn[..., -1]) / g_last, u_t)
    g_t = np.where(beyond, g_last, g_t)
    ceq_obs = ceq[:, ri]
    conc = ceq_obs + np.exp(u_t)
    rate_obs = (conc - ceq_obs) / (w[ri][None, :] * g_t)
    return conc, rate_obs


def _take(a: Array, j: NDArray[np.int_]) -> Array:
    return np.take_along_axis(a, j[..., None], axis=-1)[..., 0]


def differential_rates(rate: Callable[[Array], Array], C0: Array, run_index: NDArray[np.int_]
                       ) -> Array:
    """Observed initial (differential) rates per observation.

    Parameters
    ----------
    rate : callable
        ``rate(C)`` with C of shape (m, R, 1) returning mol/(kg s).
    C0 : ndarray, shape (R,)
        Concentration at which each run's rate was measured.
    run_index : ndarray of int, shape (n,)

    Returns
    -------
    ndarray, shape (m, n)
    """
    r = rate(np.asarray(C0, dtype=float)[None, :, None])
    return r[:, :, 0][:, np.asarray(run_index)]
