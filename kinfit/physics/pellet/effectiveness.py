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
  by phase-plane integration (:mod:`kinfit.physics.pellet._phase`) and interpolated by
  splines (:mod:`kinfit.physics.pellet._power_table`); at most 5e-6 relative error.
* :func:`eta_langmuir_hinshelwood`: r = k K C/(1 + K C)^m, m = 1, 2, inside a domain of
  K Cs, from a table built with the numerical solver (:mod:`kinfit.physics.pellet._lh_table`).
* :func:`pellet_eta`: any rate law given as vectorised callables, by a batched Newton solution
  of a finite-volume discretisation on a radial grid clustered at the surface.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike
from scipy.special import i0e, i1e

from kinfit.errors import ModelError
from kinfit.physics.geometry import shape_index
from kinfit.physics.pellet import _power_table as _table
from kinfit.physics.pellet._checks import Array, _positive
from kinfit.physics.pellet._lh_table import eta_langmuir_hinshelwood

__all__ = ['eta_first_order', 'eta_power_law', 'eta_langmuir_hinshelwood', 'generalized_modulus_power']


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
    phase-plane trajectory; see :mod:`kinfit.physics.pellet._phase` and
    :mod:`kinfit.physics.pellet._power_table`. Measured against a direct integration over
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
# general rate laws: numerical pellet solution


