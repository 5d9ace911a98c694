"""Figures of the uncertainty: correlation matrix, profile likelihood, posterior corner plot and traces."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure
from numpy.typing import NDArray

from kinfit.report.figures import (
    BAND,
    CURVE,
    INK,
    MUTED,
    REGIME_COLOURS,
    TRACE_POINTS,
    TRACE_WALKERS,
    _grid_shape,
    _new_figure,
    _styled,
    axis_label,
    display_scale,
)

Array = NDArray[np.float64]

__all__ = ['correlation_figure', 'corner_figure', 'trace_figure', 'profile_likelihood_figure']


_DIVERGING = LinearSegmentedColormap.from_list("kinfit_diverging",
                                               ["#b94a35", "#f4e9e4", "#ffffff", "#e1ecf3",
                                                "#1f5a84"])


@_styled
def correlation_figure(names: Sequence[str], matrix: Array) -> Figure:
    """Heat map of the parameter correlation matrix with the coefficients written in."""
    m = np.asarray(matrix, dtype=float)
    p = len(names)
    size = max(3.0, min(7.0, 1.2 + 0.55 * p))
    fig = _new_figure(size + 0.9, size)
    ax = fig.add_subplot()
    im = ax.imshow(m, cmap=_DIVERGING, vmin=-1, vmax=1)
    ax.grid(False)
    ax.set_xticks(range(p), names, rotation=45, ha="right")
    ax.set_yticks(range(p), names)
    if p <= 12:
        for i in range(p):
            for j in range(p):
                if np.isfinite(m[i, j]):
                    ax.text(j, i, f"{m[i, j]:+.2f}", ha="center", va="center",
                            fontsize=6.5 if p > 7 else 7.5,
                            color="white" if abs(m[i, j]) > 0.75 else INK)
    ax.set_xlabel(axis_label("parameter", "-"))
    ax.set_ylabel(axis_label("parameter", "-"))
    cb = fig.colorbar(im, ax=ax, shrink=0.8)
    cb.set_label(axis_label("correlation coefficient", "-"))
    return fig


@_styled
def profile_likelihood_figure(profiles: Mapping[str, Mapping[str, Sequence[float]]], *,
                              t_crit: float | None, estimates: Mapping[str, float],
                              units: Mapping[str, str]) -> Figure:
    """Signed-root profile traces tau(value) per parameter with the +/- t_crit lines."""
    names = [n for n, p in profiles.items() if len(p.get("values", ())) > 1]
    nrows, ncols = _grid_shape(len(names), max_cols=3)
    fig = _new_figure(7.2, 0.6 + 2.1 * nrows)
    axes = np.atleast_1d(fig.subplots(nrows, ncols, squeeze=False)).ravel()
    for ax, name in zip(axes, names, strict=False):
        v = np.asarray(profiles[name]["values"], dtype=float)
        tau = np.asarray(profiles[name]["tau"], dtype=float)
        scale, unit = display_scale(v, units.get(name, ""))
        order = np.argsort(v)
        ax.plot(v[order] * scale, tau[order], color=CURVE, marker=".", ms=3)
        if t_crit:
            for s in (-t_crit, t_crit):
                ax.axhline(s, color=REGIME_COLOURS["film"], ls="--", lw=0.9)
        if name in estimates:
            ax.axvline(estimates[name] * scale, color=MUTED, lw=0.8)
        ax.set_title(name, fontsize=8)
        ax.set_xlabel(f"{name} [{unit}]")
        ax.set_ylabel(axis_label("signed root τ", "-"))
    for ax in axes[len(names):]:
        ax.set_visible(False)
    return fig


@_styled
def corner_figure(draws: pd.DataFrame, names: Sequence[str], *, units: Mapping[str, str],
                  estimates: Mapping[str, float] | None = None, bins: int = 28) -> Figure:
    """Pairwise marginals of the posterior draws (drawn here with matplotlib): histograms
    on the diagonal with the median and the 90 % interval, 2-D histograms below it, and the
    least-squares estimate as cross-hairs."""
    p = len(names)
    size = max(3.2, min(7.4, 1.35 * p + 0.6))
    fig = _new_figure(size, size)
    axes = fig.subplots(p, p, squeeze=False)
    cmap = LinearSegmentedColormap.from_list("kinfit_density", ["#ffffff", "#9cc3dc",
                                                                "#1f5a84", "#0e2c44"])
    scales = {n: display_scale(draws[n].to_numpy(float), units.get(n, "")) for n in names}
    data = {n: draws[n].to_numpy(float) * scales[n][0] for n in names}
    est = {n: v * scales[n][0] for n, v in (estimates or {}).items() if n in scales}
    limits = {}
    for n in names:
        lo, hi = np.quantile(data[n], [0.002, 0.998])
        pad = 0.05 * (hi - lo or abs(hi) or 1.0)
        limits[n] = (lo - pad, hi + pad)
    for i, yi in enumerate(names):
        for j, xj in enumerate(names):
            ax = axes[i, j]
            if j > i:
                ax.set_visible(False)
                continue
            ax.grid(False)
            if i == j:
                ax.hist(data[xj], bins=bins, range=limits[xj], color=BAND, edgecolor=CURVE,
                        linewidth=0.5, histtype="stepfilled")
                q = np.quantile(data[xj], [0.05, 0.5, 0.95])
                for qq, ls in zip(q, (":", "-", ":"), strict=True):
                    ax.axvline(qq, color=INK, lw=0.9, ls=ls)
                ax.set_yticks([])
                ax.spines["left"].set_visible(False)
            else:
                ax.hist2d(data[xj], data[yi], bins=bins, range=[limits[xj], limits[yi]],
                          cmap=cmap, rasterized=True)  # a raster layer inside the SVG
                ax.set_ylim(limits[yi])
            if xj in est:
                ax.axvline(est[xj], color=REGIME_COLOURS["film"], lw=0.8)
            if i != j and yi in est:
                ax.axhline(est[yi], color=REGIME_COLOURS["film"], lw=0.8)
            ax.set_xlim(limits[xj])
            ax.tick_params(labelsize=6.2)
            if i == p - 1:
                ax.set_xlabel(f"{xj}\n[{scales[xj][1]}]", fontsize=7)
                for lab in ax.get_xticklabels():
                    lab.set_rotation(40)
            else:
                ax.tick_params(labelbottom=False)
            if j == 0 and i > 0:
                ax.set_ylabel(f"{yi}\n[{scales[yi][1]}]", fontsize=7)
            else:
                ax.tick_params(labelleft=False)
    return fig


@_styled
def trace_figure(draws: pd.DataFrame, names: Sequence[str], *,
                 units: Mapping[str, str]) -> Figure:
    """Traces of the posterior chain: one panel per quantity (and ``log_prob`` when given),
    one thin line per walker when ``step`` and ``walker`` columns exist."""
    cols = list(names) + (["log_prob"] if "log_prob" in draws.columns else [])
    fig = _new_figure(7.2, 0.5 + 1.05 * len(cols))
    axes = fig.subplots(len(cols), 1, sharex=True, squeeze=False)[:, 0]
    by_walker = "walker" in draws.columns and "step" in draws.columns
    for ax, name in zip(axes, cols, strict=True):
        scale, unit = display_scale(draws[name].to_numpy(float),
                                    "-" if name == "log_prob" else units.get(name, ""))
        # thinned to what the eye can see (at most TRACE_POINTS points per line, about the
        # panel's width in pixels) and drawn as a raster layer inside the SVG
        if by_walker:
            walkers = draws["walker"].unique()
            step = max(1, -(-len(walkers) // TRACE_WALKERS))
            for w in walkers[::step]:
                sub = draws[draws["walker"] == w]
                every = max(1, len(sub) // TRACE_POINTS)
                ax.plot(sub["step"].to_numpy()[::every], sub[name].to_numpy()[::every] * scale,
                        lw=0.45, alpha=0.55, color=CURVE, rasterized=True)
        else:
            every = max(1, len(draws) // TRACE_POINTS)
            ax.plot(np.arange(len(draws))[::every], draws[name].to_numpy()[::every] * scale,
                    lw=0.5, color=CURVE, rasterized=True)
        ax.set_ylabel(f"{name} [{unit}]", fontsize=6.8, rotation=0, ha="right", va="center")
        ax.tick_params(labelsize=6.5)
    axes[-1].set_xlabel(axis_label("step" if by_walker else "draw", "-"))
    return fig
