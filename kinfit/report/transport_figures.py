"""Figures of the transport state: the effectiveness factor against the modulus, and the regime map of the runs."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from matplotlib.figure import Figure
from numpy.typing import NDArray

from kinfit.report.figures import (
    _REGIME_MARKERS,
    CURVE,
    INK,
    MUTED,
    REGIME_COLOURS,
    _log_scale,
    _new_figure,
    _regime_legend,
    _styled,
    axis_label,
    eta_curve,
)

__all__ = ['effectiveness_figure', 'regime_map_figure']


@_styled
def effectiveness_figure(*, geometry: str, order: float,
                         runs: Sequence[tuple[str, float, float, str]],
                         intervals: Mapping[str, tuple[tuple[float, float],
                                                       tuple[float, float]]] | None = None,
                         note: str | None = None) -> Figure:
    """Effectiveness factor against the generalised Thiele modulus, with each run on it.

    Parameters
    ----------
    geometry : {"sphere", "cylinder", "slab"}
    order : float
        Reaction order of the curve.
    runs : sequence of (run, Phi, eta, regime)
        Runs without a finite positive modulus are left out (the note says why).
    intervals : mapping, optional
        run -> ((Phi q05, Phi q95), (eta q05, eta q95)) posterior 90 % intervals.
    """
    phi = np.logspace(-2, 2.5, 300)
    eta, source = eta_curve(phi, order, geometry)
    fig = _new_figure(4.6, 3.6)
    ax = fig.add_subplot()
    ax.plot(phi, eta, color=CURVE, label=source if len(source) < 48 else source[:46] + "…")
    ax.plot(phi[phi > 1], 1.0 / phi[phi > 1], color=MUTED, ls=":", lw=1.0,
            label="asymptote 1/Φ")
    present = []
    placed = 0
    for rid, ph, et, reg in runs:
        if not (np.isfinite(ph) and ph > 0 and np.isfinite(et)):
            continue
        reg = reg if reg in REGIME_COLOURS else "mixed"
        placed += 1
        if intervals and rid in intervals:
            (p0, p1), (e0, e1) = intervals[rid]
            ax.errorbar([ph], [et], xerr=[[max(ph - p0, 0)], [max(p1 - ph, 0)]],
                        yerr=[[max(et - e0, 0)], [max(e1 - et, 0)]], fmt="none",
                        ecolor=REGIME_COLOURS[reg], elinewidth=0.8, alpha=0.7)
        ax.plot([ph], [et], ls="none", marker=_REGIME_MARKERS[reg], color=REGIME_COLOURS[reg],
                ms=4.5, mec="white", mew=0.4)
        if reg not in present:
            present.append(reg)
    _log_scale(ax, "x")
    _log_scale(ax, "y")
    ax.set_ylim(min(0.01, float(eta.min())), 1.3)
    ax.set_xlim(phi[0], phi[-1])
    ax.set_xlabel(axis_label("generalised Thiele modulus Φ (L = Vp/Sp)", "-"))
    ax.set_ylabel(axis_label("effectiveness factor η", "-"))
    text = note
    if placed == 0 and text is None:
        text = "no run has a finite modulus to place"
    if text:
        ax.text(0.03, 0.05, text, transform=ax.transAxes, fontsize=7, color=MUTED,
                va="bottom", wrap=True)
    ax.legend(loc="upper right", fontsize=7)
    if present:
        from matplotlib.lines import Line2D

        first = ax.get_legend()
        if first is not None:
            ax.add_artist(first)
        ax.legend(handles=[Line2D([], [], ls="none", marker=_REGIME_MARKERS[r],
                                  color=REGIME_COLOURS[r], label=r) for r in present],
                  loc="lower left", title="regime", title_fontsize=7.5,
                  bbox_to_anchor=(0.0, 0.12 if text else 0.0))
    return fig


@_styled
def regime_map_figure(runs: Sequence[tuple[str, float, float, str]], *, carberry_limit: float,
                      weisz_prater_limit: float) -> Figure:
    """Carberry number against the Weisz-Prater number (log axes) with the threshold lines.

    Parameters
    ----------
    runs : sequence of (run, Weisz-Prater Psi_L, Carberry, regime)
        Zero values (no pellet or no film model) are drawn at the axis edge with an arrow
        marker.
    carberry_limit, weisz_prater_limit : float
        Threshold values in use (the results' thresholds).
    """
    fig = _new_figure(4.8, 3.8)
    ax = fig.add_subplot()
    wp = np.array([r[1] for r in runs], dtype=float)
    ca = np.array([r[2] for r in runs], dtype=float)
    pos_wp = wp[np.isfinite(wp) & (wp > 0)]
    pos_ca = ca[np.isfinite(ca) & (ca > 0)]
    x_lo = min([weisz_prater_limit / 100] + list(pos_wp / 3))
    x_hi = max([weisz_prater_limit * 30] + list(pos_wp * 3))
    y_lo = min([carberry_limit / 100] + list(pos_ca / 3))
    y_hi = max([carberry_limit * 30] + list(pos_ca * 3))
    ax.fill_between([x_lo, weisz_prater_limit], y_lo, carberry_limit,
                    color=REGIME_COLOURS["kinetic"], alpha=0.08, lw=0)
    ax.axvline(weisz_prater_limit, color=REGIME_COLOURS["pore"], ls="--", lw=1.0)
    ax.axhline(carberry_limit, color=REGIME_COLOURS["film"], ls="--", lw=1.0)
    ax.text(weisz_prater_limit, y_hi, f" Weisz–Prater limit {weisz_prater_limit:.3g}",
            color=REGIME_COLOURS["pore"], fontsize=7, va="top", ha="left")
    ax.text(x_hi, carberry_limit, f"Carberry limit {carberry_limit:.3g} ", fontsize=7,
            color=REGIME_COLOURS["film"], va="bottom", ha="right")
    ax.text(x_lo, y_lo, "  no film or pore limitation", fontsize=7, va="bottom", ha="left",
            color=REGIME_COLOURS["kinetic"])
    present = []
    zero_note = []
    points: list[tuple[str, float, float]] = []
    for rid, w, c, reg in runs:
        reg = reg if reg in REGIME_COLOURS else "mixed"
        marker = _REGIME_MARKERS[reg]
        xw, yc = w, c
        if not (np.isfinite(w) and w > 0):
            xw, marker = x_lo, "<"
            zero_note.append("Ψ")
        if not (np.isfinite(c) and c > 0):
            yc, marker = y_lo, "v"
            zero_note.append("Ca")
        ax.plot([xw], [yc], ls="none", marker=marker, color=REGIME_COLOURS[reg], ms=5,
                mec="white", mew=0.4, clip_on=False)
        points.append((rid, xw, yc))
        if reg not in present:
            present.append(reg)
    _log_scale(ax, "x")
    _log_scale(ax, "y")
    ax.set_xlim(x_lo, x_hi)
    ax.set_ylim(y_lo, y_hi)
    _label_points(ax, points, fontsize=6.2)
    ax.set_xlabel(axis_label("Weisz–Prater number Ψ_L", "-"))
    ax.set_ylabel(axis_label("Carberry number Ca", "-"))
    if zero_note:
        which = " and ".join(sorted(set(zero_note)))
        ax.set_title(f"runs with {which} = 0 (no model for that resistance) sit on the edge",
                     fontsize=7, fontweight="normal", color=MUTED)
    _regime_legend(ax, present, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    return fig


def _label_points(ax: Any, points: Sequence[tuple[str, float, float]], *,
                  fontsize: float) -> None:
    """Label points without overprinting: points that coincide on the plot (within 1.5 % of
    the axes) share one label ("R01, R02"); adjustText then moves labels off each other and
    off the markers, with a thin leader line where a label had to move away. The placement
    runs a fixed number of steps, so a figure is the same from one run to the next."""
    from adjustText import adjust_text

    to_px = ax.transData.transform
    span = np.abs(np.diff(ax.transAxes.transform([[0.0, 0.0], [1.0, 1.0]]), axis=0))[0]
    groups: list[tuple[list[str], NDArray[np.float64], float, float]] = []
    for rid, x, y in points:
        px = to_px((x, y))
        for names, centre, _, _ in groups:
            if np.all(np.abs(px - centre) < 0.015 * span):
                names.append(rid)
                break
        else:
            groups.append(([rid], px, x, y))
    texts = [ax.text(x, y, ", ".join(names), fontsize=fontsize, color=INK, ha="left",
                     va="bottom") for names, _, x, y in groups]
    if len(texts) > 1:
        # a step count, not adjustText's default time limit: the same results draw the same
        # figure on any machine
        adjust_text(texts, x=[p[1] for p in points], y=[p[2] for p in points], ax=ax,
                    arrowprops={"arrowstyle": "-", "color": MUTED, "lw": 0.4},
                    ensure_inside_axes=True, iter_lim=400)
