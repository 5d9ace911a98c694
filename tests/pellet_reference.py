"""Reference pellet solutions for the pellet tests and benchmark: one ``scipy.integrate.solve_bvp``
solve per point at tight tolerance (independent of kinfit's own pellet solvers).

The scaled problem is u'' + (a/xi) u' = g(u), u'(0) = 0, u(1) = 1, with the singular term
handled by solve_bvp's ``S`` matrix (a/xi); eta = (a+1) u'(1) / g(1).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy.integrate import solve_bvp

__all__ = ["reference_eta", "power_law_reference", "dead_core_reference"]


def reference_eta(g: Callable[[np.ndarray], np.ndarray], dg: Callable[[np.ndarray], np.ndarray],
                  a: int, layer: float, *, tol: float = 1e-10, max_nodes: int = 50_000,
                  clip: bool = True) -> float:
    """eta of u'' + (a/xi) u' = g(u) by solve_bvp (tolerance ``tol``, default 1e-10; 10 tol
    where 1e-10 asks for more than double precision can give).

    ``layer`` is the expected boundary-layer thickness in xi (about 1/phi_R); the initial mesh
    is geometric towards the surface on that scale and the initial guess is the first-order
    slab profile of that thickness. ``clip`` evaluates g at max(u, 0) (power laws); pass False
    with a rate already defined for u < 0.
    """
    x = np.unique(np.concatenate([
        1.0 - np.minimum(layer * np.expm1(np.linspace(0.0, np.log1p(1.0 / layer), 400)), 1.0),
        np.linspace(0.0, 1.0, 50)]))
    x[0], x[-1] = 0.0, 1.0
    # slab first-order profile cosh(x/layer)/cosh(1/layer), written without overflow
    e = np.exp((x - 1.0) / layer) / (1.0 + np.exp(-2.0 / layer))
    y0 = np.vstack([e * (1.0 + np.exp(-2.0 * x / layer)), e * -np.expm1(-2.0 * x / layer) / layer])
    S = np.array([[0.0, 0.0], [0.0, -float(a)]])

    def jac(xi, y):
        J = np.zeros((2, 2, xi.size))
        J[0, 1] = 1.0
        J[1, 0] = dg(np.maximum(y[0], 1e-300)) if clip else dg(y[0])
        return J

    def bc(ya, yb):
        return np.array([ya[1], yb[0] - 1.0])

    def bc_jac(ya, yb):
        return np.array([[0.0, 1.0], [0.0, 0.0]]), np.array([[0.0, 0.0], [1.0, 0.0]])

    def lower(u):
        return np.maximum(u, 0.0) if clip else u

    def solve(scale, x, y, tol):
        with np.errstate(divide="ignore", invalid="ignore"):
            return solve_bvp(lambda xi, y: np.vstack([y[1], scale * g(lower(y[0]))]),
                             bc, x, y, S=S if a else None,
                             fun_jac=lambda xi, y: scale * jac(xi, y) + (1 - scale) * _ones01(xi),
                             bc_jac=bc_jac, tol=tol, max_nodes=max_nodes, bc_tol=1e-12)

    # tol first, then 10 tol (1e-10 can be beyond double precision for thin layers), then a
    # continuation in the rate scale from a mild problem
    for t in (tol, 10.0 * tol):
        sol = solve(1.0, x, y0, t)
        if sol.success:
            break
    if not sol.success:
        sol = solve(1e-3, x, y0, 10.0 * tol)
        for scale in np.logspace(-3, 0, 13)[1:]:
            if not sol.success:
                break
            sol = solve(scale, sol.x, sol.y, 10.0 * tol)
    if not sol.success:
        raise RuntimeError(f"reference solve_bvp failed: {sol.message}")
    return float((a + 1) * sol.sol(1.0)[1] / g(np.array(1.0)))


def _ones01(xi):
    """Jacobian part d(u')/du' = 1 that a scaled rate Jacobian must keep."""
    J = np.zeros((2, 2, xi.size))
    J[0, 1] = 1.0
    return J


def power_law_reference(Phi: float, n: float, a: int, **kw) -> float:
    """eta of u^n kinetics at generalised modulus Phi (phi_R^2 = (a+1)^2 Phi^2 2/(n+1))."""
    phi2 = (a + 1.0) ** 2 * Phi**2 * 2.0 / (n + 1.0)
    return reference_eta(lambda u: phi2 * u**n, lambda u: phi2 * n * u ** (n - 1.0), a,
                         1.0 / np.sqrt(phi2), **kw)


def dead_core_reference(n: float, a: int, xi_c: float) -> tuple[float, float]:
    """(Phi, eta) of u^n kinetics (0 <= n < 1) whose dead core has radius ``xi_c`` (a > 0).

    Shooting outwards from the edge of the dead core with the local solution
    u = A s^p, p = 2/(1-n), A^(1-n) = 1/(p(p-1)) (s = xi - xi_c; derived, the curvature term
    is of relative order s), of u'' + (a/xi) u' = u^n with solve_ivp (DOP853, rtol 1e-12);
    rescaling to u(1) = 1 gives phi_R^2 = u(1)^(n-1) and eta = (a+1) u'(1)/u(1)^n.
    """
    from scipy.integrate import solve_ivp

    p = 2.0 / (1.0 - n)
    A = (1.0 / (p * (p - 1.0))) ** (1.0 / (1.0 - n))
    s0 = 1e-8 * (1.0 - xi_c)

    def rhs(xi, y):
        return [y[1], max(y[0], 0.0) ** n - a * y[1] / xi]

    sol = solve_ivp(rhs, (xi_c + s0, 1.0), [A * s0**p, A * p * s0 ** (p - 1.0)],
                    method="DOP853", rtol=1e-12, atol=1e-300)
    if not sol.success:
        raise RuntimeError(f"dead-core reference failed: {sol.message}")
    u1, du1 = sol.y[0, -1], sol.y[1, -1]
    phi_R = np.sqrt(u1 ** (n - 1.0))
    return float(phi_R * np.sqrt(0.5 * (n + 1.0)) / (a + 1.0)), float((a + 1.0) * du1 / u1**n)
