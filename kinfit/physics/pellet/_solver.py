"""Batched finite-volume pellet solver (private implementation behind
:func:`kinfit.physics.pellet.effectiveness.pellet_eta`).

The scaled pellet equation for P points at once, with :math:`\\xi = r/R` and
:math:`g(C) = R^2 r_v(C)/D_e`,

.. math:: \\frac{1}{\\xi^a}\\frac{d}{d\\xi}\\Big(\\xi^a \\frac{dC}{d\\xi}\\Big) = g(C),
          \\qquad C'(0) = 0,\\quad C(1) = C_s,\\quad C \\ge C_{eq},

is discretised by vertex-centred finite volumes (exact control-volume measures
:math:`\\int \\xi^a d\\xi`, two-point face fluxes) on a per-point grid mapped from a uniform one
and clustered at the surface: with depth :math:`x = 1 - \\xi` and :math:`s \\in [0, 1]`,

.. math:: x(s) = \\delta\\,[(1 + 1/\\delta)^s - 1], \\qquad
          \\delta = 0.1/\\phi_R + 3/\\phi_R^2,\\quad \\phi_R = (a+1)\\Phi

(nearly uniform for small moduli, geometric cells of ratio :math:`(1+1/\\delta)^{1/N}` for large
ones, so a layer of thickness :math:`1/\\phi_R` keeps about a third of the cells at any modulus).

Newton's method runs on all points together: the Jacobian is tridiagonal per point and is
solved by a Thomas sweep vectorised over points. Concentrations are kept in
:math:`[C_{eq} + 10^{-12}(C_s - C_{eq}), C_s]`; a node at the floor whose consumption exceeds
its supply is held there (a semismooth active set), which is the discrete form of a dead zone
(rates with order < 1 near equilibrium) and of the obstacle problem of zero-order kinetics.

The effectiveness factor is taken from the first integral of the pellet equation,

.. math:: \\tfrac12 C_\\xi(1)^2 + a \\int_0^1 \\frac{C_\\xi^2}{\\xi} d\\xi
          = \\int_{C_c}^{C_s} g\\, dC, \\qquad \\eta = \\frac{(a+1) C_\\xi(1)}{g(C_s)}

(derived; exact for a slab given the centre concentration :math:`C_c`, and insensitive to how
the grid resolves a dead-zone front), with the curvature integral from the discrete profile.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

__all__ = ["Grid", "make_grid", "initial_profile", "newton_profile", "refine_profile",
           "curvature_integral", "NewtonResult", "FLOOR"]

Array = NDArray[np.float64]
#: Lower bound of the concentrations, as a fraction of Cs - C_eq above C_eq.
FLOOR = 1e-12


@dataclass(frozen=True)
class Grid:
    """Radial grid of every point, grid-major: arrays of shape (N+1, P) or (N, P).

    Attributes
    ----------
    xi : ndarray, (N+1, P)
        Nodes from the centre (0) to the surface (1).
    K : ndarray, (N, P)
        Face conductances xi_face^a / (xi_{i+1} - xi_i).
    V : ndarray, (N+1, P)
        Control-volume measures int xi^a dxi between faces.
    """

    xi: Array
    K: Array
    V: Array

    @property
    def n_cells(self) -> int:
        return self.K.shape[0]


def _power(x: Array, k: int) -> Array:
    """x**k for a small integer k by multiplication (much faster than a float power)."""
    out = np.ones_like(x)
    for _ in range(k):
        out = out * x
    return out


def make_grid(phi_R: Array, n_cells: int, a: int) -> Grid:
    """Grid of ``n_cells`` cells for each point (``phi_R`` of shape (P,))."""
    pr = np.maximum(phi_R, 1e-300)
    delta = (0.1 / pr + 3.0 / pr**2)[None, :]
    lam = np.log1p(1.0 / delta)
    s = np.linspace(1.0, 0.0, 2 * n_cells + 1)[:, None]      # nodes and faces, centre first
    x = 1.0 - delta * np.expm1(s * lam)
    xi = x[::2].copy()
    xi[0] = 0.0
    xi[-1] = 1.0
    xf = x[1::2]                                                # faces between nodes
    K = _power(xf, a) / np.diff(xi, axis=0)
    faces = np.concatenate([np.zeros((1, pr.size)), xf, np.ones((1, pr.size))], axis=0)
    V = np.diff(_power(faces, a + 1), axis=0) / (a + 1.0)
    return Grid(xi, K, V)


def initial_profile(grid: Grid, phi: Array, n_eff: Array, a: int) -> Array:
    """u = (C - C_eq)/(Cs - C_eq) of the semi-infinite slab with order ``n_eff``: exact for a
    power law in a slab at large modulus, a fair start elsewhere.

    .. math:: u = [1 + \\tfrac{n-1}{2}\\phi' x]^{-2/(n-1)},\\qquad
              \\phi' = (a+1)\\Phi\\,\\frac{2}{n+1}
    """
    x = 1.0 - grid.xi
    phip = ((a + 1.0) * phi * 2.0 / (n_eff + 1.0))[None, :]
    m = (0.5 * (n_eff - 1.0))[None, :]
    linear = np.abs(m) < 1e-6
    m_safe = np.where(linear, 1.0, m)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        base = np.maximum(1.0 + m_safe * phip * x, 0.0)
        u = np.where(linear, np.exp(-phip * x), base ** (-1.0 / m_safe))
    return np.clip(np.nan_to_num(u, nan=0.0, posinf=1.0), 0.0, 1.0)


def _thomas(lower: Array, diag: Array, upper: Array, rhs: Array) -> Array:
    """Solve tridiagonal systems along axis 0 for every column (point) at once.

    ``rhs`` is overwritten with the solution, ``diag`` with the forward-sweep pivots.
    """
    n = diag.shape[0]
    cp = np.empty_like(diag)
    inv = 1.0 / diag[0]
    cp[0] = upper[0] * inv
    rhs[0] *= inv
    tmp = np.empty_like(inv)
    for i in range(1, n):
        np.multiply(lower[i], cp[i - 1], out=tmp)
        np.subtract(diag[i], tmp, out=inv)
        np.reciprocal(inv, out=inv)
        np.multiply(upper[i], inv, out=cp[i])
        np.multiply(lower[i], rhs[i - 1], out=tmp)
        rhs[i] -= tmp
        rhs[i] *= inv
    for i in range(n - 2, -1, -1):
        np.multiply(cp[i], rhs[i + 1], out=tmp)
        rhs[i] -= tmp
    return rhs


@dataclass(frozen=True)
class NewtonResult:
    """Converged (or last) profile of every point and how the iteration went.

    ``D`` is the depletion Cs - C, (N+1, P): carried instead of C so that profiles that differ
    from Cs by 1e-12 of it (tiny moduli) keep their digits.
    """

    D: Array
    iterations: int
    converged: Array      # (P,) bool
    step: Array           # (P,) last relative step


def newton_profile(g: Callable[[Array], Array], dg: Callable[[Array], Array], grid: Grid,
                   D: Array, Cs: Array, C_eq: Array, *, tol: float, max_iter: int
                   ) -> NewtonResult:
    """Semismooth Newton iteration for the discrete pellet equations of all points.

    Parameters
    ----------
    g, dg : callable
        Scaled rate and its derivative on concentrations of shape (k, P), grid-major.
    grid : Grid
    D : ndarray, (N+1, P)
        Initial depletion Cs - C; the last row (surface) is set to 0.
    Cs, C_eq : ndarray, (P,)
        Surface and equilibrium concentrations (Cs > C_eq).
    tol : float
        Convergence: every node moves by less than ``tol (Cs - C_eq)`` (or the last two steps
        decay fast enough to promise that).
    max_iter : int
    """
    span = Cs - C_eq
    # rounding of C itself limits how small a step relative to Cs - C_eq can be seen
    tol_eff = np.maximum(tol, 1e3 * np.finfo(float).eps * np.abs(Cs) / span)
    d_max = (span * (1.0 - FLOOR))[None, :]            # C = C_eq + FLOOR span
    top = Cs[None, :]
    D = np.array(D, dtype=float)
    D[-1] = 0.0
    np.clip(D[:-1], 0.0, d_max, out=D[:-1])
    K = grid.K                                          # face i joins nodes i and i+1
    Kl = np.concatenate([np.zeros((1, K.shape[1])), K[:-1]], axis=0)   # left face of node i
    Ksum = K + Kl
    V = grid.V[:-1]
    step = np.full(span.shape, np.inf)
    prev = np.full(span.shape, np.inf)
    converged = np.zeros(span.shape, dtype=bool)
    iterations = 0
    for iterations in range(1, max_iter + 1):  # noqa: B007 (count reported)
        Di = D[:-1]
        Ci = top - Di
        r = g(Ci)
        dr = dg(Ci)
        del Ci
        # F_i = K_i (C_{i+1} - C_i) - K_{i-1} (C_i - C_{i-1}) - V_i g(C_i), in D
        q = K * (Di - D[1:])
        F = q
        F[1:] -= q[:-1].copy()
        F -= V * r
        del r
        diag = -Ksum - V * dr
        del dr
        held = Di >= d_max * (1.0 - 1e-15)
        held &= F < 0
        if held.any():
            diag[held] = 1.0
            lower = np.where(held, 0.0, Kl)
            upper = np.where(held, 0.0, K)
            F[held] = 0.0
        else:
            lower, upper = Kl, K.copy()
        upper[-1] = 0.0                       # the surface node is fixed
        np.negative(F, out=F)
        dC = _thomas(lower, diag, upper, F)
        del F, diag, lower, upper
        new = np.clip(Di - dC, 0.0, d_max)
        dC = np.abs(new - Di, out=dC)
        prev, step = step, np.max(dC, axis=0) / span
        del dC
        # converged: the step is below tol, or a superlinear decay promises the remaining
        # error (about step^2 / prev) is far below tol. Nodes clipped at the floor do not
        # move, so a small step also means the floor set is settled.
        with np.errstate(invalid="ignore", divide="ignore"):
            fast = (step <= 1e-4) & (step * step <= tol * 1e-2 * prev)
        converged = ((step <= tol_eff) | fast) & np.isfinite(step)
        D[:-1] = new
        del new
        if converged.all():
            break
    return NewtonResult(D, iterations, converged, step)


def refine_profile(D: Array) -> Array:
    """Coarse profile (N+1, P) on the nested grid with 2N cells (midpoints in s linear)."""
    fine = np.empty((2 * D.shape[0] - 1, D.shape[1]))
    fine[::2] = D
    fine[1::2] = 0.5 * (D[1:] + D[:-1])
    return fine


def curvature_integral(grid: Grid, D: Array, a: int) -> Array:
    """:math:`a \\int_0^1 C_\\xi^2/\\xi\\, d\\xi` from the discrete depletion profile
    (midpoint rule)."""
    if a == 0:
        return np.zeros(D.shape[1])
    dC = np.diff(D, axis=0)
    dxi = np.diff(grid.xi, axis=0)
    mid = 0.5 * (grid.xi[1:] + grid.xi[:-1])
    return a * np.sum(dC * dC / (dxi * mid), axis=0)
