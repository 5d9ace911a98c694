"""Convergence diagnostics of an ensemble Markov chain, and a verdict in plain words.

Chains here have emcee's layout, shape (n_steps, n_walkers, p). R-hat and the effective sample
size treat each walker as a chain (common practice for ensemble samplers; walkers of an
affine-invariant ensemble are not strictly independent, so both are slightly optimistic).
R-hat, ESS and HDI come from the array interface of arviz-stats
(``arviz_stats.base.array_stats``), which needs only numpy and scipy; the integrated
autocorrelation time from emcee.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "RHAT_MAX",
    "ESS_MIN",
    "HDI_PROB",
    "autocorr_time",
    "split_rhat",
    "ess_bulk",
    "ess_tail",
    "mcse_quantile",
    "supported_digits",
    "hdi",
    "Diagnostics",
    "diagnose",
]

#: R-hat threshold (Vehtari, Gelman, Simpson, Carpenter & Bürkner 2021, *Bayesian Analysis*
#: 16(2), 667-718: "use the sample only if R-hat < 1.01").
RHAT_MAX = 1.01
#: Smallest acceptable bulk and tail ESS (Vehtari et al. 2021 recommend at least 100 per chain
#: for 4 chains, i.e. 400 in total).
ESS_MIN = 400.0
#: Probability of the highest-density interval reported: 90 %, the same probability as the
#: central 5-95 % interval beside it, so the two can be compared (results contract: hdi90).
HDI_PROB = 0.90
#: A mean acceptance fraction below this is mentioned in the verdict (Foreman-Mackey, Hogg,
#: Lang & Goodman 2013, PASP 125, 306, advise 0.2-0.5; a note, not a failed test, because the
#: stretch move in one to three dimensions accepts more than 0.5 without harm).
ACCEPTANCE_LOW = 0.2


def _array_stats() -> Any:
    # arviz_stats takes about a second to import: load it only when a diagnostic is asked for
    from arviz_stats.base import array_stats

    return array_stats


def _as_chain(chain: ArrayLike) -> NDArray[np.float64]:
    c = np.asarray(chain, dtype=float)
    if c.ndim == 2:
        c = c[:, :, None]
    if c.ndim != 3:
        raise ValueError(f"a chain must have shape (n_steps, n_walkers, p), got {c.shape}")
    return c


def autocorr_time(chain: ArrayLike, *, c: float = 5.0) -> NDArray[np.float64]:
    """Integrated autocorrelation time of each parameter, in steps.

    Parameters
    ----------
    chain : array_like, shape (n_steps, n_walkers, p)
    c : float
        Window constant of Sokal's automatic windowing (emcee default 5).

    Returns
    -------
    ndarray, shape (p,)
        ``tau``; NaN where the chain is too short (fewer than 2 steps) to estimate it.

    Notes
    -----
    emcee's estimator (``emcee.autocorr.integrated_time``; Goodman & Weare 2010; Sokal 1997):
    the autocorrelation function is averaged over walkers and summed up to the smallest window
    ``M >= c * tau(M)``. It is called with ``tol=0`` so that emcee does not log a warning for a
    short chain; whether the chain is long enough is judged by :func:`diagnose`.
    """
    from emcee.autocorr import integrated_time

    ch = _as_chain(chain)
    if ch.shape[0] < 2:
        return np.full(ch.shape[2], np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        tau = np.asarray(integrated_time(ch, c=c, tol=0, quiet=True), dtype=float)
    return np.where(np.isfinite(tau), tau, np.nan)


def _by_walker(chain: ArrayLike) -> NDArray[np.float64]:
    """(n_steps, n_walkers, p) -> (p, n_walkers, n_steps), the (chain, draw) layout."""
    return np.moveaxis(_as_chain(chain), (0, 1, 2), (2, 1, 0))


def split_rhat(chain: ArrayLike) -> NDArray[np.float64]:
    """Rank-normalised split R-hat per parameter (Vehtari et al. 2021), walkers as chains.

    Parameters
    ----------
    chain : array_like, shape (n_steps, n_walkers, p)

    Returns
    -------
    ndarray, shape (p,)
    """
    with np.errstate(invalid="ignore", divide="ignore"):
        out = _array_stats().rhat(_by_walker(chain), chain_axis=-2, draw_axis=-1, method="rank")
    return np.asarray(out, dtype=float).reshape(-1)


def ess_bulk(chain: ArrayLike) -> NDArray[np.float64]:
    """Bulk effective sample size (rank-normalised; Vehtari et al. 2021), shape (p,)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        out = _array_stats().ess(_by_walker(chain), chain_axis=-2, draw_axis=-1, method="bulk")
    return np.asarray(out, dtype=float).reshape(-1)


def ess_tail(chain: ArrayLike, *, prob: tuple[float, float] = (0.05, 0.95)) -> NDArray[np.float64]:
    """Tail effective sample size: the smaller ESS of the 5 % and 95 % quantiles, shape (p,)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        out = _array_stats().ess(
            _by_walker(chain), chain_axis=-2, draw_axis=-1, method="tail", prob=prob
        )
    return np.asarray(out, dtype=float).reshape(-1)


def mcse_quantile(chain: ArrayLike, prob: float) -> NDArray[np.float64]:
    """Monte Carlo standard error of the ``prob`` quantile of each parameter, shape (p,).

    arviz-stats' quantile MCSE (Vehtari et al. 2021, sec. 4.3): the ESS of the indicator
    ``I(theta <= q)`` gives a binomial interval of ranks around the quantile, mapped back through
    the sorted draws; walkers as chains. NaN where the chain is too short.
    """
    with np.errstate(invalid="ignore", divide="ignore"):
        out = _array_stats().mcse(
            _by_walker(chain), chain_axis=-2, draw_axis=-1, method="quantile", prob=prob
        )
    return np.asarray(out, dtype=float).reshape(-1)


def supported_digits(value: float | None, mcse: float | None, *, min_sig: int = 2,
                     max_sig: int = 6) -> int | None:
    """Significant digits of ``value`` that its Monte Carlo standard error supports.

    The last digit printed is the smallest power of ten ``u >= 2 mcse``, so that the
    Monte Carlo error (95 %, about 2 MCSE) stays within one unit of the last digit; at least
    ``min_sig`` and at most ``max_sig`` digits. ``None`` when either number is missing or not
    finite, or ``mcse`` is not positive (the caller's default applies).

    Two runs whose estimates differ by their Monte Carlo error then print the same digits
    unless a rounding boundary falls between them; that is a chance event (probability about
    |difference| / u, at most roughly one half when u = 2 mcse, one in twenty when u = 20
    mcse), so identical printouts are likely, not guaranteed.
    """
    if value is None or mcse is None:
        return None
    v, m = float(value), float(mcse)
    if not (math.isfinite(v) and math.isfinite(m)) or m <= 0.0:
        return None
    if v == 0.0:
        return min_sig
    unit = math.ceil(math.log10(2.0 * m))
    lead = math.floor(math.log10(abs(v)))
    return int(min(max(lead - unit + 1, min_sig), max_sig))


def hdi(draws: ArrayLike, *, prob: float = HDI_PROB) -> NDArray[np.float64]:
    """Highest-density interval of each column of ``draws``.

    Parameters
    ----------
    draws : array_like, shape (n_draws, p)
    prob : float
        Probability inside the interval.

    Returns
    -------
    ndarray, shape (p, 2)
        Lower and upper ends (shortest interval holding ``prob`` of the draws).
    """
    d = np.asarray(draws, dtype=float)
    if d.ndim == 1:
        d = d[:, None]
    out = _array_stats().hdi(d.T, prob, axis=-1)
    return np.asarray(out, dtype=float).reshape(d.shape[1], 2)


@dataclass(frozen=True)
class Diagnostics:
    """Convergence diagnostics of one sampling run and their verdict.

    Attributes
    ----------
    names : tuple of str
        Parameter names.
    tau : ndarray, shape (p,)
        Integrated autocorrelation time of the whole chain, in steps.
    rhat : ndarray, shape (p,)
        Rank-normalised split R-hat of the kept draws.
    ess_bulk, ess_tail : ndarray, shape (p,)
        Effective sample sizes of the kept draws.
    acceptance_fraction : float
        Mean fraction of accepted proposals over walkers.
    n_steps : int
        Length of the whole chain, steps.
    tau_multiple : float
        Chain length asked for, in autocorrelation times.
    converged : bool
        All tests passed.
    reasons : tuple of str
        One sentence per failed test (empty when converged).
    notes : tuple of str
        Remarks that do not fail the run (acceptance fraction out of the usual range).
    """

    names: tuple[str, ...]
    tau: NDArray[np.float64]
    rhat: NDArray[np.float64]
    ess_bulk: NDArray[np.float64]
    ess_tail: NDArray[np.float64]
    acceptance_fraction: float
    n_steps: int
    tau_multiple: float
    converged: bool
    reasons: tuple[str, ...]
    notes: tuple[str, ...] = field(default=())

    @property
    def verdict(self) -> str:
        """One paragraph in plain words: converged or not, and why."""
        if self.converged:
            head = (
                f"converged: R-hat at most {np.nanmax(self.rhat):.4f} (< {RHAT_MAX}), ESS at "
                f"least {np.nanmin(np.minimum(self.ess_bulk, self.ess_tail)):.0f}, chain of "
                f"{self.n_steps} steps is {self.n_steps / np.nanmax(self.tau):.0f} times the "
                f"longest autocorrelation time ({self.tau_multiple:g} asked)."
            )
        else:
            head = "not converged: " + " ".join(self.reasons)
        return " ".join((head, *self.notes))

    def to_dict(self) -> dict[str, Any]:
        """Plain-type form for JSON."""

        def fl(a: NDArray[np.float64]) -> dict[str, float | None]:
            return {
                n: (float(v) if np.isfinite(v) else None)
                for n, v in zip(self.names, a, strict=True)
            }

        return {
            "converged": bool(self.converged),
            "verdict": self.verdict,
            "reasons": list(self.reasons),
            "notes": list(self.notes),
            "acceptance_fraction": float(self.acceptance_fraction),
            "n_steps": int(self.n_steps),
            "tau_multiple": float(self.tau_multiple),
            "tau": fl(self.tau),
            "rhat": fl(self.rhat),
            "ess_bulk": fl(self.ess_bulk),
            "ess_tail": fl(self.ess_tail),
        }


def diagnose(
    chain: ArrayLike,
    *,
    names: Sequence[str],
    burn_in: int,
    thin: int = 1,
    acceptance_fraction: float,
    tau_multiple: float = 50.0,
    rhat_max: float = RHAT_MAX,
    ess_min: float = ESS_MIN,
    interrupted: bool = False,
) -> Diagnostics:
    """Run every test on a chain and state the verdict.

    Parameters
    ----------
    chain : array_like, shape (n_steps, n_walkers, p)
        The whole chain, burn-in included (the autocorrelation time is estimated on all of it,
        as emcee recommends); R-hat and ESS use ``chain[burn_in::thin]``.
    names : sequence of str
        Parameter names, length p.
    burn_in, thin : int
        Steps discarded at the start; keep every ``thin``-th step after them.
    acceptance_fraction : float
        Mean acceptance fraction over walkers.
    tau_multiple : float
        The chain must be longer than ``tau_multiple`` times every autocorrelation time.
    rhat_max, ess_min : float
        Thresholds of R-hat (strict upper bound) and of bulk and tail ESS (lower bound).
    interrupted : bool
        The run was stopped before its stopping rule; always a failed test.

    Returns
    -------
    Diagnostics
    """
    ch = _as_chain(chain)
    names = tuple(names)
    n_steps = ch.shape[0]
    kept = ch[burn_in::thin]
    tau = autocorr_time(ch)
    if kept.shape[0] >= 4:
        rhat, eb, et = split_rhat(kept), ess_bulk(kept), ess_tail(kept)
    else:
        rhat = eb = et = np.full(len(names), np.nan)
    reasons: list[str] = []
    if interrupted:
        reasons.append(f"the run was interrupted after {n_steps} steps; resume it to finish.")
    bad = [n for n, r in zip(names, rhat, strict=True) if not r < rhat_max]
    if bad:
        worst = int(np.nanargmax(rhat)) if np.any(np.isfinite(rhat)) else 0
        reasons.append(
            f"R-hat of {', '.join(bad)} is not below {rhat_max} (worst '{names[worst]}' "
            f"{rhat[worst]:.3f}): the walkers disagree; run longer or start nearer the optimum."
        )
    ess = np.minimum(eb, et)
    low = [n for n, e in zip(names, ess, strict=True) if not e >= ess_min]
    if low:
        reasons.append(
            f"effective sample size of {', '.join(low)} is below {ess_min:g} (smallest "
            f"{np.nanmin(ess) if np.any(np.isfinite(ess)) else float('nan'):.0f}): too few "
            "independent draws; raise max_steps."
        )
    if not np.all(np.isfinite(tau)):
        reasons.append(
            f"the autocorrelation time could not be estimated from {n_steps} steps; raise "
            "max_steps."
        )
    else:
        need = tau_multiple * float(np.max(tau))
        if n_steps < need:
            slowest = names[int(np.argmax(tau))]
            reasons.append(
                f"the chain of {n_steps} steps is only {n_steps / np.max(tau):.1f} times the "
                f"autocorrelation time of '{slowest}' ({np.max(tau):.1f} steps; "
                f"{tau_multiple:g} asked): raise max_steps to at least {int(np.ceil(need))}."
            )
    notes: list[str] = []
    if acceptance_fraction < ACCEPTANCE_LOW:
        notes.append(
            f"Note: the mean acceptance fraction {acceptance_fraction:.2f} is below "
            f"{ACCEPTANCE_LOW}: walkers rarely move (a badly scaled or multimodal posterior)."
        )
    return Diagnostics(
        names=names,
        tau=tau,
        rhat=rhat,
        ess_bulk=eb,
        ess_tail=et,
        acceptance_fraction=float(acceptance_fraction),
        n_steps=int(n_steps),
        tau_multiple=float(tau_multiple),
        converged=not reasons,
        reasons=tuple(reasons),
        notes=tuple(notes),
    )
