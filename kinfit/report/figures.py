"""The report's figures, drawn with matplotlib's object API on the Agg canvas (no pyplot, no
global state), in kinfit's own style: one palette, regime colours shared by every figure, a unit
on every axis.

Each ``*_figure`` function takes plain data (arrays, frames, dicts read from the results files)
and returns a :class:`matplotlib.figure.Figure`; :func:`render` turns one into PNG bytes and SVG
text. Drawing happens inside :data:`STYLE`, and SVG output is deterministic (fixed hash salt, no
date), so the same results give the same files.
"""

from __future__ import annotations

import functools
import io
import math
import re
from collections.abc import Callable, Mapping, Sequence
from typing import Any, TypeVar, cast

import matplotlib
import numpy as np
import pandas as pd
from cycler import cycler
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import LogFormatterSciNotation
from numpy.typing import NDArray

from kinfit.physics.kinetics.arrhenius import GAS_CONSTANT
from kinfit.physics.pellet.effectiveness import eta_power_law

__all__ = ['PALETTE', 'REGIME_COLOURS', 'STYLE', 'render', 'pretty_unit', 'axis_label', 'display_scale', 'eta_curve', 'profiles_figure', 'rates_figure', 'parity_figure', 'residuals_figure', 'arrhenius_figure']

Array = NDArray[np.float64]
F = TypeVar("F", bound=Callable[..., Any])

#: kinfit's palette: ink blue, brick, moss, plum, ochre, teal, umber, rose
PALETTE = ("#1f5a84", "#b94a35", "#4f7f35", "#7b4f9a", "#c9901f", "#2a8a84", "#7a6552",
           "#b2456d")
INK = "#1e2a35"
MUTED = "#5d6b78"
GRID = "#dde3e8"
BAND = "#9cc3dc"
CURVE = "#1f5a84"
#: one colour per regime label, the same in every figure and table
REGIME_COLOURS = {"kinetic": "#4f7f35", "film": "#b94a35", "pore": "#7b4f9a",
                  "mixed": "#c9901f"}
_REGIME_MARKERS = {"kinetic": "o", "film": "s", "pore": "D", "mixed": "^"}

STYLE: dict[str, Any] = {
    "font.family": "DejaVu Sans",
    "font.size": 8.5,
    "axes.titlesize": 9,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.titlecolor": INK,
    "axes.labelsize": 8.5,
    "axes.labelcolor": INK,
    "axes.edgecolor": MUTED,
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.axisbelow": True,
    "axes.prop_cycle": cycler(color=list(PALETTE)),
    "grid.color": GRID,
    "grid.linewidth": 0.6,
    "xtick.color": MUTED,
    "ytick.color": MUTED,
    "xtick.labelcolor": INK,
    "ytick.labelcolor": INK,
    "xtick.labelsize": 7.5,
    "ytick.labelsize": 7.5,
    "legend.frameon": False,
    "legend.fontsize": 7.5,
    "lines.linewidth": 1.6,
    "lines.markersize": 4.5,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "mathtext.fontset": "dejavusans",
    "svg.fonttype": "path",
    "svg.hashsalt": "kinfit-report",
    "path.simplify": True,
}
PNG_DPI = 170
#: Most points drawn per trace line: about a trace panel's width in pixels at PNG_DPI.
TRACE_POINTS = 600
#: Most walkers drawn in a trace panel: more lines only fill the band with ink.
TRACE_WALKERS = 8


def _styled(func: F) -> F:
    """Run a figure builder inside :data:`STYLE`."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        with matplotlib.rc_context(cast(Any, STYLE)):
            return func(*args, **kwargs)

    return wrapper  # type: ignore[return-value]


def _new_figure(width: float, height: float) -> Figure:
    fig = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def render(fig: Figure) -> tuple[bytes, str]:
    """PNG bytes and SVG text of a figure (deterministic: no dates, fixed SVG ids).

    The layout is computed once, in the Agg draw at :data:`PNG_DPI`, and kept for the SVG; the
    Agg canvas's pixels go straight to the palette PNG (no intermediate RGBA PNG to encode and
    decode again)."""
    with matplotlib.rc_context(cast(Any, STYLE)):
        dpi = fig.dpi
        fig.set_dpi(PNG_DPI)
        try:
            canvas = cast(FigureCanvasAgg, fig.canvas)
            canvas.draw()
            png = _palette_png(np.asarray(canvas.buffer_rgba()))
        finally:
            fig.set_dpi(dpi)
        fig.set_layout_engine("none")
        svg = io.BytesIO()
        fig.savefig(svg, format="svg", metadata={"Date": None, "Creator": None})
    return png, svg.getvalue().decode("utf-8")


def _palette_png(rgba: NDArray[np.uint8]) -> bytes:
    """The PNG of an RGBA pixel array with a 256-colour palette (Pillow's fast octree,
    Pillow being matplotlib's own dependency): a figure's few colours and their anti-aliasing
    fit in it, at a third to a half the size of RGBA (the report embeds every PNG)."""
    from PIL import Image

    im = Image.fromarray(rgba, "RGBA").convert("RGB")
    pal = im.quantize(colors=256, method=Image.Quantize.FASTOCTREE)
    out = io.BytesIO()
    pal.save(out, format="png", compress_level=6)
    return out.getvalue()


# ---------------------------------------------------------------------------------- units
_SUPERSCRIPT = str.maketrans("0123456789-+", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺")


class _PlainLogFormatter(LogFormatterSciNotation):
    """matplotlib's scientific log-axis tick labels ("10⁻²", "2×10⁻¹") written as plain text
    with Unicode superscripts instead of mathtext: the same labels, without a mathtext parse
    and layout for every tick in every output format."""

    def __call__(self, x: float, pos: int | None = None) -> str:
        label = super().__call__(x, pos)
        head, tail = "$\\mathdefault{", "}$"
        if not (label.startswith(head) and label.endswith(tail)):
            return label
        body = label[len(head):-len(tail)].replace("\\times", "×")
        body = re.sub(r"\^\{(-?\d+)\}", lambda m: m.group(1).translate(_SUPERSCRIPT), body)
        if any(c in body for c in "\\{}^$"):
            return label  # a form not foreseen here: leave it to mathtext
        return body.replace("-", "\u2212")


def _log_scale(ax: Any, which: str) -> None:
    """A base-10 log scale on axis ``which`` ("x" or "y") with plain-text tick labels (the
    formatters matplotlib's log scale sets by default, minus mathtext)."""
    (ax.set_xscale if which == "x" else ax.set_yscale)("log")
    axis = ax.xaxis if which == "x" else ax.yaxis
    axis.set_major_formatter(_PlainLogFormatter(10))
    axis.set_minor_formatter(_PlainLogFormatter(10, labelOnlyBase=False))


def pretty_unit(unit: str | None) -> str:
    """An SI unit string for reading: ``mol/(kg*s)`` -> ``mol/(kg·s)``, ``m^2/s`` -> ``m²/s``,
    ``1`` or ``-`` -> ``–`` (dimensionless)."""
    u = (unit or "").strip()
    if u in ("", "1", "-", "dimensionless"):
        return "–"
    u = u.replace("**", "^").replace("*", "·")
    return re.sub(r"\^(-?\d+)", lambda m: m.group(1).translate(_SUPERSCRIPT), u)


def axis_label(quantity: str, unit: str | None) -> str:
    """``quantity [unit]`` with the unit made readable."""
    return f"{quantity} [{pretty_unit(unit)}]"


def display_scale(values: Array, unit: str | None) -> tuple[float, str]:
    """A power of ten (a multiple of 3) that brings ``values`` near 1, and the unit written
    with it: 5e-6 m/s -> (1e6, "10⁻⁶ m/s"), so that axes show 5.0 instead of an offset text."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    mag = float(np.median(np.abs(v))) if v.size else 0.0
    if mag == 0.0 or 1e-2 <= mag < 1e4:
        return 1.0, pretty_unit(unit)
    e = 3 * math.floor(math.log10(mag) / 3)
    base = pretty_unit(unit)
    prefix = "10" + str(e).translate(_SUPERSCRIPT)
    return 10.0**-e, prefix if base == "–" else f"{prefix} {base}"


# ---------------------------------------------------------------------------------- pellet
def eta_curve(phi: Array, order: float, geometry: str) -> tuple[Array, str]:
    """eta(Phi) for a power law of ``order`` in ``geometry``, and where it came from.

    Uses :func:`kinfit.physics.pellet.effectiveness.eta_power_law`, the fitted model's own
    pellet solution.
    """
    phi = np.asarray(phi, dtype=float)
    eta = np.asarray(eta_power_law(phi, np.full(phi.shape, float(order)), geometry), dtype=float)
    return eta, f"kinfit's pellet solution, order {order:.3g}, {geometry}"


# ---------------------------------------------------------------------------------- helpers
def _regime_of(regimes: Mapping[str, str], run: str) -> str:
    r = regimes.get(run, "mixed")
    return r if r in REGIME_COLOURS else "mixed"


def _regime_legend(ax: Any, present: Sequence[str], **kw: Any) -> None:
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], ls="none", marker=_REGIME_MARKERS[r], color=REGIME_COLOURS[r],
                      label=r) for r in REGIME_COLOURS if r in present]
    if handles:
        ax.legend(handles=handles, title="regime", title_fontsize=7.5, **kw)


def _grid_shape(n: int, max_cols: int = 4) -> tuple[int, int]:
    cols = min(max_cols, n) if n > 4 else min(n, 3)
    cols = max(cols, 1)
    return math.ceil(n / cols), cols


# ---------------------------------------------------------------------------------- data
@_styled
def profiles_figure(observed: pd.DataFrame, curves: Mapping[str, tuple[Array, Array]],
                    *, titles: Mapping[str, str], regimes: Mapping[str, str],
                    bands: pd.DataFrame | None = None, curve_label: str = "fit") -> Figure:
    """Small multiples, one panel per run: data, the fitted profile and the 90 % band.

    Parameters
    ----------
    observed : DataFrame
        Columns ``run``, ``time [s]``, ``observed`` (mol/m^3).
    curves : mapping
        run -> (times in s, concentrations in mol/m^3) of the smooth fitted curve.
    titles, regimes : mapping
        run -> panel title; run -> regime label.
    bands : DataFrame, optional
        Columns ``run``, ``time [s]``, ``q05``, ``q50``, ``q95`` (mol/m^3).
    """
    runs = list(dict.fromkeys(observed["run"].astype(str)))
    nrows, ncols = _grid_shape(len(runs))
    fig = _new_figure(7.4, 1.2 + 1.9 * nrows)
    axes = np.atleast_1d(fig.subplots(nrows, ncols, sharey=True, squeeze=False)).ravel()
    ymax = float(np.nanmax(observed["observed"])) * 1.08
    for k, (ax, rid) in enumerate(zip(axes, runs, strict=False)):
        sel = observed["run"].astype(str) == rid
        t_min = observed.loc[sel, "time [s]"].to_numpy(float) / 60.0
        y = observed.loc[sel, "observed"].to_numpy(float)
        if bands is not None:
            b = bands[bands["run"].astype(str) == rid].sort_values("time [s]")
            if len(b):
                ax.fill_between(b["time [s]"].to_numpy(float) / 60.0, b["q05"], b["q95"],
                                color=BAND, alpha=0.55, lw=0, label="90 % band")
        if rid in curves:
            tc, cc = curves[rid]
            ax.plot(np.asarray(tc) / 60.0, cc, color=CURVE, lw=1.5, label=curve_label)
        ax.plot(t_min, y, ls="none", marker="o", ms=3.4, mfc="white", mec=INK, mew=0.9,
                label="data")
        reg = _regime_of(regimes, rid)
        ax.set_title(titles.get(rid, rid), fontsize=7.2, linespacing=1.25)
        ax.text(0.97, 0.93, reg, transform=ax.transAxes, ha="right", va="top", fontsize=7,
                color="white", bbox={"boxstyle": "round,pad=0.25", "fc": REGIME_COLOURS[reg],
                                     "ec": "none"})
        ax.set_ylim(0.0, ymax)
        ax.set_xlim(left=0.0)
        # time spans differ from run to run: every panel keeps its time axis and its unit;
        # the shared concentration axis is labelled on the first column
        ax.set_xlabel(axis_label("time", "min"), fontsize=7.5, labelpad=1.5)
        if k % ncols == 0:
            ax.set_ylabel(axis_label("C_b", "mol/m^3"))
        else:
            ax.tick_params(labelleft=False)
    for ax in axes[len(runs):]:
        ax.set_visible(False)
    handles, labels = axes[0].get_legend_handles_labels()
    if handles:
        fig.legend(handles, labels, loc="outside upper right", ncols=len(handles))
    return fig


@_styled
def rates_figure(frame: pd.DataFrame, *, regimes: Mapping[str, str], unit: str) -> Figure:
    """Rate campaign: observed rates (points) and fitted rates (bars) per run.

    ``frame`` has columns ``run``, ``observed``, ``fitted``.
    """
    runs = list(dict.fromkeys(frame["run"].astype(str)))
    fig = _new_figure(7.2, 3.0)
    ax = fig.add_subplot()
    x = np.arange(len(runs))
    fitted = frame.groupby(frame["run"].astype(str), sort=False)["fitted"].mean()
    ax.bar(x, [fitted[r] for r in runs], color=[REGIME_COLOURS[_regime_of(regimes, r)]
                                               for r in runs], alpha=0.35, width=0.7,
           label="fitted (colour: regime)")
    pos = {r: i for i, r in enumerate(runs)}
    ax.plot([pos[str(r)] for r in frame["run"]], frame["observed"], ls="none", marker="o",
            mfc="white", mec=INK, label="observed")
    ax.set_xticks(x, runs, rotation=60 if len(runs) > 12 else 0)
    ax.set_xlabel(axis_label("run", "-"))
    ax.set_ylabel(axis_label("rate r_obs", unit))
    ax.legend(loc="upper right")
    return fig


@_styled
def parity_figure(frame: pd.DataFrame, *, regimes: Mapping[str, str], quantity: str,
                  unit: str) -> Figure:
    """Observed against fitted values with the 1:1 line, coloured by the run's regime.

    ``frame`` has columns ``run``, ``observed``, ``fitted``.
    """
    fig = _new_figure(3.9, 3.6)
    ax = fig.add_subplot()
    lo = float(min(frame["observed"].min(), frame["fitted"].min()))
    hi = float(max(frame["observed"].max(), frame["fitted"].max()))
    pad = 0.04 * (hi - lo or 1.0)
    ax.plot([lo - pad, hi + pad], [lo - pad, hi + pad], color=MUTED, lw=0.9, ls="--",
            label="1:1")
    present = []
    for reg in REGIME_COLOURS:
        sel = frame["run"].astype(str).map(lambda r: _regime_of(regimes, r)) == reg
        if sel.any():
            present.append(reg)
            ax.plot(frame.loc[sel, "fitted"], frame.loc[sel, "observed"], ls="none",
                    marker=_REGIME_MARKERS[reg], ms=3.6, color=REGIME_COLOURS[reg], alpha=0.8)
    ax.set_xlim(lo - pad, hi + pad)
    ax.set_ylim(lo - pad, hi + pad)
    ax.set_aspect("equal")
    ax.set_xlabel(axis_label(f"fitted {quantity}", unit))
    ax.set_ylabel(axis_label(f"observed {quantity}", unit))
    _regime_legend(ax, present, loc="upper left")
    return fig


@_styled
def residuals_figure(frame: pd.DataFrame, *, regimes: Mapping[str, str], unit: str,
                     sigma: float | None, time_axis: bool = True) -> Figure:
    """Residuals (observed - fitted) against time and against the fitted value, with the
    +/- 2 sigma band of the error model.

    ``frame`` has columns ``run``, ``time [s]``, ``fitted``, ``residual``.
    """
    fig = _new_figure(7.2, 2.9)
    axes = fig.subplots(1, 2 if time_axis else 1, sharey=True, squeeze=False)[0]
    xs = ([("time [s]", axis_label("time", "min"), 1 / 60.0)] if time_axis else []) + [
        ("fitted", axis_label("fitted value", unit), 1.0)]
    present = []
    for ax, (col, label, scale) in zip(axes, xs, strict=True):
        ax.axhline(0.0, color=MUTED, lw=0.9)
        if sigma is not None and np.isfinite(sigma):
            ax.axhspan(-2 * sigma, 2 * sigma, color=GRID, alpha=0.6, lw=0, label="±2σ")
        for reg in REGIME_COLOURS:
            sel = frame["run"].astype(str).map(lambda r: _regime_of(regimes, r)) == reg
            if sel.any():
                if reg not in present:
                    present.append(reg)
                ax.plot(frame.loc[sel, col] * scale, frame.loc[sel, "residual"], ls="none",
                        marker=_REGIME_MARKERS[reg], ms=3.2, color=REGIME_COLOURS[reg],
                        alpha=0.8)
        ax.set_xlabel(label)
    axes[0].set_ylabel(axis_label("residual", unit))
    # outside the axes, so the legend never covers a residual
    _regime_legend(axes[-1], present, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=7)
    return fig


# ---------------------------------------------------------------------------------- kinetics
@_styled
def arrhenius_figure(*, k_ref: float, activation_energy: float, reference_temperature: float,
                     temperatures: Sequence[float], k_unit: str,
                     covariance: Array | None = None,
                     per_run: Sequence[tuple[str, float, float, str]] = (),
                     apparent: Sequence[tuple[float, float]] = (),
                     apparent_label: str = "apparent (diagnosis)") -> Figure:
    """Arrhenius plot: the intrinsic k(T) with its 95 % band, each run's effective rate
    constant at its initial conditions, and apparent constants per temperature.

    Parameters
    ----------
    k_ref : float
        Rate constant at ``reference_temperature``, in ``k_unit``.
    activation_energy : float
        J/mol.
    reference_temperature : float
        K.
    temperatures : sequence of float
        Temperatures of the campaign, K (the line spans them with a margin).
    covariance : ndarray, shape (2, 2), optional
        Covariance of (k_ref, activation_energy) for the band (delta method on ln k).
    per_run : sequence of (run, T in K, k_eff, regime)
    apparent : sequence of (T in K, k_apparent)
    """
    T = np.asarray(temperatures, dtype=float)
    lo, hi = float(T.min()) - 8.0, float(T.max()) + 8.0
    Tg = np.linspace(lo, hi, 120)
    x = -(1.0 / Tg - 1.0 / reference_temperature) / GAS_CONSTANT
    k = k_ref * np.exp(activation_energy * x)
    fig = _new_figure(6.4, 3.6)
    ax = fig.add_subplot()
    if covariance is not None and np.all(np.isfinite(covariance)):
        c = np.asarray(covariance, dtype=float)
        var = c[0, 0] / k_ref**2 + x**2 * c[1, 1] + 2 * x * c[0, 1] / k_ref
        sd = np.sqrt(np.maximum(var, 0.0))
        ax.fill_between(1e3 / Tg, k * np.exp(-1.96 * sd), k * np.exp(1.96 * sd), color=BAND,
                        alpha=0.55, lw=0, label="intrinsic, 95 % band")
    ax.plot(1e3 / Tg, k, color=CURVE, label=f"intrinsic k(T), Ea = {activation_energy / 1e3:.1f}"
            " kJ/mol")
    present = []
    for reg in REGIME_COLOURS:
        pts = [(t, kk) for _, t, kk, r in per_run if r == reg and kk > 0]
        if pts:
            present.append(reg)
            a = np.array(pts)
            # the runs on top (zorder), white-edged so a cross beneath cannot hide them
            ax.plot(1e3 / a[:, 0], a[:, 1], ls="none", marker=_REGIME_MARKERS[reg], ms=5,
                    color=REGIME_COLOURS[reg], mec="white", mew=0.6, zorder=4,
                    label=f"run ({reg})")
    if apparent:
        a = np.array([p for p in apparent if p[1] > 0], dtype=float).reshape(-1, 2)
        if a.size:
            ax.plot(1e3 / a[:, 0], a[:, 1], ls="none", marker="+", ms=9, mew=1.3, color=INK,
                    zorder=3, label=apparent_label)
    _log_scale(ax, "y")
    shown = [float(k.min()), float(k.max())] + [p[2] for p in per_run if p[2] > 0] + [
        p[1] for p in apparent if p[1] > 0]
    ax.set_ylim(min(shown) / 4.0, max(shown) * 4.0)
    ax.set_xlabel(axis_label("1000 / T", "1/K"))
    ax.set_ylabel(axis_label("rate constant k", k_unit))
    top = ax.secondary_xaxis("top", functions=(lambda v: 1e3 / np.maximum(v, 1e-9) - 273.15,
                                               lambda v: 1e3 / (np.asarray(v) + 273.15)))
    top.set_xlabel(axis_label("temperature", "degC").replace("degC", "°C"))
    ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=7)  # off the data
    return fig


# ---------------------------------------------------------------------------------- statistics


