"""The result of posterior sampling: draws, diagnostics, summaries and their file forms.

A :class:`Posterior` is read, never re-run: it holds the draws after burn-in (physical values),
the convergence diagnostics and the settings that produced it. Its :meth:`Posterior.summary`
is the ``posterior`` block of the results contract (``posterior.json``).
"""

from __future__ import annotations

import contextlib
import json
import math
import os
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.core.files import atomic_path
from kinfit.errors import StudyError
from kinfit.estimate.checkpoint import atomic_write
from kinfit.estimate.convergence import (
    HDI_PROB,
    Diagnostics,
    hdi,
    mcse_quantile,
    supported_digits,
)
from kinfit.estimate.problem import ErrorModel

__all__ = ["Posterior", "SamplerSettings", "PredictiveBands"]


def _readonly(a: Any, dtype: Any = float) -> NDArray[Any]:
    arr = np.array(a, dtype=dtype)
    arr.setflags(write=False)
    return arr


def _num(v: float) -> float | None:
    """A float for JSON; None for NaN or infinity."""
    v = float(v)
    return v if math.isfinite(v) else None


@dataclass(frozen=True)
class SamplerSettings:
    """How a posterior was sampled (recorded in ``posterior.json``).

    Attributes
    ----------
    n_walkers, n_steps, burn_in, thin : int
        Ensemble size; length of the whole chain (steps); steps discarded; thinning.
    seed : int
        Entropy of the ``SeedSequence`` that drove the run (repeat it with ``seed=``).
    max_steps, chunk : int
        Longest chain allowed; steps between checkpoints and stopping checks.
    tau_multiple : float
        Stopping rule: chain longer than this many autocorrelation times.
    sample_scale : bool
        Whether the error scales were sampled.
    scale_values : dict of str to float
        Fixed error scales, or their starting values when sampled.
    priors : dict of str to str
        Prior of each sampled quantity in the study-file syntax.
    checkpoint : str or None
        Checkpoint file.
    resumed_from : int
        Steps taken from a checkpoint (0 for a fresh run).
    stopped_by : {"converged", "autocorrelation", "max_steps", "interrupted"}
        Why sampling stopped.
    moves : {"de-laplace", "de", "stretch"}
        Proposal moves asked of the ensemble sampler.
    move_note : str
        What the moves were in fact: the independence proposal's form, or why the sampler fell
        back to DE alone (see :mod:`kinfit.estimate.moves`); empty for "de" and "stretch".
    """

    n_walkers: int
    n_steps: int
    burn_in: int
    thin: int
    seed: int
    max_steps: int
    chunk: int
    tau_multiple: float
    sample_scale: bool
    scale_values: dict[str, float]
    priors: dict[str, str]
    checkpoint: str | None
    resumed_from: int
    stopped_by: str
    moves: str = "stretch"
    move_note: str = ""

    def to_dict(self) -> dict[str, Any]:
        """Plain-type form; ``walkers``, ``steps``, ``burn_in``, ``seed`` are contract names."""
        return {
            "walkers": self.n_walkers,
            "steps": self.n_steps,
            "burn_in": self.burn_in,
            "thin": self.thin,
            "seed": self.seed,
            "max_steps": self.max_steps,
            "chunk": self.chunk,
            "tau_multiple": self.tau_multiple,
            "sample_scale": self.sample_scale,
            "scale_values": dict(self.scale_values),
            "priors": dict(self.priors),
            "checkpoint": self.checkpoint,
            "resumed_from": self.resumed_from,
            "stopped_by": self.stopped_by,
            "moves": self.moves,
            "move_note": self.move_note,
        }


@dataclass(frozen=True)
class PredictiveBands:
    """Posterior predictive central band of a prediction vector.

    Attributes
    ----------
    q05, q50, q95 : ndarray, shape (n,)
        5 %, 50 % and 95 % quantiles of the predictions over posterior draws (same unit as the
        predictions).
    n_draws : int
        Draws used (after dropping failed predictions).
    n_failed : int
        Draws whose prediction was not finite.
    noise : bool
        Whether observation noise from the error model was added (a band for new
        observations) or not (a band for the mean response).
    """

    q05: NDArray[np.float64]
    q50: NDArray[np.float64]
    q95: NDArray[np.float64]
    n_draws: int
    n_failed: int
    noise: bool

    def to_frame(self) -> Any:
        """A pandas DataFrame with columns ``q05``, ``q50``, ``q95``."""
        import pandas as pd

        return pd.DataFrame({"q05": self.q05, "q50": self.q50, "q95": self.q95})


@dataclass(frozen=True)
class Posterior:
    """Draws from a posterior and what is known of their quality.

    Attributes
    ----------
    names : tuple of str
        Sampled quantities: the problem's parameters, then the error scales when sampled.
    n_model : int
        How many of ``names`` are the problem's parameters (the predictor's columns).
    draws : ndarray, shape (n_draws, len(names))
        Physical values (SI units) after burn-in and thinning, flattened step-major: row
        ``i * n_walkers + w`` is walker ``w`` at kept step ``i``. Read-only.
    log_prob : ndarray, shape (n_draws,)
        Log-posterior (internal coordinates, unnormalised) of each draw.
    chain_shape : tuple of int
        ``(n_steps, n_walkers, ndim)`` of the whole chain, burn-in included.
    acceptance_fraction : float
        Mean fraction of accepted moves over walkers.
    diagnostics : Diagnostics
        Autocorrelation times, R-hat, ESS and the verdict.
    interrupted : bool
        Sampling was stopped by the user (Ctrl-C) before its stopping rule.
    settings : SamplerSettings
        Walkers, steps, burn-in, thinning, seed and the rest.
    error_model : ErrorModel
        The problem's error model (used by :meth:`predictive` to add noise).
    """

    names: tuple[str, ...]
    n_model: int
    draws: NDArray[np.float64]
    log_prob: NDArray[np.float64]
    chain_shape: tuple[int, int, int]
    acceptance_fraction: float
    diagnostics: Diagnostics
    interrupted: bool
    settings: SamplerSettings
    error_model: ErrorModel = field(default_factory=ErrorModel)

    def __post_init__(self) -> None:
        object.__setattr__(self, "draws", _readonly(self.draws))
        object.__setattr__(self, "log_prob", _readonly(self.log_prob))
        if self.draws.ndim != 2 or self.draws.shape[1] != len(self.names):
            raise ValueError(f"draws of shape {self.draws.shape} for {len(self.names)} names")

    # -- diagnostics, by delegation ------------------------------------------------------------
    @property
    def tau(self) -> NDArray[np.float64]:
        """Integrated autocorrelation time per quantity (steps, internal coordinates)."""
        return self.diagnostics.tau

    @property
    def rhat(self) -> NDArray[np.float64]:
        """Rank-normalised split R-hat per quantity."""
        return self.diagnostics.rhat

    @property
    def ess(self) -> NDArray[np.float64]:
        """Bulk effective sample size per quantity."""
        return self.diagnostics.ess_bulk

    @property
    def ess_tail(self) -> NDArray[np.float64]:
        """Tail effective sample size per quantity."""
        return self.diagnostics.ess_tail

    @property
    def converged(self) -> bool:
        """Whether every convergence test passed."""
        return self.diagnostics.converged

    @property
    def reasons(self) -> tuple[str, ...]:
        """The failed tests, one sentence each (empty when converged)."""
        return self.diagnostics.reasons

    @property
    def verdict(self) -> str:
        """Converged or not, and why, in plain words."""
        return self.diagnostics.verdict

    @property
    def n_draws(self) -> int:
        """Number of kept draws."""
        return int(self.draws.shape[0])

    @property
    def chain(self) -> NDArray[np.float64]:
        """Kept draws as a chain, shape (n_kept_steps, n_walkers, ndim)."""
        return self.draws.reshape(-1, self.chain_shape[1], len(self.names))

    # -- summaries -----------------------------------------------------------------------------
    def summary(self) -> dict[str, dict[str, Any]]:
        """Per quantity: ``median``, ``q05``, ``q95``, ``hdi90`` [lo, hi], ``rhat``, ``ess``
        (bulk), plus ``mean``, ``sd``, ``ess_tail`` and ``mcse``; plain floats (None for NaN).

        ``mcse`` holds the Monte Carlo standard errors of ``median``, ``q05``, ``q95`` and of
        the two ``hdi90`` ends (each end as the quantile at the share of draws below it), by
        :func:`~kinfit.estimate.convergence.mcse_quantile`. Values keep full precision here;
        printed summaries round to the digits the MCSE supports
        (:func:`~kinfit.estimate.convergence.supported_digits`).

        This is the ``posterior`` block of ``posterior.json`` in the results contract.
        """
        q = np.quantile(self.draws, [0.05, 0.5, 0.95], axis=0)
        h = hdi(self.draws, prob=HDI_PROB)
        chain = self.chain
        se = {key: mcse_quantile(chain, prob)
              for key, prob in (("median", 0.5), ("q05", 0.05), ("q95", 0.95))}
        se_hdi = np.full((len(self.names), 2), np.nan)
        for j in range(len(self.names)):
            for k in range(2):
                share = float(np.mean(self.draws[:, j] <= h[j, k]))
                if 0.0 < share < 1.0:
                    se_hdi[j, k] = mcse_quantile(chain[:, :, j : j + 1], share)[0]
        mean = self.draws.mean(axis=0)
        sd = (
            self.draws.std(axis=0, ddof=1)
            if self.n_draws > 1
            else np.full(len(self.names), np.nan)
        )
        out = {}
        for j, name in enumerate(self.names):
            out[name] = {
                "median": _num(q[1, j]),
                "q05": _num(q[0, j]),
                "q95": _num(q[2, j]),
                "hdi90": [_num(h[j, 0]), _num(h[j, 1])],
                "rhat": _num(self.rhat[j]),
                "ess": _num(self.ess[j]),
                "mean": _num(mean[j]),
                "sd": _num(sd[j]),
                "ess_tail": _num(self.ess_tail[j]),
                "mcse": {
                    **{key: _num(v[j]) for key, v in se.items()},
                    "hdi90": [_num(se_hdi[j, 0]), _num(se_hdi[j, 1])],
                },
            }
        return out

    def to_dict(self) -> dict[str, Any]:
        """Plain-type form of ``posterior.json``: ``posterior`` (the summary), ``sampler``
        (settings) and ``convergence`` (diagnostics and the verdict)."""
        conv = self.diagnostics.to_dict()
        conv["interrupted"] = bool(self.interrupted)
        return {
            "posterior": self.summary(),
            "sampler": self.settings.to_dict(),
            "convergence": conv,
            "n_draws": self.n_draws,
            "chain_shape": list(self.chain_shape),
        }

    def to_frame(self) -> Any:
        """The summary as a pandas DataFrame, one row per quantity."""
        import pandas as pd

        rows = []
        for name, s in self.summary().items():
            row = {k: v for k, v in s.items() if k not in ("hdi90", "mcse")}
            row["hdi90_lo"], row["hdi90_hi"] = s["hdi90"]
            for key in ("median", "q05", "q95"):
                row[f"mcse_{key}"] = s["mcse"][key]
            rows.append({"name": name, **row})
        return pd.DataFrame(rows).set_index("name")

    def report(self) -> str:
        """A plain-text table of the summary and the convergence verdict.

        Median and quantiles are printed to the digits their Monte Carlo standard error supports
        (:func:`~kinfit.estimate.convergence.supported_digits`; 5 digits when it is unknown),
        R-hat to 3 decimals and the ESS to 2 significant digits (both are estimates whose
        run-to-run spread exceeds the digits dropped).
        """
        lines = [
            f"posterior: {self.n_draws} draws ({self.chain_shape[1]} walkers, "
            f"{self.settings.n_steps} steps, burn-in {self.settings.burn_in}, thin "
            f"{self.settings.thin}, seed {self.settings.seed}, {self.settings.moves} moves)"
            + (f"\nmoves: {self.settings.move_note}" if self.settings.move_note else ""),
            f"{'name':<24}{'median':>13}{'q05':>13}{'q95':>13}{'rhat':>8}{'ess':>8}",
        ]
        for name, s in self.summary().items():
            nums = "".join(f"{_mcse_text(s[k], s['mcse'][k]):>13}"
                           for k in ("median", "q05", "q95"))
            rh = f"{s['rhat']:>8.3f}" if s["rhat"] is not None else f"{'nan':>8}"
            ess = None if s["ess"] is None else float(f"{s['ess']:.2g}")
            es = f"{ess:>8.0f}" if ess is not None else f"{'nan':>8}"
            lines.append(f"{name:<24}{nums}{rh}{es}")
        lines.append(self.verdict)
        return "\n".join(lines)

    def draws_frame(self) -> Any:
        """Draws as a pandas DataFrame: ``step`` (index in the whole chain), ``walker``, one
        column per quantity (physical values) and ``log_prob``."""
        import pandas as pd

        n_kept, w = self.chain.shape[:2]
        steps = self.settings.burn_in + self.settings.thin * np.arange(n_kept)
        data: dict[str, Any] = {
            "step": np.repeat(steps, w),
            "walker": np.tile(np.arange(w), n_kept),
        }
        for j, name in enumerate(self.names):
            data[name] = self.draws[:, j]
        data["log_prob"] = self.log_prob
        return pd.DataFrame(data)

    def to_csv(self, path: str | os.PathLike[str]) -> Path:
        """Write :meth:`draws_frame` to ``path`` atomically; returns the path."""
        frame = self.draws_frame()
        return atomic_write(path, lambda fh: frame.to_csv(fh, index=False), text=True)

    def _by_walker(self) -> tuple[dict[str, NDArray[np.float64]], NDArray[np.float64]]:
        """Posterior variables and log-probabilities as (chain = walker, draw = kept step)."""
        chain = self.chain  # (n_kept, W, p)
        lp = self.log_prob.reshape(chain.shape[0], chain.shape[1]).T
        return {n: chain[:, :, j].T for j, n in enumerate(self.names)}, lp

    def _attrs(self) -> dict[str, str]:
        return {
            "kinfit_settings": json.dumps(self.settings.to_dict(), sort_keys=True),
            "kinfit_convergence": json.dumps(self.diagnostics.to_dict(), sort_keys=True),
        }

    def to_datatree(self) -> Any:
        """The draws as an ArviZ DataTree (``arviz_base.from_dict``).

        Groups ``posterior`` (one variable per quantity, dimensions ``(chain, draw)`` with
        walkers as chains and kept steps as draws) and ``sample_stats`` (``lp``); the settings
        and the verdict are JSON strings in the ``kinfit_settings`` and ``kinfit_convergence``
        attributes of ``posterior``.
        """
        import arviz_base

        post, lp = self._by_walker()
        return arviz_base.from_dict(
            {"posterior": post, "sample_stats": {"lp": lp}}, attrs={"posterior": self._attrs()}
        )

    def to_netcdf(self, path: str | os.PathLike[str], *, engine: str = "h5netcdf") -> Path:
        """Write the draws to a NetCDF file atomically; returns the path.

        Parameters
        ----------
        path : path-like
        engine : {"h5netcdf", "scipy"}
            ``"h5netcdf"`` (default): NetCDF-4 holding :meth:`to_datatree` (ArviZ's groups; read
            it with ``xarray.open_datatree``); h5netcdf and h5py are declared dependencies.
            ``"scipy"``: NetCDF-3, one group holding the posterior variables and ``lp``
            (read it with ``xarray.open_dataset``), for readers without HDF5.

        Notes
        -----
        Variables have dimensions ``(chain, draw)`` with walkers as chains and kept steps as
        draws; settings and the verdict are stored as JSON in the ``kinfit_settings`` and
        ``kinfit_convergence`` attributes.
        """
        engines = ("h5netcdf", "scipy")
        if engine not in engines:
            raise StudyError(
                f"to_netcdf engine '{engine}' is not recognised; use one of {engines}"
            )
        with _atomic_path(path) as tmp:
            if engine == "h5netcdf":
                self.to_datatree().to_netcdf(tmp, engine="h5netcdf")
            else:
                import xarray as xr

                post, lp = self._by_walker()
                w, n = lp.shape
                ds = xr.Dataset(
                    {k: (("chain", "draw"), v) for k, v in {**post, "lp": lp}.items()},
                    coords={"chain": np.arange(w), "draw": np.arange(n)},
                    attrs=self._attrs(),
                )
                ds.to_netcdf(tmp, engine="scipy")
        return Path(path)

    # -- predictions ---------------------------------------------------------------------------
    def predictive(
        self,
        predict: Callable[[NDArray[np.float64]], NDArray[np.float64]],
        n_draws: int,
        rng: np.random.Generator | int,
        *,
        noise: bool = False,
        weights: NDArray[np.float64] | None = None,
    ) -> PredictiveBands:
        """Posterior predictive central 90 % band (5 %, 50 %, 95 % quantiles).

        Parameters
        ----------
        predict : callable
            Physical parameter matrix (m, n_model) to predictions (m, n), the problem's
            predictor or one evaluated at other conditions (a finer time grid).
        n_draws : int
            Posterior draws used, taken without replacement (all of them if fewer).
        rng : numpy.random.Generator or int
            Randomness for the choice of draws and the noise; an int seeds a new Generator.
        noise : bool
            Add observation noise drawn from the error model with each draw's scales (or the
            fixed scales), giving a band for new observations.
        weights : ndarray, shape (n,), optional
            Precision weights of the predicted points, for the noise.

        Returns
        -------
        PredictiveBands
        """
        if isinstance(n_draws, bool) or not isinstance(n_draws, int | np.integer) or n_draws < 1:
            raise StudyError(f"n_draws must be an int >= 1, got {n_draws!r}")
        gen = rng if isinstance(rng, np.random.Generator) else np.random.default_rng(rng)
        m = min(int(n_draws), self.n_draws)
        idx = np.sort(gen.choice(self.n_draws, size=m, replace=False))
        theta = self.draws[idx]
        f = np.asarray(predict(np.array(theta[:, : self.n_model])), dtype=float)
        if f.ndim != 2 or f.shape[0] != m:
            raise ValueError(f"predictor returned shape {f.shape}, expected ({m}, n)")
        ok = np.all(np.isfinite(f), axis=1)
        if not np.any(ok):
            raise StudyError("no posterior draw gives a finite prediction; check the predictor")
        f, theta = f[ok], theta[ok]
        if noise:
            vals: dict[str, Any] = dict(self.settings.scale_values)
            for k, name in enumerate(self.names[self.n_model :]):
                vals[name] = theta[:, self.n_model + k][:, None]
            sd = self.error_model.sigma(
                f, s_abs=vals.get("sigma", 1.0), s_rel=vals.get("sigma_rel", 1.0), weights=weights
            )
            f = f + sd * gen.standard_normal(size=f.shape)
        q = np.quantile(f, [0.05, 0.5, 0.95], axis=0)
        return PredictiveBands(
            q05=_readonly(q[0]),
            q50=_readonly(q[1]),
            q95=_readonly(q[2]),
            n_draws=int(ok.sum()),
            n_failed=int((~ok).sum()),
            noise=bool(noise),
        )


def _mcse_text(value: float | None, mcse: float | None) -> str:
    """``value`` to the significant digits its MCSE supports (5 when unknown), zeros kept."""
    if value is None:
        return "nan"
    sig = supported_digits(value, mcse) or 5
    text = f"{value:#.{sig}g}"
    return text[:-1] if text.endswith(".") else text


@contextlib.contextmanager
def _atomic_path(path: str | os.PathLike[str]) -> Iterator[str]:
    """A temporary path beside ``path`` for a library that writes by name; replaces ``path``
    with it on success, removes it on failure."""
    dest = Path(path)
    folder = dest.parent if str(dest.parent) else Path(".")
    if not folder.is_dir():
        raise StudyError(f"cannot write '{dest}': folder '{folder}' does not exist; create it")

    with atomic_path(dest) as tmp:
        yield str(tmp)
