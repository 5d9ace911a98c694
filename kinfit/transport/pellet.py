"""Internal (pore) diffusion in an isothermal catalyst pellet: effectiveness factors and moduli.

Every function is vectorised over arbitrary leading shapes (typically ``(m, n)``: m parameter
sets times n points) and works in SI units: concentrations in mol/m^3, effective diffusivity
``De`` in m^2/s, characteristic length ``L = Vp/Sp`` in m (sphere R/3 = dp/6, infinite
cylinder R/2, slab the half-thickness), and rates **per pellet volume**
``r_v = rho_p * r_mass`` in mol/(m^3 s).

Normalisation (Aris 1965; Bischoff 1965; Petersen 1965 -- from memory): the generalised modulus

.. math:: \\Phi = \\frac{L\\, r_v(C_s)}{\\sqrt{2 \\int_{C_{eq}}^{C_s} D_e\\, r_v(C)\\, dC}}

makes :math:`\\eta \\to 1/\\Phi` at large :math:`\\Phi` for every shape and rate law; for a first
order reaction it is the Aris modulus :math:`\\phi_L = L\\sqrt{k_v/D_e}` (Aris 1957).

Routes
------
* :func:`eta_first_order`: closed forms (Thiele 1939; Aris 1957, 1975).
* :func:`eta_power_law`: n-th order kinetics, 0 <= n <= 3, from a table built once per geometry
  by phase-plane integration (:mod:`kinfit.transport._pellet_phase`) and interpolated by
  splines (:mod:`kinfit.transport._pellet_table`); at most 5e-6 relative error.
* :func:`eta_langmuir_hinshelwood`: r = k K C/(1 + K C)^m, m = 1, 2, inside a domain of
  K Cs, from a table built with the numerical solver (:mod:`kinfit.transport._lh_table`).
* :func:`pellet_eta`: any rate law given as vectorised callables, by a batched Newton solution
  of a finite-volume discretisation on a radial grid clustered at the surface.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable

import numpy as np
from numpy.polynomial.legendre import leggauss
from numpy.typing import ArrayLike, NDArray
from scipy.special import i0e, i1e

from kinfit.errors import ConvergenceWarning, ModelError, SolverError, StudyError
from kinfit.transport import _pellet_phase as _phase
from kinfit.transport import _pellet_table as _table
from kinfit.transport._lh_table import eta_langmuir_hinshelwood

__all__ = [
    "GEOMETRIES",
    "shape_index",
    "eta_first_order",
    "eta_power_law",
    "eta_langmuir_hinshelwood",
    "generalized_modulus_power",
    "generalized_modulus",
    "pellet_eta",
]

Array = NDArray[np.float64]
RateFunction = Callable[[Array], Array]

#: Pellet shapes understood everywhere in kinfit.
GEOMETRIES = ("slab", "cylinder", "sphere")


def shape_index(geometry: str) -> int:
    """Exponent ``a`` of the pellet equation ``C'' + (a/r) C' = r_v/De``: 0 slab, 1 cylinder,
    2 sphere.

    Raises
    ------
    StudyError
        For a name other than ``'slab'``, ``'cylinder'`` or ``'sphere'``.

    Examples
    --------
    >>> shape_index("sphere")
    2
    """
    if not isinstance(geometry, str) or geometry not in _phase.SHAPE_INDEX:
        raise StudyError(f"geometry {geometry!r} is not a recognised pellet shape; expected one "
                         f"of {list(GEOMETRIES)}")
    return _phase.SHAPE_INDEX[geometry]


def _positive(name: str, value: ArrayLike, *, allow_zero: bool = False) -> Array:
    """Float array of a physical quantity that must be positive (or non-negative) and finite."""
    arr = np.asarray(value, dtype=float)
    bad = ~np.isfinite(arr) | ((arr < 0) if allow_zero else (arr <= 0))
    if np.any(bad):
        got = arr[bad].flat[0] if arr.ndim else float(arr)
        bound = ">= 0" if allow_zero else "> 0"
        raise ModelError(f"{name} must be finite and {bound}; got {got!r}")
    return arr


# ---------------------------------------------------------------------------------------------
# first order


def _eta_first_order(phi: Array, a: int) -> Array:
    phi = np.asarray(phi, dtype=float)
    out = np.ones(phi.shape)
    inf = np.isposinf(phi)
    out[inf] = 0.0
    m = (phi > 1e-8) & ~inf
    p = phi[m]
    if a == 0:
        val = np.tanh(p) / p
    elif a == 1:
        val = i1e(2.0 * p) / i0e(2.0 * p) / p           # exponentially scaled: no overflow
    else:
        x = 3.0 * p
        val = np.empty(x.shape)
        small = x < 0.1
        x2 = x[small] ** 2
        val[small] = 1.0 - x2 * (1.0 / 15.0 - x2 * (2.0 / 315.0 - x2 * (1.0 / 1575.0
                                                                        - x2 * 2.0 / 31185.0)))
        xl = x[~small]
        val[~small] = 3.0 * (1.0 / np.tanh(xl) - 1.0 / xl) / xl
    out[m] = val
    return np.where(np.isnan(phi), np.nan, out)


def eta_first_order(phi: ArrayLike, geometry: str) -> Array:
    """Effectiveness factor of an isothermal first-order reaction (Aris normalisation).

    Parameters
    ----------
    phi : array_like
        Thiele modulus :math:`\\phi_L = L\\sqrt{k_v/D_e}` with ``L = Vp/Sp``; any shape, >= 0;
        ``inf`` gives 0.
    geometry : {'slab', 'cylinder', 'sphere'}

    Returns
    -------
    ndarray
        eta, same shape as ``phi``.

    Raises
    ------
    StudyError
        Unknown geometry.
    ModelError
        Negative modulus.

    Notes
    -----
    Thiele (1939); Aris (1957, 1975) (from memory):

    .. math::
        \\eta_{slab} = \\frac{\\tanh\\phi}{\\phi},\\quad
        \\eta_{cyl} = \\frac{I_1(2\\phi)}{\\phi\\, I_0(2\\phi)},\\quad
        \\eta_{sph} = \\frac{1}{\\phi}\\Big[\\frac{1}{\\tanh 3\\phi} - \\frac{1}{3\\phi}\\Big]

    The cylinder uses exponentially scaled Bessel functions (no overflow at any modulus); the
    sphere switches to its Taylor series ``1 - x^2/15 + 2x^4/315 - ...`` (x = 3 phi) below
    x = 0.1, where the closed form loses digits to cancellation.

    References
    ----------
    Thiele, E. W. (1939), *Ind. Eng. Chem.* 31, 916-920 (from memory). Aris, R. (1957),
    *Chem. Eng. Sci.* 6, 262-268. Aris, R. (1975), *The Mathematical Theory of Diffusion and
    Reaction in Permeable Catalysts*, vol. 1, Clarendon Press (from memory).

    Examples
    --------
    >>> float(eta_first_order(1.0, "slab"))
    0.7615941559557649
    """
    a = shape_index(geometry)
    phi = np.asarray(phi, dtype=float)
    if np.any(phi < 0):
        raise ModelError(f"Thiele modulus must be >= 0; got {phi[phi < 0].flat[0]!r}")
    return _eta_first_order(phi, a)


# ---------------------------------------------------------------------------------------------
# n-th order


def _order_set(order: Array, shape: tuple[int, ...], keep: Array,
               cache: dict | None = None) -> _table.OrderSet:
    """Describe the orders of the points ``keep`` (flat mask of the broadcast shape); ``cache``
    keeps the table contracted at each distinct order between calls with the same orders."""
    total = int(np.prod(shape)) if shape else 1
    reduced = order
    if order.size * 4 > total and order.ndim and order.shape[-1] > 1:
        first = order[..., :1]
        if np.all(order == first):
            reduced = first                         # one order per row (parameter set)
    flat_n = np.broadcast_to(order, shape).ravel()[keep]
    if reduced.size <= 4096 and reduced.size * 4 <= max(total, 4):
        index = np.broadcast_to(np.arange(reduced.size).reshape(reduced.shape), shape)
        return _table.OrderSet(flat_n, reduced.ravel().astype(float), index.ravel()[keep],
                               cache)
    return _table.OrderSet(flat_n, None, None)


def eta_power_law(phi: ArrayLike, order: ArrayLike, geometry: str, *,
                  return_slope: bool = False, cache: dict | None = None
                  ) -> Array | tuple[Array, Array]:
    """Effectiveness factor of an isothermal n-th order reaction, 0 <= n <= 3.

    Parameters
    ----------
    phi : array_like
        Generalised modulus :math:`\\Phi` (see :func:`generalized_modulus_power`), >= 0; ``inf``
        gives 0 and NaN propagates.
    order : array_like
        Reaction order n, broadcastable with ``phi``. An order that is constant along the last
        axis (one order per parameter set) takes a faster path.
    geometry : {'slab', 'cylinder', 'sphere'}
    return_slope : bool, optional
        Also return :math:`d\\ln\\eta/d\\ln\\Phi` (exact derivative of the interpolant).
    cache : dict, optional
        Keeps the table's contraction at each distinct order between calls that share the
        orders (a caller's Newton iterations); pass the same empty dict to each such call.

    Returns
    -------
    eta : ndarray
        Broadcast shape of ``phi`` and ``order``.
    slope : ndarray
        Only with ``return_slope``.

    Raises
    ------
    StudyError
        Unknown geometry.
    ModelError
        Order outside [0, 3] or not finite; negative modulus.

    Notes
    -----
    Interpolated from a table built once per geometry (cached in memory; loaded from
    ``kinfit/data/power_law_eta.npz`` when present) by integrating the pellet equation as a
    phase-plane trajectory; see :mod:`kinfit.transport._pellet_phase` and
    :mod:`kinfit.transport._pellet_table`. Measured against a direct integration over
    1e-3 <= Phi <= 1e3 and 0 <= n <= 3 (step 0.0137): at most 5e-6 relative (in the blend of
    the low- and high-order tables near n = 0.52), median 1e-8. Limits:

    * small Phi: :math:`\\eta = 1 - \\frac{2n(1+a)}{(n+1)(3+a)}\\Phi^2` (1/3, 1/2, 3/5 at first
      order);
    * large Phi: :math:`\\eta\\Phi \\to 1 - \\frac{a(n+1)}{(n+3)(a+1)\\Phi}` (sphere first order
      1/Phi - 1/(3 Phi^2));
    * dead zone for n < 1 beyond :math:`\\Phi_c` (slab :math:`(1+n)/(1-n)`), where the slab
      has :math:`\\eta = 1/\\Phi` exactly; zero order: slab eta = 1 for Phi <= 1, else 1/Phi.

    References
    ----------
    Aris, R. (1965), *Ind. Eng. Chem. Fundam.* 4, 227-229; Bischoff, K. B. (1965), *AIChE J.*
    11, 351-355; Petersen, E. E. (1965), *Chem. Eng. Sci.* 20, 587-591 (all from memory).

    Examples
    --------
    >>> round(float(eta_power_law(2.0, 0.5, "slab")), 6)
    0.498047
    """
    shape_index(geometry)
    phi = np.asarray(phi, dtype=float)
    order = np.asarray(order, dtype=float)
    bad = ~np.isfinite(order) | (order < _table.ORDER_RANGE[0]) | (order > _table.ORDER_RANGE[1])
    if np.any(bad):
        got = order[bad].flat[0] if order.ndim else float(order)
        raise ModelError(f"reaction order must lie in [0, 3] for the tabulated power-law "
                         f"effectiveness factor; got {got!r} (use pellet_eta for other orders)")
    if np.any(phi < 0):
        raise ModelError(f"generalised modulus must be >= 0; got {phi[phi < 0].flat[0]!r}")
    shape = np.broadcast_shapes(phi.shape, order.shape)
    flat_phi = np.broadcast_to(phi, shape).ravel()
    keep = np.isfinite(flat_phi) & (flat_phi > 0)
    eta = np.where(np.isnan(flat_phi), np.nan, np.where(flat_phi == 0, 1.0, 0.0))
    slope = np.where(np.isnan(flat_phi), np.nan, np.where(flat_phi == 0, 0.0, -1.0))
    if keep.any():
        orders = _order_set(order, shape, keep, cache)
        f, df = _table.log_eta(_table.power_law_table(geometry), flat_phi[keep], orders)
        eta[keep] = np.exp(f)
        slope[keep] = df
    if return_slope:
        return eta.reshape(shape), slope.reshape(shape)
    return eta.reshape(shape)


def generalized_modulus_power(L: ArrayLike, k_v: ArrayLike, Cs: ArrayLike, n: ArrayLike,
                              De: ArrayLike, C_ref: ArrayLike) -> Array:
    """Generalised modulus of the power law :math:`r_v = k_v (C/C_{ref})^n`.

    Parameters
    ----------
    L : array_like
        Vp/Sp, m.
    k_v : array_like
        Rate per pellet volume at C = C_ref, mol/(m^3 s); >= 0.
    Cs : array_like
        Surface concentration, mol/m^3; >= 0.
    n : array_like
        Order, > -1.
    De : array_like
        Effective diffusivity, m^2/s.
    C_ref : array_like
        Reference concentration, mol/m^3 (kinfit's default is 1 mol/L = 1000 mol/m^3).

    Returns
    -------
    ndarray
        Phi, broadcast shape; ``inf`` at Cs = 0 for n < 1, 0 there for n > 1.

    Notes
    -----
    Derived: :math:`\\int_0^{C_s} r_v\\,dC = k_v C_s^{n+1}/((n+1) C_{ref}^n)`, so

    .. math:: \\Phi = \\frac{L\\,k_v (C_s/C_{ref})^n}{\\sqrt{2 D_e k_v C_s^{n+1}/((n+1)C_{ref}^n)}}
              = L\\sqrt{\\frac{n+1}{2}\\,\\frac{k_v C_s^{n-1}}{D_e C_{ref}^n}}.

    References
    ----------
    Aris, R. (1965), *Ind. Eng. Chem. Fundam.* 4, 227-229; Bischoff, K. B. (1965), *AIChE J.*
    11, 351-355; Petersen, E. E. (1965), *Chem. Eng. Sci.* 20, 587-591 (all from memory).

    Examples
    --------
    >>> float(generalized_modulus_power(1e-3, 100.0, 1000.0, 1.0, 1e-9, 1000.0))
    10.0
    """
    L = _positive("characteristic length L", L)
    k_v = _positive("rate constant k_v", k_v, allow_zero=True)
    Cs = _positive("surface concentration Cs", Cs, allow_zero=True)
    De = _positive("effective diffusivity De", De)
    C_ref = _positive("reference concentration C_ref", C_ref)
    n = np.asarray(n, dtype=float)
    if np.any(~np.isfinite(n) | (n <= -1)):
        raise ModelError(f"reaction order must be finite and > -1; got {n!r}")
    with np.errstate(divide="ignore", invalid="ignore"):
        arg = 0.5 * (n + 1.0) * k_v * Cs ** (n - 1.0) / (De * C_ref**n)
    return L * np.sqrt(arg)


# ---------------------------------------------------------------------------------------------
# general rate laws: modulus

_GL_X, _GL_W = leggauss(24)
_GL_S = 0.5 * (_GL_X + 1.0)
_GRADE = 4      # C = C_eq + (C_s - C_eq) s^4: nodes crowd at C_eq where r may behave as C^n


def _grid_call(fun: RateFunction, C: Array, name: str) -> Array:
    """Call a rate callable on (..., k) concentrations and check what comes back."""
    out = np.asarray(fun(C), dtype=float)
    if out.shape != C.shape:
        try:
            out = np.broadcast_to(out, C.shape)
        except ValueError as exc:
            raise ModelError(f"{name} returned shape {out.shape} for concentrations of shape "
                             f"{C.shape}; it must return one value per concentration") from exc
    if not np.all(np.isfinite(out)):
        raise SolverError(f"{name} returned a non-finite value (at C = "
                          f"{float(C[~np.isfinite(out)].flat[0]):.6g} mol/m^3)")
    return out


def _rate_integral(rate_v: RateFunction, lo: Array, hi: Array, C_eq: Array) -> Array:
    """:math:`\\int_{lo}^{hi} r_v\\,dC` for lo, hi on the same side of C_eq (point arrays).

    Taken as the difference of two graded Gauss-Legendre integrals from C_eq (exact for
    power laws with integer 4n), or directly when lo is far from C_eq.
    """
    s = _GL_S
    w = 0.5 * _GL_W

    def from_eq(top: Array) -> Array:
        span = (top - C_eq)[..., None]
        C = C_eq[..., None] + span * s**_GRADE
        r = _grid_call(rate_v, C, "rate_v")
        return np.sum(w * r * span * _GRADE * s ** (_GRADE - 1), axis=-1)

    diff = from_eq(hi) - from_eq(lo)
    near = np.abs(lo - C_eq) > 0.5 * np.abs(hi - C_eq)
    if np.any(near):
        span = (hi - lo)[..., None]
        r = _grid_call(rate_v, lo[..., None] + span * s, "rate_v")
        direct = np.sum(w * r, axis=-1) * (hi - lo)
        diff = np.where(near, direct, diff)
    return diff


def _depletion_integral(rate_v: RateFunction, top: Array, depletion: Array, C_eq: Array
                        ) -> Array:
    """:math:`\\int_{top - D}^{top} r_v\\,dC` with the depletion D = top - C_c given directly,
    so a tiny D keeps its digits (Gauss-Legendre on [top - D, top] when D is small against
    top - C_eq, the graded difference from C_eq otherwise)."""
    s = _GL_S
    w = 0.5 * _GL_W
    small = depletion < 0.5 * (top - C_eq)
    r = _grid_call(rate_v, top[..., None] - depletion[..., None] * s, "rate_v")
    direct = np.sum(w * r, axis=-1) * depletion
    if np.all(small):
        return direct
    far = _rate_integral(rate_v, np.maximum(top - depletion, C_eq), top, C_eq)
    return np.where(small, direct, far)


def generalized_modulus(rate_v: RateFunction, Cs: ArrayLike, De: ArrayLike, L: ArrayLike, *,
                        C_eq: ArrayLike = 0.0) -> Array:
    """Generalised modulus of any single-concentration rate law.

    Parameters
    ----------
    rate_v : callable
        ``rate_v(C) -> r_v``: rate per pellet volume, mol/(m^3 s), for concentrations of shape
        ``Cs.shape + (k,)``; vectorised, elementwise.
    Cs : array_like
        Surface concentrations, mol/m^3, any shape.
    De : array_like
        Effective diffusivity, m^2/s, broadcastable to ``Cs``.
    L : array_like
        Vp/Sp, m, broadcastable to ``Cs``.
    C_eq : array_like, optional
        Equilibrium concentration, mol/m^3 (0: irreversible).

    Returns
    -------
    ndarray
        Phi, shape of ``Cs``; 0 where Cs = C_eq.

    Raises
    ------
    ModelError
        Non-positive De or L, or a rate whose integral from C_eq to Cs is not positive.

    Notes
    -----
    .. math:: \\Phi = L\\,|r_v(C_s)| \\big/ \\sqrt{2 D_e \\int_{C_{eq}}^{C_s} r_v\\,dC}

    (Aris 1965; Bischoff 1965; Petersen 1965 -- from memory). The integral uses 24
    Gauss-Legendre nodes in :math:`s` with :math:`C = C_{eq} + (C_s - C_{eq}) s^4`, so a rate
    that behaves as :math:`(C - C_{eq})^n` near equilibrium is integrated to near machine
    precision.

    References
    ----------
    Aris, R. (1965), *Ind. Eng. Chem. Fundam.* 4, 227-229; Bischoff, K. B. (1965), *AIChE J.*
    11, 351-355; Petersen, E. E. (1965), *Chem. Eng. Sci.* 20, 587-591 (all from memory).

    Examples
    --------
    >>> def r(C):
    ...     return 2.0 * C
    >>> round(float(generalized_modulus(r, 1.0, 1e-9, 1e-4)), 10)   # first order: L sqrt(k/De)
    4.472135955
    """
    Cs = np.asarray(Cs, dtype=float)
    De = np.broadcast_to(_positive("effective diffusivity De", De), Cs.shape)
    L = np.broadcast_to(_positive("characteristic length L", L), Cs.shape)
    C_eq = np.broadcast_to(np.asarray(C_eq, dtype=float), Cs.shape)
    r_s = _grid_call(rate_v, Cs[..., None], "rate_v")[..., 0]
    integral = _rate_integral(rate_v, C_eq.copy(), Cs, C_eq)
    same = Cs == C_eq
    if np.any(~same & ~(integral > 0)):
        bad = np.flatnonzero((~same & ~(integral > 0)).ravel())[0]
        raise ModelError(f"the rate integral from C_eq to Cs is not positive at point {bad} "
                         f"(Cs = {float(Cs.ravel()[bad]):.6g}, C_eq = "
                         f"{float(C_eq.ravel()[bad]):.6g} mol/m^3): the "
                         f"rate must be positive above C_eq and negative below it")
    with np.errstate(divide="ignore", invalid="ignore"):
        phi = L * np.abs(r_s) / np.sqrt(2.0 * De * integral)
    return np.where(same, 0.0, phi)


# ---------------------------------------------------------------------------------------------
# general rate laws: numerical pellet solution

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
    :mod:`kinfit.transport._pellet_solver`. Measured over 1e-3 <= Phi <= 1e3 with the default
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
    from kinfit.transport import _pellet_solver as fv

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
    # start profile: the order at Cs, but no dead zone unless the rate is sub-linear at C_eq
    r_mid = _grid_call(rate_hat, (ceq + 1e-6 * span).reshape(shape)[..., None],
                       "rate_v")[..., 0].ravel()
    with np.errstate(divide="ignore", invalid="ignore"):
        n_low = np.log(r_mid / r_low) / np.log(1e4)
    n_eff = np.clip(dr_s * span / r_s, 0.0, 5.0)
    n_eff = np.where(np.nan_to_num(n_low, nan=1.0) < 0.99, n_eff, n_eff)
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
