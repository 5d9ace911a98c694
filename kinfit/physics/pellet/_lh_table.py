"""Tabulated effectiveness factor of Langmuir-Hinshelwood kinetics (private implementation
behind :func:`kinfit.physics.pellet.effectiveness.eta_langmuir_hinshelwood`).

Problem. For :math:`r_v = k_v K C/(1 + K C)^m` (m = 1 or 2) in a slab, infinite cylinder or
sphere (shape index a = 0, 1, 2), with :math:`u = C/C_s`, :math:`\\xi = r/R` and
:math:`\\beta = K C_s`,

.. math:: u'' + \\frac{a}{\\xi} u' = (a+1)^2 \\phi_1^2 \\frac{u}{(1+\\beta u)^m},
          \\qquad u'(0) = 0,\\; u(1) = 1,\\qquad \\eta = \\frac{(1+\\beta)^m u'(1)}{(a+1)\\phi_1^2},

where :math:`\\phi_1 = L\\sqrt{k_v K/D_e}` is the first-order (low-concentration) modulus, so
eta depends on :math:`(\\phi_1, \\beta, m, a)` only. The generalised modulus (Aris 1965; Bischoff
1965 -- from memory) is :math:`\\Phi = \\phi_1 f_m(\\beta)` with (derived)

.. math:: f_m(\\beta) = \\frac{\\beta}{(1+\\beta)^m\\sqrt{2 I_m(\\beta)}},\\quad
          I_1 = \\beta - \\ln(1+\\beta),\\quad I_2 = \\ln(1+\\beta) - \\frac{\\beta}{1+\\beta},

and :math:`f_m \\to 1` as :math:`\\beta \\to 0`.

What is stored. The smooth correction to the first-order curve,

.. math:: F(x, t) = \\ln\\eta - \\ln\\eta_1(\\Phi), \\qquad x = \\log_{10}\\Phi,\\;
          t = \\ln(1+\\beta),

with :math:`\\eta_1` the closed-form first-order effectiveness factor of the same shape
(:func:`kinfit.physics.pellet.effectiveness.eta_first_order`); F vanishes at :math:`\\beta = 0` and tends to
zero like :math:`\\Phi^2` for small and like :math:`1/\\Phi` for large moduli. Nodes:
``x`` in [-2, 3.5] (step 0.02, refined to 0.004 over [-1.2, 0.8] where the curves bend, and for
m = 1 to 0.002 over [-0.5, 0.2] around the zero-order kink that large beta approaches), ``t``
uniform over [0, ln(1 + beta_max)] (41 nodes for m = 1, 121 for m = 2). Interpolation is a
bicubic interpolating spline (``scipy.interpolate.RectBivariateSpline``, s = 0), converted
once to its bicubic patches (values and derivatives at the cell corners) so that values and
exact derivatives at scattered points cost a few vectorised numpy operations. Outside the x range F is continued with its asymptotic form
(:math:`F \\propto \\Phi^2` below, :math:`\\propto 1/\\Phi` above).

How it was built. :func:`node_values` solves the pellet at every node with the batched
finite-volume solver :func:`kinfit.physics.pellet.effectiveness.pellet_eta` on a fine grid
(``n_grid = 192``, Richardson-extrapolated); against shooting solutions of the scaled problem
(solve_ivp DOP853, rtol 1e-12) that grid is good to ~3e-9. :func:`save_lh_tables` writes
``kinfit/data/lh_eta.npz`` (run ``python -m kinfit.physics.pellet._lh_table`` to rebuild, about a
minute); :func:`lh_table` loads it when its grid key matches the code and builds in memory
otherwise.

Domain (where the table is used; elsewhere the caller falls back to the numerical solver).
:data:`BETA_MAX`: m = 1: beta <= 1000 for every shape (the solution is unique for m = 1, a
monotone rate; beyond 1000 the curves approach the zero-order kink so closely that a cubic
table of this size loses accuracy). m = 2: the
pellet has several steady states for beta above an onset found here by shooting
(:func:`multiplicity_onset`: the scaled modulus stops being monotone in the centre
concentration) at beta = 9.15 (slab), 10.6 (cylinder) and 12.65 (sphere); near the onset
eta(Phi) steepens into a fold, so the table stops well below it, at beta <= 5 (slab),
6 (cylinder), 7 (sphere). Any Phi >= 0 is covered.

Accuracy (measured at all cell centres, where a cubic table errs most, against the fine-grid
solver): at most 1.1e-6 relative in eta for m = 1 and 7.7e-6 for m = 2 (sphere, beta near 7,
Phi ~ 0.33); ``tests/test_lh_pellet.py`` checks 2e-5 against solve_bvp at off-node points.
"""

from __future__ import annotations

import functools
import warnings
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.interpolate import RectBivariateSpline
from scipy.special import i0e, i1e

from kinfit.errors import ModelError, StudyError
from kinfit.physics.pellet.numerical import pellet_eta

__all__ = [
    "BETA_MAX",
    "TABLE_FILE",
    "TABLE_RESOURCE",
    "LHTable",
    "modulus_factor",
    "first_order_log",
    "x_nodes",
    "t_nodes",
    "node_values",
    "build_lh_table",
    "save_lh_tables",
    "lh_table",
    "log_eta_lh",
    "in_domain",
    "eta_langmuir_hinshelwood",
    "multiplicity_onset",
]

Array = NDArray[np.float64]

SHAPES = {"slab": 0, "cylinder": 1, "sphere": 2}
#: Largest beta = K Cs the table covers, per (m, geometry).
BETA_MAX: dict[tuple[int, str], float] = {
    (1, "slab"): 1000.0, (1, "cylinder"): 1000.0, (1, "sphere"): 1000.0,
    (2, "slab"): 5.0, (2, "cylinder"): 6.0, (2, "sphere"): 7.0,
}
#: Where the pre-built tables are looked for (written by :func:`save_lh_tables`).
#: the shipped table, read through importlib.resources (works from a wheel or a zip too)
TABLE_RESOURCE = resources.files("kinfit").joinpath("data", "lh_eta.npz")
#: where the build script writes it
TABLE_FILE = Path(str(TABLE_RESOURCE))

X_RANGE = (-2.0, 3.5)
#: (start, end, step) of the uniform pieces of the x nodes; m = 1 needs the finest steps near
#: the zero-order kink (Phi_c = 1 slab, ~0.71 cylinder, ~0.58 sphere) that large beta approaches
_X_PIECES = {
    1: ((-2.0, -1.2, 0.02), (-1.2, -0.5, 0.004), (-0.5, 0.2, 0.002), (0.2, 0.8, 0.004),
        (0.8, 3.5, 0.02)),
    2: ((-2.0, -1.2, 0.02), (-1.2, 0.8, 0.004), (0.8, 3.5, 0.02)),
}
_N_T = {1: 41, 2: 121}
_N_GRID = 192
_FORMAT = 1
_LN10 = np.log(10.0)


# ---------------------------------------------------------------------------------------------
# closed-form pieces


def _integral_ratio(beta: Array, m: int) -> Array:
    """I_m(beta) / beta^2, with a series below beta = 0.01 (the closed form cancels there)."""
    beta = np.asarray(beta, dtype=float)
    small = beta < 1e-2
    b = np.where(small, 0.0, beta)
    with np.errstate(divide="ignore", invalid="ignore"):
        if m == 1:
            closed = (b - np.log1p(b)) / (b * b)
        else:
            closed = (np.log1p(b) - b / (1.0 + b)) / (b * b)
    # I/beta^2 = sum_{k>=2} (-1)^k c_k beta^(k-2), c_k = 1/k (m = 1) or (k-1)/k (m = 2)
    series = np.zeros_like(beta)
    for k in range(11, 1, -1):
        c = 1.0 / k if m == 1 else (k - 1.0) / k
        series = series * beta + (-1.0) ** k * c
    return np.where(small, series, closed)


def modulus_factor(beta: Array, m: int) -> tuple[Array, Array]:
    """f_m(beta) = Phi / phi_1 and d ln f_m / d ln beta (see the module notes)."""
    beta = np.asarray(beta, dtype=float)
    ratio = _integral_ratio(beta, m)
    f = (1.0 + beta) ** (-m) / np.sqrt(2.0 * ratio)
    # d ln f/d ln beta = 1 - m beta/(1+beta) - beta I'/(2 I), I' = beta/(1+beta)^m
    dlnf = 1.0 - m * beta / (1.0 + beta) - (1.0 + beta) ** (-m) / (2.0 * ratio)
    return f, dlnf


def first_order_log(phi: Array, a: int) -> tuple[Array, Array]:
    """ln eta_1 and d ln eta_1 / d ln phi of the first-order closed forms (Thiele 1939; Aris
    1957 -- from memory), for finite phi > 0."""
    p = np.asarray(phi, dtype=float)
    small = p < (1.0 / 30.0 if a == 2 else 1e-3)
    q = np.where(small, 1.0, p)
    if a == 0:
        # eta = tanh(p)/p; slope = 2p/sinh(2p) - 1
        e2 = np.exp(-2.0 * q)
        val = np.log(-np.expm1(-2.0 * q) / (1.0 + e2)) - np.log(q)
        slope = 4.0 * q * e2 / -np.expm1(-4.0 * q) - 1.0
        c = 1.0 / 3.0
    elif a == 1:
        # eta = I1(2p)/(p I0(2p)); slope = z I0/I1 - z I1/I0 - 2, z = 2p
        z = 2.0 * q
        ratio = i1e(z) / i0e(z)
        val = np.log(ratio) - np.log(q)
        slope = z / ratio - z * ratio - 2.0
        c = 0.5
    else:
        # eta = 3 h(x)/x^2 with h = x coth x - 1, x = 3p; slope = x h'/h - 2
        x = 3.0 * q
        e2 = np.exp(-2.0 * x)
        coth = (1.0 + e2) / -np.expm1(-2.0 * x)
        csch2 = 4.0 * e2 / np.expm1(-2.0 * x) ** 2
        h = x * coth - 1.0
        val = np.log(3.0 * h) - 2.0 * np.log(x)
        slope = x * (coth - x * csch2) / h - 2.0
        c = 0.6
    # small modulus (Aris 1975, common practice): eta = 1 - c p^2 + c2 p^4, ln eta to O(p^4);
    # for the sphere the series of the closed form in x = 3 p to x^8, below x = 0.1
    c2 = {0: 2.0 / 15.0, 1: 1.0 / 3.0}.get(a, 0.0)
    p2 = p * p
    ln_small = -c * p2 + (c2 - 0.5 * c * c) * p2 * p2
    slope_small = -2.0 * c * p2 + 4.0 * (c2 - 0.5 * c * c) * p2 * p2
    if a == 2:
        x2 = 9.0 * p2
        e = x2 * (1.0 / 15.0 - x2 * (2.0 / 315.0 - x2 * (1.0 / 1575.0 - x2 * 2.0 / 31185.0)))
        de = x2 * (2.0 / 15.0 - x2 * (8.0 / 315.0 - x2 * (6.0 / 1575.0 - x2 * 16.0 / 31185.0)))
        ln_small = np.log1p(-e)
        slope_small = -de / (1.0 - e)
    return np.where(small, ln_small, val), np.where(small, slope_small, slope)


# ---------------------------------------------------------------------------------------------
# nodes and build


def x_nodes(m: int) -> Array:
    """log10 Phi nodes: uniform pieces, fine over the bend of the curves (see :data:`_X_PIECES`)."""
    parts = []
    for lo, hi, h in _X_PIECES[m]:
        parts.append(np.linspace(lo, hi, round((hi - lo) / h) + 1)[:-1])
    parts.append(np.array([_X_PIECES[m][-1][1]]))
    return np.concatenate(parts)


def t_nodes(m: int, geometry: str) -> Array:
    """t = ln(1 + beta) nodes, uniform over [0, ln(1 + beta_max)]."""
    return np.linspace(0.0, np.log1p(BETA_MAX[(m, geometry)]), _N_T[m])


def solve_log_correction(x: Array, t: Array, m: int, geometry: str, *,
                         n_grid: int = _N_GRID) -> Array:
    """F = ln eta - ln eta_1 at Phi = 10^x, beta = e^t - 1 by the numerical pellet solver
    (arrays of one shape); used for the nodes and by the tests for off-node checks."""


    a = SHAPES[geometry]
    x, t = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(t, dtype=float))
    phi = 10.0 ** x.ravel()
    beta = np.expm1(t.ravel())
    f, _ = modulus_factor(beta, m)
    phi1 = phi / f
    K = beta[:, None]
    kK = (phi1**2)[:, None]          # Cs = 1, De = 1, L = 1: phi_1^2 = k_v K

    def rate(C: Array) -> Array:
        return kK * C / (1.0 + K * C) ** m

    def drate(C: Array) -> Array:
        return kK * (1.0 + (1.0 - m) * K * C) / (1.0 + K * C) ** (m + 1)

    eta, _ = pellet_eta(rate, drate, np.ones(beta.size), 1.0, 1.0, geometry, n_grid=n_grid)
    ln1, _ = first_order_log(phi, a)
    return (np.log(eta) - ln1).reshape(x.shape)


def node_values(m: int, geometry: str) -> Array:
    """F on the (x, t) nodes of one table, shape (len(x_nodes(m)), len(t_nodes(m, geometry)))."""
    X, T = np.meshgrid(x_nodes(m), t_nodes(m, geometry), indexing="ij")
    return solve_log_correction(X, T, m, geometry)


_HERMITE = np.array([[1.0, 0.0, 0.0, 0.0],      # cubic coefficients from (f0, f1, f0', f1')
                     [0.0, 0.0, 1.0, 0.0],
                     [-3.0, 3.0, -2.0, -1.0],
                     [2.0, -2.0, 1.0, 1.0]])


@dataclass(frozen=True)
class LHTable:
    """Interpolant of F(x, t) for one (m, geometry).

    Attributes
    ----------
    m : int
    geometry : str
    beta_max : float
        Upper end of the beta domain.
    spline : RectBivariateSpline
        Bicubic interpolating spline of F over (x, t) (the definition of the interpolant).
    x : ndarray
        x nodes.
    t0, ht : float
        First t node and the (uniform) t step.
    coef : ndarray, (Nx-1, Nt-1, 4, 4)
        The same spline as bicubic patches, F = sum_kl coef[i, j, k, l] u^k v^l in cell
        (i, j) with local coordinates u, v in [0, 1]; evaluated by :func:`_evaluate`.
    """

    m: int
    geometry: str
    beta_max: float
    spline: Any
    x: Array
    t0: float
    ht: float
    coef: Array


def _assemble(m: int, geometry: str, F: Array) -> LHTable:
    x, t = x_nodes(m), t_nodes(m, geometry)
    spline = RectBivariateSpline(x, t, F, kx=3, ky=3, s=0)
    # a tensor cubic spline is a bicubic polynomial on each cell, fixed by the values and the
    # derivatives f_x, f_t, f_xt at its corners (bicubic Hermite form)
    hx = np.diff(x)[:, None]
    ht = float(t[1] - t[0])
    Fv = spline(x, t)
    Fu = spline(x, t, dx=1)
    Ft = spline(x, t, dy=1)
    Fut = spline(x, t, dx=1, dy=1)
    G = np.empty((x.size - 1, t.size - 1, 4, 4))
    for r, (di, du) in enumerate(((0, 0), (1, 0), (0, 1), (1, 1))):
        for c, (dj, dv) in enumerate(((0, 0), (1, 0), (0, 1), (1, 1))):
            src = {(0, 0): Fv, (1, 0): Fu, (0, 1): Ft, (1, 1): Fut}[(du, dv)]
            block = src[di: di + x.size - 1, dj: dj + t.size - 1]
            G[:, :, r, c] = block * hx**du * ht**dv
    coef = np.einsum("kr,ijrc,lc->ijkl", _HERMITE, G, _HERMITE)
    return LHTable(m, geometry, BETA_MAX[(m, geometry)], spline, x, float(t[0]), ht,
                   np.ascontiguousarray(coef))


def _evaluate(table: LHTable, x: Array, t: Array) -> tuple[Array, Array, Array]:
    """F, dF/dx and dF/dt at flat coordinates inside the table (clamped to its edges)."""
    nx, nt = table.coef.shape[0], table.coef.shape[1]
    i = np.clip(np.searchsorted(table.x, x, side="right") - 1, 0, nx - 1)
    hx = table.x[i + 1] - table.x[i]
    u = (x - table.x[i]) / hx
    s = (t - table.t0) / table.ht
    j = np.clip(np.floor(s), 0, nt - 1).astype(np.intp)
    v = s - j
    c = table.coef[i, j]                                   # (N, 4, 4)
    one, zero = np.ones_like(u), np.zeros_like(u)
    cv = np.einsum("nkl,nl->nk", c, np.stack([one, v, v * v, v * v * v], axis=-1))
    cdv = np.einsum("nkl,nl->nk", c, np.stack([zero, one, 2.0 * v, 3.0 * v * v], axis=-1))
    up = np.stack([one, u, u * u, u * u * u], axis=-1)
    dup = np.stack([zero, one, 2.0 * u, 3.0 * u * u], axis=-1)
    F = np.einsum("nk,nk->n", cv, up)
    Fx = np.einsum("nk,nk->n", cv, dup) / hx
    Ft = np.einsum("nk,nk->n", cdv, up) / table.ht
    return F, Fx, Ft


def build_lh_table(m: int, geometry: str) -> LHTable:
    """Build the table of one (m, geometry) from the numerical pellet solver (seconds)."""
    return _assemble(m, geometry, node_values(m, geometry))


def _grid_key() -> Array:
    betas = [BETA_MAX[k] for k in sorted(BETA_MAX)]
    pieces = [v for m in (1, 2) for piece in _X_PIECES[m] for v in piece]
    return np.array([_FORMAT, *X_RANGE, *pieces, _N_T[1], _N_T[2], _N_GRID, *betas],
                    dtype=float)


def save_lh_tables(path: str | Path = TABLE_FILE) -> Path:
    """Build the six tables (m = 1, 2 times three shapes) and write them to a ``.npz`` file.

    Parameters
    ----------
    path : str or Path
        Target; default ``kinfit/data/lh_eta.npz``.

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    arrays: dict[str, Any] = {"key": _grid_key()}
    for (m, geometry) in sorted(BETA_MAX):
        # float32 keeps F to ~1e-8 absolute, far inside the interpolation error
        arrays[f"m{m}/{geometry}"] = node_values(m, geometry).astype(np.float32)
    np.savez_compressed(path, **arrays)
    return path


@functools.cache
def lh_table(m: int, geometry: str) -> LHTable:
    """The cached table of one (m, geometry): loaded from :data:`TABLE_FILE` when its grid key
    matches the code, built in memory otherwise."""
    if TABLE_RESOURCE.is_file():
        try:
            with TABLE_RESOURCE.open("rb") as fh, np.load(fh) as data:
                key = data["key"]
                if key.shape == _grid_key().shape and np.array_equal(key, _grid_key()):
                    return _assemble(m, geometry,
                                     np.array(data[f"m{m}/{geometry}"], dtype=float))
            warnings.warn(f"the shipped table {TABLE_RESOURCE.name} was built for another grid; "
                          "building it in memory (rebuild the file with the module's "
                          "save function)", RuntimeWarning, stacklevel=2)
        except (OSError, KeyError, ValueError) as exc:
            warnings.warn(f"the shipped table {TABLE_RESOURCE.name} cannot be read ({exc}); "
                          "building it in memory", RuntimeWarning, stacklevel=2)
    return build_lh_table(m, geometry)


# ---------------------------------------------------------------------------------------------
# evaluation


def in_domain(beta: ArrayLike, m: int, geometry: str) -> NDArray[np.bool_]:
    """Mask of the beta values the table covers (0 <= beta <= beta_max, finite)."""
    beta = np.asarray(beta, dtype=float)
    return np.isfinite(beta) & (beta >= 0.0) & (beta <= BETA_MAX[(m, geometry)])


def log_eta_lh(phi: Array, beta: Array, m: int, geometry: str
               ) -> tuple[Array, Array, Array]:
    """ln eta, d ln eta/d ln Phi (beta fixed) and d ln eta/d ln beta (Phi fixed).

    Flat or any-shape arrays of finite ``phi`` > 0 and ``beta`` inside the domain
    (:func:`in_domain`); no checks here.
    """
    table = lh_table(m, geometry)
    a = SHAPES[geometry]
    phi, beta = np.broadcast_arrays(np.asarray(phi, dtype=float), np.asarray(beta, dtype=float))
    shape = phi.shape
    phi, beta = phi.ravel(), beta.ravel()
    x = np.log10(phi)
    t = np.log1p(beta)
    lo, hi = X_RANGE
    xc = np.clip(x, lo, hi)
    F, Fx, Ft = _evaluate(table, xc, t)
    Fx /= _LN10                                       # d F/d ln Phi
    below, above = x < lo, x > hi
    if below.any():                                   # F ~ Phi^2
        w = (phi[below] / 10.0**lo) ** 2
        F[below] *= w
        Fx[below] = 2.0 * F[below]
        Ft[below] *= w
    if above.any():                                   # F ~ 1/Phi
        w = 10.0**hi / phi[above]
        F[above] *= w
        Fx[above] = -F[above]
        Ft[above] *= w
    ln1, s1 = first_order_log(phi, a)
    dlnbeta = Ft * beta / (1.0 + beta)
    return ((ln1 + F).reshape(shape), (s1 + Fx).reshape(shape), dlnbeta.reshape(shape))


def eta_langmuir_hinshelwood(phi: ArrayLike, beta: ArrayLike, m: int, geometry: str, *,
                             return_slope: bool = False) -> Array | tuple[Array, Array, Array]:
    """Effectiveness factor of r = k K C/(1 + K C)^m (m = 1, 2) from a precomputed table.

    Parameters
    ----------
    phi : array_like
        Generalised modulus Phi (:func:`kinfit.physics.pellet.effectiveness.generalized_modulus`), >= 0; ``inf`` gives 0.
    beta : array_like
        K Cs, broadcastable with ``phi``; inside ``0 <= beta <= beta_max`` (m = 1: 1000 for
        every shape; m = 2: 5 slab, 6 cylinder, 7 sphere, below the onset of multiple steady
        states).
    m : {1, 2}
    geometry : {'slab', 'cylinder', 'sphere'}
    return_slope : bool, optional
        Also return d ln eta/d ln Phi (beta fixed) and d ln eta/d ln beta (Phi fixed), exact
        derivatives of the interpolant.

    Returns
    -------
    eta : ndarray
    slope_phi, slope_beta : ndarray
        Only with ``return_slope``.

    Raises
    ------
    StudyError
        Unknown geometry.
    ModelError
        m not 1 or 2, negative Phi, or beta outside the table (use :func:`kinfit.physics.pellet.effectiveness.pellet_eta` there).

    Notes
    -----
    Bicubic spline of ln eta - ln eta_1(Phi) over (log10 Phi, ln(1 + beta)), built with
    :func:`kinfit.physics.pellet.effectiveness.pellet_eta` on a fine grid (module notes). At most 2e-5
    relative error against solve_bvp (tests/test_lh_pellet.py).

    Examples
    --------
    >>> eta = eta_langmuir_hinshelwood(1.0, 1e-9, 1, "slab")     # first order: tanh(1)/1
    >>> round(float(eta), 6), round(float(np.tanh(1.0)), 6)
    (0.761594, 0.761594)
    """
    if geometry not in SHAPES:
        raise StudyError(f"geometry {geometry!r} is not a recognised pellet shape; expected one "
                         f"of {list(SHAPES)}")
    if isinstance(m, bool) or m not in (1, 2):
        raise ModelError(f"Langmuir-Hinshelwood denominator power m must be 1 or 2; got {m!r}")
    phi, beta = np.broadcast_arrays(np.asarray(phi, dtype=float), np.asarray(beta, dtype=float))
    if np.any(phi < 0):
        raise ModelError(f"generalised modulus must be >= 0; got {phi[phi < 0].flat[0]!r}")
    inside = in_domain(beta, m, geometry)
    if not np.all(inside | np.isnan(phi)):
        raise ModelError(f"K Cs = {beta[~inside].flat[0]!r} lies outside the tabulated "
                         f"Langmuir-Hinshelwood domain [0, {BETA_MAX[(m, geometry)]:g}] for "
                         f"m = {m}, {geometry}; use pellet_eta there")
    eta = np.where(np.isnan(phi), np.nan, np.where(phi == 0, 1.0, 0.0))
    s_phi = np.where(np.isnan(phi), np.nan, np.where(phi == 0, 0.0, -1.0))
    s_beta = np.where(np.isnan(phi), np.nan, 0.0)
    keep = np.isfinite(phi) & (phi > 0)
    if keep.any():
        f, dfp, dfb = log_eta_lh(phi[keep], beta[keep], m, geometry)
        eta[keep], s_phi[keep], s_beta[keep] = np.exp(f), dfp, dfb
    if return_slope:
        return eta, s_phi, s_beta
    return eta


# ---------------------------------------------------------------------------------------------
# multiplicity


def _shoot(w0: float, ln_beta: float, m: int, a: int) -> float:
    """Scaled modulus Lambda = (a+1) phi_1 of the profile with centre value K C = e^w0 and
    surface value beta: integrates w'' + w'^2 + (a/s) w' = (1 + e^w)^-m (w = ln(K C),
    s = Lambda xi; derived) outwards from the centre series until w = ln beta."""
    from scipy.integrate import solve_ivp

    g0 = (1.0 + np.exp(w0)) ** (-m)
    s0 = 1e-5
    y0 = [w0 + g0 * s0**2 / (2.0 * (a + 1)), g0 * s0 / (a + 1)]

    def rhs(s: float, y: Array) -> list[float]:
        v = np.exp(min(y[0], 700.0))
        return [y[1], (1.0 + v) ** (-m) - y[1] ** 2 - a * y[1] / s]

    def reach(s: float, y: Array) -> float:
        return y[0] - ln_beta

    reach.terminal = True          # type: ignore[attr-defined]
    reach.direction = 1            # type: ignore[attr-defined]
    sol = solve_ivp(rhs, (s0, 10.0 * (ln_beta - w0) + 100.0), y0, method="DOP853",
                    rtol=1e-12, atol=1e-14, events=reach)
    return float(sol.t_events[0][0])


def scaled_modulus(beta: float, depletion: Array, m: int, geometry: str) -> Array:
    """Lambda for centre values K C_c = beta e^-depletion (one shooting solve each)."""
    a = SHAPES[geometry]
    lb = float(np.log(beta))
    return np.array([_shoot(lb - d, lb, m, a) for d in np.asarray(depletion, dtype=float)])


def multiplicity_onset(geometry: str, *, lo: float = 4.0, hi: float = 20.0, steps: int = 7,
                       depletion: Array | None = None) -> tuple[float, float]:
    """Bracket of the beta at which the m = 2 pellet first has several steady states.

    A unique solution for every modulus means the scaled modulus Lambda is increasing in the
    centre depletion ln(beta/(K C_c)); the bracket is narrowed by bisection on beta, testing
    monotonicity on ``depletion`` (default 240 values log-spaced over [0.3, 30], where the
    fold appears). Returns (largest beta found unique, smallest found multiple).
    """
    d = np.logspace(np.log10(0.3), np.log10(30.0), 240) if depletion is None else depletion
    for _ in range(steps):
        mid = 0.5 * (lo + hi)
        if np.all(np.diff(scaled_modulus(mid, d, 2, geometry)) > 0):
            lo = mid
        else:
            hi = mid
    return lo, hi


if __name__ == "__main__":                                    # rebuild the shipped file
    print(save_lh_tables())
