"""Coupling of film, pellet and rate law: the observed rate at given bulk conditions.

For every point the surface concentration Cs solves

.. math:: k_c a_m (C_b - C_s) = \\eta(C_s)\\, r(C_s),

bracketed between the equilibrium concentration and Cb. All points and parameter sets are
solved together by a safeguarded Newton iteration (Newton steps inside a shrinking bracket,
bisection when a step leaves it), with no Python loop over points.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from kinfit.errors import SolverError
from kinfit.physics.pellet import _lh_table
from kinfit.physics.pellet.effectiveness import eta_first_order, eta_power_law
from kinfit.physics.pellet.numerical import pellet_eta

__all__ = ["ObservedRate", "PelletRate", "solve_surface", "observed_rate", "observed_rate_value"]

Array = NDArray[np.float64]


@dataclass(frozen=True)
class ObservedRate:
    """Observed rate and the transport state at each point (all arrays of one shape).

    Attributes
    ----------
    rate : ndarray
        Observed rate per catalyst mass, mol/(kg s).
    surface_concentration : ndarray
        Cs, mol/m^3.
    effectiveness : ndarray
        eta at Cs.
    thiele_modulus : ndarray
        Generalised modulus (L = Vp/Sp normalisation) at Cs.
    intrinsic_rate : ndarray
        r(Cs), mol/(kg s).
    """

    rate: Array
    surface_concentration: Array
    effectiveness: Array
    thiele_modulus: Array
    intrinsic_rate: Array


class PelletRate:
    """eta(Cs) r(Cs) for a rate law inside a pellet, with its derivative in Cs.

    Parameters
    ----------
    rate_law : RateLaw
        From :mod:`kinfit.physics.kinetics.base`.
    params : mapping of str to ndarray
        Rate-law parameter values, broadcastable to the point arrays.
    T, C0 : ndarray
        Temperature (K) and initial concentration (mol/m^3) at each point.
    De : ndarray or None
        Effective diffusivity, m^2/s; ``None`` switches the pellet off (eta = 1).
    L : ndarray
        Characteristic length Vp/Sp, m.
    rho_p : float
        Particle density, kg/m^3.
    geometry : str
    """

    def __init__(self, rate_law, params: Mapping[str, Array], T: Array, C0: Array | None,
                 De: Array | None, L: Array, rho_p: float, geometry: str) -> None:
        self.law, self.p, self.T, self.C0 = rate_law, params, T, C0
        self.De, self.L, self.rho_p, self.geometry = De, L, rho_p, geometry
        order = rate_law.power_law_order(params)
        self.order = None if order is None else _fewest_orders(np.asarray(order, dtype=float))
        self._eta_cache: dict = {}  # table contractions at self.order, kept between calls
        self.C_eq = np.asarray(rate_law.equilibrium_concentration(T, params, C0=C0), dtype=float)
        # a rate linear in C (first-order reversible): the first-order closed form in C - C_eq
        self.slope: Array | None = None
        if self.order is None and De is not None:
            slope = rate_law.linear_slope(T, params, C0=C0)
            self.slope = None if slope is None else np.asarray(slope, dtype=float)
        # Langmuir-Hinshelwood: (K, m, k K) for the tabulated effectiveness factor
        self.lh: tuple[Array, int, Array] | None = None
        if self.order is None and self.slope is None and De is not None:
            form = rate_law.langmuir_hinshelwood_form(T, params)
            if form is not None:
                K, m = form
                kK = np.asarray(rate_law.drate_dC(0.0, T, params, C0=C0), dtype=float)
                self.lh = (np.asarray(K, dtype=float), int(m), kK)

    @property
    def surface_grid(self) -> bool:
        """Whether a batch profile may be integrated on a grid in Cs: d(eta r)/dCs is exact
        (the interpolant's own slope, or a closed form) and eta r/(Cs - C_eq) stays bounded as
        Cs falls (a power law of order >= 1, or a rate linear in C), so that a fixed depth in
        Cs is at least as deep in the bulk concentration."""
        if self.order is not None:
            return bool(np.all(self.order >= 1.0))
        return self.slope is not None

    def _rate(self, C: Array) -> Array:
        return self.law.rate(C, self.T, self.p, C0=self.C0)

    def __call__(self, Cs: Array, *, derivative: bool = True):
        """Return (eta r, d(eta r)/dCs, eta, Phi, r) at the surface concentrations ``Cs``."""
        r = self._rate(Cs)
        if self.De is None:
            one = np.ones_like(Cs)
            dr = self.law.drate_dC(Cs, self.T, self.p, C0=self.C0) if derivative else None
            return r, dr, one, np.zeros_like(Cs), r
        if self.order is not None:
            n = self.order
            rv = self.rho_p * r
            with np.errstate(divide="ignore", invalid="ignore"):
                phi = self.L * np.sqrt(np.maximum((n + 1.0) * 0.5 * rv / (self.De * Cs), 0.0))
            phi = np.where(Cs > 0, phi, np.inf)
            if not derivative:
                eta = eta_power_law(phi, n, self.geometry, cache=self._eta_cache)
                return eta * r, None, eta, phi, r
            eta, slope = eta_power_law(phi, n, self.geometry, return_slope=True,
                                              cache=self._eta_cache)
            g = eta * r
            # d ln(eta r)/d ln Cs = n + (n-1)/2 * d ln eta/d ln Phi, since Phi ~ Cs^((n-1)/2)
            with np.errstate(divide="ignore", invalid="ignore"):
                dg = np.where(Cs > 0, g * (n + 0.5 * (n - 1.0) * slope) / Cs, 0.0)
            return g, dg, eta, phi, r
        if self.slope is not None:
            # r = a (C - C_eq) is first order in C - C_eq: eta is the closed form at
            # phi = L sqrt(rho_p a / De), the same at every Cs (Aris 1975, common practice)
            phi_lin = np.broadcast_to(self.L * np.sqrt(self.rho_p * self.slope / self.De),
                                      np.shape(r)).astype(float)
            eta_lin = eta_first_order(phi_lin, self.geometry)
            dg_lin = eta_lin * np.broadcast_to(self.slope, np.shape(r)) if derivative else None
            return eta_lin * r, dg_lin, eta_lin, phi_lin, r
        if self.lh is not None:
            return self._langmuir_hinshelwood(Cs, r, derivative)
        return self._general(Cs, r, derivative)

    def _langmuir_hinshelwood(self, Cs: Array, r: Array, derivative: bool):
        """Tabulated eta for k K C/(1 + K C)^m where K Cs lies in the table's domain, the
        numerical pellet solver (:meth:`_general`) at the other points."""
        assert self.lh is not None and self.De is not None
        K, m, kK = self.lh
        shape = np.broadcast_shapes(np.shape(Cs), np.shape(r), np.shape(K), np.shape(kK),
                                    np.shape(self.De), np.shape(self.L))
        Cs_b = np.broadcast_to(np.asarray(Cs, dtype=float), shape)
        beta = K * Cs_b
        with np.errstate(over="ignore", invalid="ignore"):
            phi1 = self.L * np.sqrt(self.rho_p * kK / self.De)
            f, dlnf = _lh_table.modulus_factor(np.maximum(beta, 0.0), m)
            phi = np.broadcast_to(phi1 * f, shape)
        inside = _lh_table.in_domain(beta, m, self.geometry) & ~np.isnan(phi)
        eta = np.empty(shape)
        phi_out = np.array(phi, dtype=float)
        slope = np.zeros(shape)
        if inside.any():
            e, s_phi, s_beta = _lh_table.eta_langmuir_hinshelwood(
                phi[inside], beta[inside], m, self.geometry, return_slope=True)
            eta[inside] = e
            # d ln eta/d ln Cs: Phi = phi_1 f(beta) with phi_1 independent of Cs, beta = K Cs
            slope[inside] = s_phi * np.broadcast_to(dlnf, shape)[inside] + s_beta
        r_b = np.broadcast_to(r, shape)
        g = eta * r_b
        dg = None
        if derivative:
            dr = np.broadcast_to(self.law.drate_dC(Cs, self.T, self.p, C0=self.C0), shape)
            with np.errstate(divide="ignore", invalid="ignore"):
                dg = eta * dr + np.where(Cs_b > 0, g * slope / Cs_b, 0.0)
        if not inside.all():
            out = ~inside
            sub = self._subset(out, shape)
            g_o, dg_o, eta_o, phi_o, _ = sub._general(Cs_b[out], r_b[out], derivative)
            g[out], eta[out], phi_out[out] = g_o, eta_o, phi_o
            if dg is not None:
                dg = np.array(dg)
                dg[out] = dg_o
        return g, dg, eta, phi_out, r_b

    def _subset(self, mask: NDArray[np.bool_], shape: tuple[int, ...]) -> PelletRate:
        """A PelletRate on the points ``mask`` of ``shape`` (flat arrays), numerical path."""
        def take(a):
            return None if a is None else np.broadcast_to(np.asarray(a, dtype=float),
                                                          shape)[mask]

        sub = PelletRate(self.law, {k: take(v) for k, v in self.p.items()}, take(self.T),
                         take(self.C0), take(self.De), take(self.L), self.rho_p, self.geometry)
        sub.lh = None
        return sub

    def _general(self, Cs: Array, r: Array, derivative: bool):
        rho = self.rho_p
        T, p, C0 = self.T, self.p, self.C0

        def rate_v(C: Array) -> Array:
            return rho * self.law.rate(C, _grid(T, C), _grid_params(p, C), C0=_grid(C0, C))

        def drate_v(C: Array) -> Array:
            return rho * self.law.drate_dC(C, _grid(T, C), _grid_params(p, C), C0=_grid(C0, C))

        def solve(c: Array):
            return pellet_eta(rate_v, drate_v, c, _bcast(self.De, c), _bcast(self.L, c),
                                     self.geometry, C_eq=_bcast(self.C_eq, c))

        eta, phi = solve(Cs)
        g = eta * r
        dg = None
        if derivative:
            h = 1e-6 * np.maximum(Cs, 1e-12)
            eta2, _ = solve(Cs + h)
            r2 = self._rate(Cs + h)
            dg = (eta2 * r2 - g) / h
        return g, dg, eta, phi, r


def _fewest_orders(order: Array) -> Array:
    """Collapse an order array that is constant over every axis but the first (one shared
    order per parameter set) to shape (m, 1, ...): the tabulated pellet then builds its
    interpolant once per distinct order instead of once per run."""
    if order.ndim >= 2:
        first = order.reshape(order.shape[0], -1)[:, :1]
        if np.all(order.reshape(order.shape[0], -1) == first):
            return first.reshape((order.shape[0],) + (1,) * (order.ndim - 1))
    return order


def _bcast(a, like):
    return None if a is None else np.broadcast_to(np.asarray(a, dtype=float), np.shape(like))


def _grid(a, C):
    """Give a point array a trailing grid axis to broadcast with pellet profiles (..., n_grid)."""
    if a is None:
        return None
    a = np.asarray(a, dtype=float)
    return a[..., None] if a.ndim else a


def _grid_params(p: Mapping[str, Array], C) -> dict[str, Array]:
    return {k: _grid(v, C) for k, v in p.items()}


def solve_surface(
    Cb: Array,
    conductance: Array,
    g: Callable[[Array], tuple[Array, Array]],
    *,
    C_eq: Array | float = 0.0,
    rtol: float = 1e-12,
    maxiter: int = 80,
    return_rate: bool = False,
) -> Array | tuple[Array, Array]:
    """Solve ``conductance (Cb - Cs) = g(Cs)`` for Cs between ``C_eq`` and ``Cb``.

    Parameters
    ----------
    Cb : ndarray
        Bulk concentrations, mol/m^3.
    conductance : ndarray
        kc a_m, m^3/(kg s); ``inf`` means no film (Cs = Cb).
    g : callable
        ``g(Cs) -> (value, derivative)``: the pellet-averaged rate and its Cs-derivative;
        zero at C_eq and increasing in Cs.
    C_eq : ndarray or float
        Equilibrium concentration (0 for an irreversible reaction).

    return_rate : bool
        Also return g(Cs), from the last evaluation corrected to first order for the last
        Newton step (the step is below ``rtol`` relative, so the correction is exact to
        working precision); this saves one evaluation of g.

    Returns
    -------
    Cs : ndarray
        Same shape as ``Cb``.
    rate : ndarray
        g(Cs), only with ``return_rate``.

    Raises
    ------
    SolverError
        If some points do not converge in ``maxiter`` iterations.
    """
    conductance = np.asarray(conductance, dtype=float)
    shape = np.broadcast_shapes(np.shape(Cb), conductance.shape, np.shape(C_eq))
    Cb = np.broadcast_to(np.asarray(Cb, dtype=float), shape)
    kf = np.broadcast_to(conductance, shape)
    ceq = np.broadcast_to(np.asarray(C_eq, dtype=float), shape)
    lo = np.minimum(ceq, Cb)
    hi = np.maximum(ceq, Cb)
    nofilm = ~np.isfinite(kf)
    kf_safe = np.where(nofilm, 1.0, kf)
    x = hi.copy() if np.all(Cb >= ceq) else 0.5 * (lo + hi)
    # start from the series-resistance estimate at first order: Cs = Cb kf/(kf + g(Cb)/Cb)
    gv, dg = g(Cb)
    x_eval = Cb
    with np.errstate(divide="ignore", invalid="ignore"):
        k1 = np.where(Cb - ceq != 0, gv / (Cb - ceq), dg)
        x = np.where(np.isfinite(k1), ceq + (Cb - ceq) * kf_safe / (kf_safe + k1), x)
    x = np.clip(x, lo, hi)
    active = ~nofilm & (hi > lo)
    scale = np.maximum(np.abs(hi), 1e-300)
    for _ in range(maxiter):
        if not active.any():
            break
        gv, dg = g(x)
        x_eval = x
        f = kf_safe * (Cb - x) - gv
        df = -kf_safe - dg
        # f decreases in Cs: f > 0 means the root lies above x
        lo = np.where(active & (f > 0), x, lo)
        hi = np.where(active & (f < 0), x, hi)
        with np.errstate(divide="ignore", invalid="ignore"):
            step = -f / df
        xn = x + step
        small = np.abs(step) <= rtol * scale
        bad = ~small & (~np.isfinite(xn) | (xn < lo) | (xn > hi))
        xn = np.where(bad, 0.5 * (lo + hi), np.clip(xn, lo, hi))
        done = small | (f == 0) | (hi - lo <= rtol * scale)
        x = np.where(active, xn, x)
        active &= ~done
    if active.any():
        raise SolverError(
            f"surface concentration did not converge at {int(active.sum())} of {Cb.size} "
            f"points in {maxiter} iterations"
        )
    x = np.where(nofilm, Cb, x)
    if return_rate:
        return x, gv + dg * (x - x_eval)
    return x


def observed_rate(
    Cb: Array,
    pellet_rate: PelletRate,
    conductance: Array,
) -> ObservedRate:
    """Observed rate per catalyst mass at bulk concentrations ``Cb``.

    Parameters
    ----------
    Cb : ndarray
        Bulk concentrations, mol/m^3, shape S.
    pellet_rate : PelletRate
        Built on arrays broadcastable to S.
    conductance : ndarray
        kc a_m, m^3/(kg s), broadcastable to S (``inf``: no film).
    """
    Cb = np.asarray(Cb, dtype=float)

    def g(c: Array):
        val, dval, *_ = pellet_rate(c)
        return val, dval

    Cs = np.asarray(solve_surface(Cb, conductance, g, C_eq=pellet_rate.C_eq))
    val, _, eta, phi, r = pellet_rate(Cs, derivative=False)
    return ObservedRate(rate=val, surface_concentration=Cs, effectiveness=eta,
                        thiele_modulus=phi, intrinsic_rate=r)


def observed_rate_value(Cb: Array, pellet_rate: PelletRate, conductance: Array) -> Array:
    """The observed rate alone (mol/(kg s)), one evaluation of the pellet rate cheaper than
    :func:`observed_rate`; used inside the reactor integrals."""
    Cb = np.asarray(Cb, dtype=float)

    def g(c: Array):
        val, dval, *_ = pellet_rate(c)
        return val, dval

    _, rate = solve_surface(Cb, conductance, g, C_eq=pellet_rate.C_eq, return_rate=True)
    return rate

