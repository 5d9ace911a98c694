"""The numerical pellet: eta of any rate law by a batched Newton solution of a finite-volume discretisation on a radial grid clustered at the surface."""

from __future__ import annotations

import warnings
from collections.abc import Callable

import numpy as np
from numpy.typing import ArrayLike

from kinfit.errors import ConvergenceWarning, ModelError, SolverError, StudyError
from kinfit.physics.geometry import shape_index
from kinfit.physics.pellet import _solver as fv
from kinfit.physics.pellet._checks import Array, RateFunction, _positive
from kinfit.physics.pellet.modulus import _depletion_integral, _grid_call, _rate_integral

__all__ = ["pellet_eta"]


_ZERO_ORDER_LIKE = 0.05     # r(C_eq + 1e-10 span)/r(Cs) above this: refine the grid (x 2)


def _as_grid_major(fun: RateFunction, shape: tuple[int, ...], name: str
                   ) -> Callable[[Array], Array]:
    """Wrap a user callable (..., k) -> (..., k) for solver arrays of shape (k, P)."""
    def call(C: Array) -> Array:
        k = C.shape[0]
        user = np.moveaxis(C.reshape((k,) + shape), 0, -1)     # shape + (k,), a view
        out = _grid_call(fun, user, name)
        return np.moveaxis(out, -1, 0).reshape(k, -1)
    return call


def pellet_eta(rate_v: RateFunction, drate_v: RateFunction, Cs: ArrayLike, De: ArrayLike,
               L: ArrayLike, geometry: str, *, C_eq: ArrayLike = 0.0, n_grid: int = 48,
               tol: float = 1e-10, max_iter: int = 60) -> tuple[Array, Array]:
    """Effectiveness factor of any single-concentration rate law by a numerical pellet solution.

    Parameters
    ----------
    rate_v, drate_v : callable
        ``rate_v(C)`` is the rate per pellet volume, mol/(m^3 s), and ``drate_v(C)`` its
        derivative in C, 1/s, for concentrations of shape ``Cs.shape + (k,)`` (any k); both are
        elementwise and vectorised, with point parameters of shape ``Cs.shape + (1,)``.
        The rate must be positive above ``C_eq`` (negative below it, for a reaction running
        backwards).
    Cs : array_like
        Surface concentrations, mol/m^3, any shape (typically (m, n)).
    De : array_like
        Effective diffusivity, m^2/s, broadcastable to ``Cs``.
    L : array_like
        Characteristic length Vp/Sp, m, broadcastable to ``Cs``.
    geometry : {'slab', 'cylinder', 'sphere'}
    C_eq : array_like, optional
        Equilibrium concentration, mol/m^3 (0: irreversible); concentrations inside the pellet
        are kept between C_eq and Cs.
    n_grid : int, optional
        Cells of the finest grid (default 48; a multiple of 4, >= 16). The solution runs on
        n_grid/4, n_grid/2 and n_grid cells; the last two are combined by Richardson
        extrapolation. Rates that do not vanish at C_eq (zero-order-like: r(C_eq + 1e-10
        (Cs - C_eq)) > 0.05 r(Cs)) use max(2 n_grid, 128).
    tol : float, optional
        Newton convergence, as a fraction of Cs - C_eq.
    max_iter : int, optional
        Newton iterations per grid.

    Returns
    -------
    eta : ndarray
        Effectiveness factor, shape of ``Cs``.
    phi : ndarray
        Generalised modulus (:func:`generalized_modulus`), shape of ``Cs``.

    Raises
    ------
    StudyError
        Unknown geometry or a bad option.
    ModelError
        Non-positive De or L, non-finite Cs, or a rate of the wrong sign.
    SolverError
        A callable returned non-finite values, or Newton did not converge at some points
        (the message gives how many, where, and the likely cause).

    Warns
    -----
    ConvergenceWarning
        When the grid-error estimate (difference of the two finest grids) exceeds 1e-3.

    Notes
    -----
    Finite volumes on a per-point radial grid clustered at the surface, solved by a batched
    semismooth Newton iteration (tridiagonal systems, Thomas sweeps vectorised over points),
    started from the semi-infinite slab profile of the effective order at Cs and refined
    through nested grids; eta from the first integral of the pellet equation. See
    :mod:`kinfit.physics.pellet._solver`. Measured over 1e-3 <= Phi <= 1e3 with the default
    grid: at most 5e-7 relative for first order and n >= 1 (against the phase-plane solution),
    6e-6 for Langmuir-Hinshelwood kinetics with K Cs up to 100 (against solve_bvp), 9e-6 for
    power laws with dead zones (0.05 <= n < 1) and 5e-5 for zero order. Where
    |Cs - C_eq| < 1e-7 max(|Cs|, |C_eq|, 1e-3 mol/m^3) the pellet is solved at that distance
    from C_eq (the linearised limit; rounding of C would otherwise swamp the profile). For
    rate laws with several steady states (strong substrate inhibition) the branch reached from
    the start profile is returned.

    Examples
    --------
    >>> k = 0.1                                       # first order, 1/s: phi = 1
    >>> eta, phi = pellet_eta(lambda C: k * C, lambda C: k + 0 * C, 1.0, 1e-9, 1e-4, "slab")
    >>> round(float(eta), 6), round(float(np.tanh(phi) / phi), 6)
    (0.761594, 0.761594)
    """
    a = shape_index(geometry)
    if isinstance(n_grid, bool) or not isinstance(n_grid, (int, np.integer)) or n_grid < 16 \
            or n_grid % 4:
        raise StudyError(f"the 'n_grid' option of pellet_eta() must be an int >= 16 divisible "
                         f"by 4; got {n_grid!r}")
    if not (isinstance(max_iter, (int, np.integer)) and max_iter >= 1):
        raise StudyError(f"the 'max_iter' option of pellet_eta() must be an int >= 1; got "
                         f"{max_iter!r}")
    if not (0 < tol < 1e-2):
        raise StudyError(f"the 'tol' option of pellet_eta() must be in (0, 1e-2); got {tol!r}")
    Cs = np.asarray(Cs, dtype=float)
    shape = Cs.shape
    if not np.all(np.isfinite(Cs)):
        raise ModelError("surface concentration Cs must be finite; got "
                         f"{Cs[~np.isfinite(Cs)].flat[0]!r}")
    De = np.broadcast_to(_positive("effective diffusivity De", De), shape).ravel()
    L = np.broadcast_to(_positive("characteristic length L", L), shape).ravel()
    C_eq_b = np.broadcast_to(np.asarray(C_eq, dtype=float), shape)
    if not np.all(np.isfinite(C_eq_b)):
        raise ModelError("equilibrium concentration C_eq must be finite")
    ceq = C_eq_b.ravel()
    cs = Cs.ravel()
    # a reaction running backwards (Cs < C_eq) is solved as its mirror image about C_eq
    sign = np.where(cs < ceq, -1.0, 1.0)
    gap = np.abs(cs - ceq)
    tiny = 1e-7 * np.maximum(np.maximum(np.abs(cs), np.abs(ceq)), 1e-3)
    span = np.where(gap > tiny, gap, tiny)            # Cs = C_eq: the linearised limit
    top = ceq + span
    mirrored = bool(np.any(sign < 0))
    sgn_user = sign.reshape(shape + (1,))
    ceq_user = ceq.reshape(shape + (1,))

    def rate_hat(C: Array) -> Array:
        if not mirrored:
            return rate_v(C)
        return sgn_user * np.asarray(rate_v(ceq_user + sgn_user * (C - ceq_user)), dtype=float)

    def drate_hat(C: Array) -> Array:
        if not mirrored:
            return drate_v(C)
        return np.asarray(drate_v(ceq_user + sgn_user * (C - ceq_user)), dtype=float)

    top_user = top.reshape(shape)
    r_s = _grid_call(rate_hat, top_user[..., None], "rate_v")[..., 0].ravel()
    dr_s = _grid_call(drate_hat, top_user[..., None], "drate_v")[..., 0].ravel()
    if np.any(~(r_s > 0)):
        bad = int(np.flatnonzero(~(r_s > 0))[0])
        raise ModelError(f"the rate at the surface must be positive above C_eq (negative below "
                         f"it); at point {bad} Cs = {cs[bad]:.6g}, C_eq = {ceq[bad]:.6g} mol/m^3 "
                         f"gives r_v = {sign[bad] * r_s[bad]:.6g} mol/(m^3 s)")
    integral = _rate_integral(rate_hat, ceq.reshape(shape).copy(), top_user,
                              ceq.reshape(shape)).ravel()
    if np.any(~(integral > 0)):
        bad = int(np.flatnonzero(~(integral > 0))[0])
        raise ModelError(f"the rate integral from C_eq to Cs is not positive at point {bad} "
                         f"(Cs = {cs[bad]:.6g}, C_eq = {ceq[bad]:.6g} mol/m^3)")
    phi = L * r_s / np.sqrt(2.0 * De * integral)
    # scaled rate g = R^2 r_v / De on solver arrays (k, P)
    R = (a + 1.0) * L
    scale = (R * R / De)[None, :]
    rate_g = _as_grid_major(rate_hat, shape, "rate_v")
    drate_g = _as_grid_major(drate_hat, shape, "drate_v")

    def g(C: Array) -> Array:
        return scale * rate_g(C)

    def dg(C: Array) -> Array:
        return scale * drate_g(C)

    r_low = _grid_call(rate_hat, (ceq + 1e-10 * span).reshape(shape)[..., None],
                       "rate_v")[..., 0].ravel()
    n_fine = max(2 * n_grid, 128) if np.max(r_low / r_s) > _ZERO_ORDER_LIKE else n_grid
    levels = (n_fine // 4, n_fine // 2, n_fine)
    # start profile: the local order at Cs
    n_eff = np.clip(dr_s * span / r_s, 0.0, 5.0)
    phi_R = (a + 1.0) * phi
    D = None
    etas = []
    for n_cells in levels:
        grid = fv.make_grid(phi_R, n_cells, a)
        if D is None:
            D = span[None, :] * (1.0 - fv.initial_profile(grid, phi, n_eff, a))
        else:
            D = fv.refine_profile(D)
        res = fv.newton_profile(g, dg, grid, D, top, ceq, tol=tol, max_iter=max_iter)
        if not res.converged.all():
            _raise_not_converged(res, n_cells, cs, phi, max_iter)
        D = res.D
        if n_cells == levels[0]:
            continue
        # first integral: Cx(1)^2 / 2 = int_{Cc}^{Cs} g dC - a int Cx^2/xi
        dG = _depletion_integral(rate_hat, top_user, D[0].reshape(shape), ceq.reshape(shape))
        cx2 = 2.0 * (scale[0] * dG.ravel() - fv.curvature_integral(grid, D, a))
        etas.append((a + 1.0) * np.sqrt(np.maximum(cx2, 0.0)) / (scale[0] * r_s))
    coarse, fine = etas
    eta = fine + (fine - coarse) / 3.0
    est = np.abs(fine - coarse) / (3.0 * np.maximum(eta, 1e-300))
    if np.max(est) > 1e-3:
        worst = int(np.argmax(est))
        warnings.warn(f"pellet_eta: grid error estimate {est[worst]:.1e} at point {worst} "
                      f"(Phi = {phi[worst]:.3g}); increase n_grid", ConvergenceWarning,
                      stacklevel=2)
    return eta.reshape(shape), phi.reshape(shape)


def _raise_not_converged(res, n_cells: int, cs: Array, phi: Array, max_iter: int) -> None:
    bad = np.flatnonzero(~res.converged)
    first = int(bad[0])
    finite = np.all(np.isfinite(res.D[:, first]))
    cause = ("the rate law may have several steady states inside the pellet (strong "
             "inhibition) or a derivative that does not match rate_v" if finite else
             "the rate or its derivative became non-finite inside the pellet")
    raise SolverError(f"pellet profile did not converge at {bad.size} of {cs.size} points "
                      f"after {max_iter} Newton iterations on {n_cells} cells (first at point "
                      f"{first}: Cs = {cs[first]:.6g} mol/m^3, Phi = {phi[first]:.4g}, last "
                      f"relative step {res.step[first]:.1e}); {cause}")
