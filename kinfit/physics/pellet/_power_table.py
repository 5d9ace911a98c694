"""Interpolation tables of the n-th order effectiveness factor and their fast evaluation
(private implementation behind :func:`kinfit.physics.pellet.effectiveness.eta_power_law`).

The node values come from the phase-plane integrations of
:mod:`kinfit.physics.pellet._phase`. They are stored on three grids of smooth coordinates and
interpolated by tensor cubic splines (C2, kept as bicubic patches):

* ``high``: :math:`\\ln\\eta` over :math:`(n, \\log_{10}\\Phi)` for :math:`0.45 \\le n \\le 3`;
* ``centre``: for :math:`0 \\le n \\le 0.6` below :math:`\\Phi_c`, :math:`\\ln(\\Phi/\\Phi_c)`
  and :math:`\\ln\\eta` over :math:`(n, \\omega)` with :math:`\\omega = \\ln(1/w - 1)`,
  :math:`w = u_{centre}^{(1-n)/2}`. In this coordinate both are smooth in :math:`n` down to
  zero order (in :math:`\\Phi` itself they are not: the approach to :math:`\\Phi_c` changes
  character as :math:`n \\to 0`), so :math:`\\omega` is found by inverting the first table;
* ``dead``: for :math:`0 \\le n \\le 0.6` above :math:`\\Phi_c`, :math:`\\ln(\\eta\\Phi)` over
  :math:`(n, \\mu)` with :math:`\\mu = \\ln(q/q_c - 1)`.

The two order ranges are blended over :math:`0.45 \\le n \\le 0.6` with a C2 weight in n.
Below :math:`\\Phi = 10^{-4}` the small-modulus series is used, above :math:`10^{6}` the
:math:`1/\\Phi` correction is carried on from the table edge. Measured against a direct
integration: at most 5e-6 relative over 1e-3 <= Phi <= 1e3 and 0 <= n <= 3.
"""

from __future__ import annotations

import functools
import warnings
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.interpolate import make_interp_spline

from kinfit.physics.pellet._phase import (
    GRIDS,
    SHAPE_INDEX,
    critical_modulus,
    grid_values,
    nodes,
    small_modulus_coefficient,
)

__all__ = [
    "ORDER_RANGE",
    "TABLE_FILE",
    "TABLE_RESOURCE",
    "PowerLawTable",
    "OrderSet",
    "power_law_table",
    "build_power_law_table",
    "save_power_law_tables",
    "log_eta",
]

Array = NDArray[Any]          # float, index and mask arrays alike

#: Orders the table covers.
ORDER_RANGE = (0.0, 3.0)
#: Where a pre-built table is looked for (written by :func:`save_power_law_tables`).
#: the shipped table, read through importlib.resources (works from a wheel or a zip too)
TABLE_RESOURCE = resources.files("kinfit").joinpath("data", "power_law_eta.npz")
#: where the build script writes it
TABLE_FILE = Path(str(TABLE_RESOURCE))

_FORMAT = 1
_LN10 = np.log(10.0)
PHI_SMALL = 1e-4   # below: small-modulus series (error ~ Phi^4)
PHI_BIG = 1e6      # above: 1/Phi correction carried from the table edge (error ~ Phi^-3)
_BLEND = (0.45, 0.6)
_FIELDS = ("high", "centre_phi", "centre_eta", "dead")


# ---------------------------------------------------------------------------------------------
# bicubic patches


@dataclass(frozen=True)
class _Patch:
    """Tensor cubic spline on a uniform (n, t) grid stored as bicubic patches.

    ``coef[j, i]`` (4 x 4) gives f = sum_kl coef[j, i, k, l] u^k v^l in the cell
    [n_j, n_j+1] x [t_i, t_i+1] with u, v the local coordinates in [0, 1].
    """

    n0: float
    hn: float
    t0: float
    ht: float
    coef: Array          # (Nn-1, Nt-1, 4, 4)
    by_order: Array      # (Nn-1, 4, Nt-1, 4): coef with the u-power axis second

    @property
    def n_cells(self) -> tuple[int, int]:
        return self.coef.shape[0], self.coef.shape[1]


_HERMITE = np.array([[1.0, 0.0, 0.0, 0.0],
                     [0.0, 0.0, 1.0, 0.0],
                     [-3.0, 3.0, -2.0, -1.0],
                     [2.0, -2.0, 1.0, 1.0]])


def _make_patch(n_nodes: Array, t_nodes: Array, F: Array) -> _Patch:
    """Not-a-knot cubic spline in both directions through F[j, i] = f(n_j, t_i)."""
    hn, ht = n_nodes[1] - n_nodes[0], t_nodes[1] - t_nodes[0]
    Ft = make_interp_spline(t_nodes, F, k=3, axis=1).derivative()(t_nodes)
    Fn = make_interp_spline(n_nodes, F, k=3, axis=0).derivative()(n_nodes)
    Fnt = make_interp_spline(n_nodes, Ft, k=3, axis=0).derivative()(n_nodes)
    Fu, Fv, Fuv = Fn * hn, Ft * ht, Fnt * hn * ht
    G = np.empty((n_nodes.size - 1, t_nodes.size - 1, 4, 4))
    for r, (dj, src_u) in enumerate(((0, 0), (1, 0), (0, 1), (1, 1))):
        for c, (di, src_v) in enumerate(((0, 0), (1, 0), (0, 1), (1, 1))):
            src = {(0, 0): F, (1, 0): Fu, (0, 1): Fv, (1, 1): Fuv}[(src_u, src_v)]
            G[:, :, r, c] = src[dj: dj + n_nodes.size - 1, di: di + t_nodes.size - 1]
    coef = np.einsum("kr,jirc,lc->jikl", _HERMITE, G, _HERMITE)
    return _Patch(float(n_nodes[0]), float(hn), float(t_nodes[0]), float(ht),
                  np.ascontiguousarray(coef), np.ascontiguousarray(coef.transpose(0, 2, 1, 3)))


# ---------------------------------------------------------------------------------------------
# the table of one geometry


@dataclass(frozen=True)
class PowerLawTable:
    """Interpolation tables of eta(Phi, n) for one geometry (see the module notes).

    Attributes
    ----------
    shape_index : int
        0 slab, 1 cylinder, 2 sphere.
    high, centre_phi, centre_eta, dead : _Patch
        Bicubic patches of ln eta over (n, log10 Phi) for n in [0.6, 3]; of ln(Phi/Phi_c) and
        ln eta over (n, omega) and of ln(eta Phi) over (n, mu) for n in [0, 0.8].
    """

    shape_index: int
    high: _Patch
    centre_phi: _Patch
    centre_eta: _Patch
    dead: _Patch


def _assemble(a: int, values: dict[str, Array]) -> PowerLawTable:
    x, n_high, n_low = nodes(GRIDS["x"]), nodes(GRIDS["n_high"]), nodes(GRIDS["n_low"])
    omega, mu = nodes(GRIDS["omega"]), nodes(GRIDS["mu"])
    return PowerLawTable(
        shape_index=a,
        high=_make_patch(n_high, x, values["high"]),
        centre_phi=_make_patch(n_low, omega, values["centre_phi"]),
        centre_eta=_make_patch(n_low, omega, values["centre_eta"]),
        dead=_make_patch(n_low, mu, values["dead"]),
    )


def _grid_key() -> Array:
    return np.array([_FORMAT, *(v for spec in GRIDS.values() for v in spec)], dtype=float)


def build_power_law_table(geometry: str) -> PowerLawTable:
    """Build the table of one geometry from the phase-plane integrations (about a second).

    Parameters
    ----------
    geometry : {'slab', 'cylinder', 'sphere'}

    Returns
    -------
    PowerLawTable
    """
    a = SHAPE_INDEX[geometry]
    return _assemble(a, grid_values(a))


def save_power_law_tables(path: str | Path = TABLE_FILE) -> Path:
    """Build the tables of all three geometries and write them to a ``.npz`` file.

    :func:`power_law_table` loads this file when its grid key matches the code and builds the
    table in memory otherwise, so the file only saves start-up time.

    Parameters
    ----------
    path : str or Path
        Target file; default ``kinfit/data/power_law_eta.npz``.

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    arrays: dict[str, Any] = {"key": _grid_key()}
    for name, a in SHAPE_INDEX.items():
        for field, val in grid_values(a).items():
            arrays[f"{name}/{field}"] = val
    np.savez_compressed(path, **arrays)
    return path


@functools.cache
def power_law_table(geometry: str) -> PowerLawTable:
    """The cached table of one geometry: loaded from :data:`TABLE_FILE` when it matches the
    code's grid key, built in memory otherwise."""
    a = SHAPE_INDEX[geometry]
    if TABLE_RESOURCE.is_file():
        try:
            with TABLE_RESOURCE.open("rb") as fh, np.load(fh) as data:
                key = data["key"]
                if key.shape == _grid_key().shape and np.array_equal(key, _grid_key()):
                    values = {f: np.array(data[f"{geometry}/{f}"]) for f in _FIELDS}
                    return _assemble(a, values)
            warnings.warn(f"the shipped table {TABLE_RESOURCE.name} was built for another grid; "
                          "building it in memory (rebuild the file with the module's "
                          "save function)", RuntimeWarning, stacklevel=2)
        except (OSError, KeyError, ValueError) as exc:
            warnings.warn(f"the shipped table {TABLE_RESOURCE.name} cannot be read ({exc}); "
                          "building it in memory", RuntimeWarning, stacklevel=2)
    return build_power_law_table(geometry)


# ---------------------------------------------------------------------------------------------
# evaluation


class _Curves:
    """For each point, the 1-D piecewise cubic in t obtained by fixing the order in a patch.

    ``contracted``: the orders take few distinct values; ``tab[k, i]`` holds the cubic of cell i
    for order k and ``kidx`` maps points to orders. ``pointwise``: every point has its own order
    and the 4 x 4 patch is contracted with the point's powers of u when a cell is asked for.
    """

    patch: _Patch
    tab: Any            # (K * n_cells, 4) or None
    kidx: Any           # (N,) order index of each point, or None
    j: Any              # (N,) order cell of each point (pointwise), or None
    upow: Any           # (N, 4) powers of the local order coordinate (pointwise), or None

    def __init__(self, patch: _Patch, orders: Array, kidx: Array | None) -> None:
        self.patch = patch
        nn = patch.n_cells[0]
        s = (orders - patch.n0) / patch.hn
        j = np.clip(np.floor(s), 0, nn - 1).astype(np.intp)
        u = s - j
        upow = np.stack([np.ones_like(u), u, u * u, u * u * u], axis=-1)
        if kidx is not None:
            # tab[k, i, l] = sum_m coef[j_k, i, m, l] u_k^m, by Horner over m
            b = patch.by_order
            uu = u[:, None, None]
            tab = ((b[j, 3] * uu + b[j, 2]) * uu + b[j, 1]) * uu + b[j, 0]
            self.tab = tab.reshape(-1, 4)                    # row k * n_cells + i
            self.kidx = kidx
            self.j = self.upow = None
        else:
            self.tab = self.kidx = None
            self.j, self.upow = j, upow

    @classmethod
    def _raw(cls, patch, tab, kidx, j, upow) -> _Curves:
        obj = cls.__new__(cls)
        obj.patch, obj.tab, obj.kidx, obj.j, obj.upow = patch, tab, kidx, j, upow
        return obj

    def take(self, mask: Array) -> _Curves:
        if self.tab is not None:
            return _Curves._raw(self.patch, self.tab, self.kidx[mask], None, None)
        return _Curves._raw(self.patch, None, None, self.j[mask], self.upow[mask])

    def _rows(self, cell: Array) -> Array:
        nc = self.patch.n_cells[1]
        if self.tab.shape[0] == nc:                          # a single order
            return cell
        return self.kidx * nc + cell

    def coeffs(self, cell: Array) -> Array:
        """Cubic coefficients (N, 4) in the local coordinate v of each point's cell."""
        if self.tab is not None:
            return np.take(self.tab, self._rows(cell), axis=0)
        block = self.patch.coef[self.j, cell]                    # (N, 4, 4)
        return np.einsum("nml,nm->nl", block, self.upow)

    def value0(self, cell: Array) -> Array:
        """Value at the left edge of each point's cell."""
        if self.tab is not None:
            return np.take(self.tab[:, 0], self._rows(cell))
        return np.einsum("nm,nm->n", self.patch.coef[self.j, cell, :, 0], self.upow)

    def locate(self, t: Array) -> tuple[Array, Array]:
        nc = self.patch.n_cells[1]
        s = (t - self.patch.t0) / self.patch.ht
        cell = np.clip(np.floor(s), 0, nc - 1).astype(np.intp)
        return cell, s - cell

    def __call__(self, t: Array) -> tuple[Array, Array]:
        """Value and derivative d/dt at coordinates ``t`` (one per point)."""
        cell, v = self.locate(t)
        c = self.coeffs(cell)
        f = c[:, 0] + v * (c[:, 1] + v * (c[:, 2] + v * c[:, 3]))
        df = (c[:, 1] + v * (2.0 * c[:, 2] + 3.0 * v * c[:, 3])) / self.patch.ht
        return f, df

    def invert(self, target: Array) -> Array:
        """Coordinate t with f(t) = target for curves increasing in t (clamped to the grid)."""
        nc = self.patch.n_cells[1]
        if self.tab is not None:
            # few orders: one increasing key array with each order's node values shifted apart;
            # np.interp gives the cell and a linear first guess inside it
            nodes = np.concatenate([self.tab[:, 0].reshape(-1, nc),
                                    self.tab.sum(axis=1).reshape(-1, nc)[:, -1:]], axis=1)
            nodes = np.maximum.accumulate(nodes, axis=1)
            lo_v, hi_v = nodes.min(), nodes.max()
            gap = (hi_v - lo_v) + 1.0
            count = nodes.shape[0]
            keys = (nodes - lo_v + gap * np.arange(count)[:, None]).ravel()
            k = self.kidx if count > 1 else 0
            pos = np.interp(target - lo_v + gap * k, keys, np.arange(keys.size, dtype=float))
            pos = np.clip(pos - k * (nc + 1), 0.0, float(nc))
            lo = np.minimum(pos.astype(np.intp), nc - 1)
            v_guess = pos - lo
        else:
            lo = np.zeros(target.shape, dtype=np.intp)       # f(t_lo) <= target (or lo = 0)
            hi = np.full(target.shape, nc, dtype=np.intp)
            while np.any(hi - lo > 1):
                mid = (lo + hi) // 2
                below = self.value0(np.minimum(mid, nc - 1)) <= target
                lo = np.where(below, mid, lo)
                hi = np.where(below, hi, mid)
            v_guess = None
        c = self.coeffs(lo)
        c0, c1, c2, c3 = c[:, 0] - target, c[:, 1], c[:, 2], c[:, 3]
        f1 = c0 + c1 + c2 + c3
        with np.errstate(divide="ignore", invalid="ignore"):
            if v_guess is None:
                v = np.clip(np.where(f1 > c0, -c0 / (f1 - c0), 0.0), 0.0, 1.0)
            else:
                v = v_guess
            for _ in range(4):                               # the cubic is nearly linear
                f = c0 + v * (c1 + v * (c2 + v * c3))
                df = c1 + v * (2.0 * c2 + 3.0 * v * c3)
                v = np.clip(np.where(df > 0, v - f / df, v), 0.0, 1.0)
        return self.patch.t0 + (lo + v) * self.patch.ht


def _blend_weight(n: Array) -> Array:
    """C2 weight of the high-order table over the blend interval (0 below, 1 above)."""
    s = np.clip((n - _BLEND[0]) / (_BLEND[1] - _BLEND[0]), 0.0, 1.0)
    return s * s * s * (10.0 + s * (-15.0 + 6.0 * s))


class OrderSet:
    """The orders of a request: distinct values plus an index per point, or one per point."""

    values: Any         # distinct orders, or None (one order per point)
    kidx: Any           # index into ``values`` per point, or None

    def __init__(self, n_flat: Array, values: Array | None, kidx: Array | None,
                 cache: dict[Any, Any] | None = None) -> None:
        self.n = n_flat
        self.values, self.kidx = values, kidx
        self.cache = cache

    def curves(self, patch: _Patch, mask: Array) -> _Curves:
        if self.values is not None:
            # contract only the distinct orders this patch serves; the others are never indexed
            top = patch.n0 + patch.hn * patch.n_cells[0]
            used = (self.values >= patch.n0 - 1e-9) & (self.values <= top + 1e-9)
            values = self.values if used.all() else self.values[used]
            kidx = self.kidx[mask] if used.all() else (np.cumsum(used) - 1)[self.kidx[mask]]
            if self.cache is None:
                return _Curves(patch, values, kidx)
            # the contraction depends on the orders alone: the caller's cache keeps it over
            # the Newton iterations of one prediction (same orders, other moduli)
            key = (id(patch), values.tobytes())
            tab = self.cache.get(key)
            if tab is None:
                tab = self.cache[key] = _Curves(patch, values, kidx).tab
            return _Curves._raw(patch, tab, kidx, None, None)
        return _Curves(patch, self.n[mask], None)


def _log_eta_mid(table: PowerLawTable, phi: Array, orders: OrderSet, mask: Array | None
                 ) -> tuple[Array, Array]:
    """ln eta and d ln eta/d ln Phi for PHI_SMALL <= Phi <= PHI_BIG at the points ``mask``
    (all points when ``mask`` is None)."""
    if mask is None:
        mask = np.ones(phi.shape, dtype=bool)
        n, ph = orders.n, phi
    else:
        n, ph = orders.n[mask], phi[mask]
    hi = n >= _BLEND[0]
    lo = n <= _BLEND[1]
    if hi.all() and not lo.any():
        val, dval = orders.curves(table.high, mask)(np.log10(ph))
        return val, dval / _LN10
    f = np.zeros(ph.shape)
    df = np.zeros(ph.shape)
    both = hi & lo
    w = _blend_weight(n[both])
    idx = np.flatnonzero(mask)
    if hi.any():
        sel = np.zeros(mask.shape, dtype=bool)
        sel[idx[hi]] = True
        val, dval = orders.curves(table.high, sel)(np.log10(ph[hi]))
        wh = np.ones(val.shape)
        wh[both[hi]] = w
        f[hi] += wh * val
        df[hi] += wh * dval / _LN10
    if lo.any():
        sel = np.zeros(mask.shape, dtype=bool)
        sel[idx[lo]] = True
        val, dval = _log_eta_low(table, ph[lo], n[lo], orders, sel)
        wl = np.ones(val.shape)
        wl[both[lo]] = 1.0 - w
        f[lo] += wl * val
        df[lo] += wl * dval
    return f, df


def _log_eta_low(table: PowerLawTable, ph: Array, n: Array, orders: OrderSet, sel: Array
                 ) -> tuple[Array, Array]:
    """Orders <= 0.8: centre branch (inverted omega table) or dead-core branch."""
    a = table.shape_index
    ratio = ph / critical_modulus(n, a)
    f = np.empty(ph.shape)
    df = np.empty(ph.shape)
    below = ratio < 1.0
    idx = np.flatnonzero(sel)
    if below.any():
        m = np.zeros(sel.shape, dtype=bool)
        m[idx[below]] = True
        cp = orders.curves(table.centre_phi, m)
        ce = orders.curves(table.centre_eta, m)
        om = cp.invert(np.log(ratio[below]))
        e, de = ce(om)
        _, dp = cp(om)
        f[below] = e
        with np.errstate(divide="ignore", invalid="ignore"):
            df[below] = np.where(dp > 0, de / dp, 0.0)
    above = ~below
    if above.any():
        m = np.zeros(sel.shape, dtype=bool)
        m[idx[above]] = True
        cd = orders.curves(table.dead, m)
        r = ratio[above]
        with np.errstate(divide="ignore"):
            mu = np.log((r - 1.0) * (r + 1.0))
        mu_min = table.dead.t0
        clamped = mu < mu_min
        e, de = cd(np.maximum(mu, mu_min))
        dmu = 2.0 * r * r / np.where(clamped, np.exp(mu_min), (r - 1.0) * (r + 1.0))
        f[above] = e - np.log(ph[above])
        df[above] = de * dmu - 1.0
    return f, df


def log_eta(table: PowerLawTable, phi: Array, orders: OrderSet) -> tuple[Array, Array]:
    """ln eta and d ln eta / d ln Phi for flat arrays of finite positive ``phi``."""
    a = table.shape_index
    small = phi < PHI_SMALL
    big = phi > PHI_BIG
    if not small.any() and not big.any():
        return _log_eta_mid(table, phi, orders, None)
    n = orders.n
    f = np.empty(phi.shape)
    df = np.empty(phi.shape)
    mid = ~(small | big)
    if small.any():
        c = small_modulus_coefficient(n[small], a)
        e2 = c * phi[small] ** 2
        f[small] = np.log1p(-e2)
        df[small] = -2.0 * e2 / (1.0 - e2)
    if mid.any():
        f[mid], df[mid] = _log_eta_mid(table, phi, orders, mid)
    if big.any():
        edge = np.full(phi.shape, PHI_BIG)
        fb, _ = _log_eta_mid(table, edge, orders, big)
        deficit_b = -np.expm1(fb + np.log(PHI_BIG))          # 1 - y at the edge
        deficit = deficit_b * PHI_BIG / phi[big]
        f[big] = np.log1p(-deficit) - np.log(phi[big])
        df[big] = deficit / (1.0 - deficit) - 1.0
    return f, df
