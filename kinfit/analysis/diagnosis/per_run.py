"""Per-run transport criteria from the fitted model: Thiele modulus, effectiveness factor,
Weisz-Prater, Mears and Carberry numbers, the shares of film, pore and reaction resistance, the
regime label, and whether the run qualifies as intrinsic kinetic data under stated thresholds.

With posterior draws the same quantities are evaluated on a random subsample of draws, giving
90 % intervals (5 % and 95 % quantiles) of each criterion and the probability of each regime.
The conventions (L = Vp/Sp normalisation, thresholds and their sources) are those of
:mod:`kinfit.physics.criteria`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.errors import KinfitError, StudyError
from kinfit.model.compiled import Model
from kinfit.model.simulation import run_table
from kinfit.physics.criteria import Thresholds
from kinfit.physics.resistances import REGIMES

__all__ = ["PerRunResult", "posterior_matrix", "run_diagnostics", "CRITERIA", "N_DRAWS"]

Array = NDArray[np.float64]

#: criteria that get posterior intervals, in report order
CRITERIA = ("thiele_modulus", "effectiveness_factor", "weisz_prater", "mears", "carberry",
            "film_share", "pore_share", "reaction_share")
#: posterior draws evaluated by default (a subsample; enough for 5 % / 95 % quantiles)
N_DRAWS = 200


@dataclass(frozen=True)
class PerRunResult:
    """Model-based criteria of every run.

    Attributes
    ----------
    runs : dict
        run id -> ``thiele_modulus``, ``effectiveness_factor``, ``weisz_prater``, ``mears``,
        ``carberry`` (all dimensionless), ``regime``, ``shares`` {film, pore, reaction},
        ``intrinsic`` (bool), ``passes`` (per criterion), ``observed_rate`` (mol/(kg s)),
        ``surface_concentration`` (mol/m^3), ``kc`` (m/s), ``order``; with a posterior also
        ``intervals`` {criterion: [q05, q95]}, ``regime_probability`` {regime: p} and
        ``intrinsic_probability``.
    intrinsic_runs : tuple of str
        Runs meeting every criterion at the estimate.
    thresholds : dict
        The numeric limits used (for the campaign's median order).
    n_draws : int
        Posterior draws evaluated (0 without a posterior).
    n_failed : int
        Draws whose transport state could not be computed (non-physical values), left out.
    """

    runs: dict[str, dict[str, Any]]
    intrinsic_runs: tuple[str, ...]
    thresholds: dict[str, float]
    n_draws: int = 0
    n_failed: int = 0


def posterior_matrix(model: Model, posterior: Any) -> Array:
    """Posterior draws as a matrix (n_draws, p) in the order of ``model.columns``.

    Parameters
    ----------
    model : Model
    posterior : Posterior or ndarray
        A :class:`~kinfit.estimate.posterior.Posterior` (or any object with ``names`` and
        ``draws``), a mapping column -> 1-D array of draws, or an array (n_draws, p) whose
        columns are already in ``model.columns`` order.

    Raises
    ------
    StudyError
        When the draws do not match the model's varying parameters.
    """
    cols = list(model.columns)
    if hasattr(posterior, "draws") and hasattr(posterior, "names"):
        names = list(posterior.names)
        draws = np.asarray(posterior.draws, dtype=float)
        missing = [c for c in cols if c not in names]
        if missing:
            raise StudyError(f"the posterior has no draws of parameter '{missing[0]}'; it holds "
                             f"{names}; sample the same model as the fit")
        return draws[:, [names.index(c) for c in cols]]
    if isinstance(posterior, Mapping):
        missing = [c for c in cols if c not in posterior]
        if missing:
            raise StudyError(f"the posterior draws have no column '{missing[0]}'; the model's "
                             f"varying parameters are {cols}")
        return np.column_stack([np.asarray(posterior[c], dtype=float) for c in cols])
    draws = np.asarray(posterior, dtype=float)
    if draws.ndim != 2 or draws.shape[1] != len(cols):
        raise StudyError(f"posterior draws must be a matrix (n_draws, {len(cols)}) with columns "
                         f"{cols}; got shape {draws.shape}")
    return draws


def run_diagnostics(model: Model, theta: Array, *, thresholds: Thresholds | None = None,
                    draws: Array | None = None, n_draws: int = N_DRAWS,
                    seed: int | None = 0) -> PerRunResult:
    """Criteria, regime and intrinsic flag of every run at a parameter set, with posterior
    intervals when draws are given.

    Parameters
    ----------
    model : Model
    theta : ndarray, shape (p,)
        Values of ``model.columns`` (physical, SI).
    thresholds : Thresholds, optional
    draws : ndarray, shape (n, p), optional
        Posterior draws in ``model.columns`` order.
    n_draws : int
        Size of the random subsample of draws evaluated (all draws if fewer).
    seed : int or None
        Seed of the subsample.

    Returns
    -------
    PerRunResult
    """
    thresholds = thresholds or Thresholds()
    table = run_table(model, np.asarray(theta, dtype=float), thresholds=thresholds)
    limits: dict[str, float] = {}
    runs: dict[str, dict[str, Any]] = {}
    for rid, row in table.items():
        row = dict(row)
        limits = dict(row.pop("thresholds"))
        runs[rid] = row
    intrinsic = tuple(rid for rid, row in runs.items() if row["intrinsic"])
    if draws is None:
        return PerRunResult(runs, intrinsic, limits)
    draws = np.asarray(draws, dtype=float)
    rng = np.random.default_rng(seed)
    take = draws.shape[0] if draws.shape[0] <= n_draws else n_draws
    idx = rng.choice(draws.shape[0], size=take, replace=False)
    values: dict[str, list[Array]] = {c: [] for c in CRITERIA}
    regimes: list[NDArray[np.str_]] = []
    passed: list[NDArray[np.bool_]] = []
    failed = 0
    for i in idx:
        try:
            c = model.run_states(draws[i], thresholds=thresholds).criteria
        except KinfitError:
            failed += 1
            continue
        for name in CRITERIA:
            values[name].append(np.asarray(getattr(c, name), dtype=float))
        regimes.append(np.asarray(c.regime))
        passed.append(c.intrinsic())
    used = len(regimes)
    if used:
        stack = {k: np.vstack(v) for k, v in values.items()}
        reg = np.vstack(regimes)
        ok = np.vstack(passed)
        for j, rid in enumerate(model.run_ids):
            q = {k: [float(np.quantile(stack[k][:, j], 0.05)),
                     float(np.quantile(stack[k][:, j], 0.95))] for k in CRITERIA}
            runs[rid]["intervals"] = q
            runs[rid]["regime_probability"] = {r: float(np.mean(reg[:, j] == r)) for r in REGIMES}
            runs[rid]["intrinsic_probability"] = float(np.mean(ok[:, j]))
    return PerRunResult(runs, intrinsic, limits, used, failed)
