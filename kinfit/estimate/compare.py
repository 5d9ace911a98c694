"""Comparison of several fits of the same data: information criteria, Akaike weights and, for
nested pairs, a likelihood-ratio test and the extra-sum-of-squares F test.

References
----------
Burnham, K. P. & Anderson, D. R. (2002). *Model Selection and Multimodel Inference*, 2nd ed.
Springer, §2.9 (Akaike weights; from memory).
Bates, D. M. & Watts, D. G. (1988). *Nonlinear Regression Analysis and Its Applications*.
Wiley, §3.10 (extra sum of squares; from memory).
Wilks, S. S. (1938). *Ann. Math. Stat.* 9, 60-62 (likelihood-ratio chi-square; from memory).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray
from scipy.stats import chi2
from scipy.stats import f as fisher_f

from kinfit.errors import StudyError
from kinfit.estimate.result import Estimate

__all__ = ["CRITERIA", "Comparison", "NestedTest", "compare_fits", "akaike_weights",
           "likelihood_ratio_test", "f_test"]

CRITERIA = ("aicc", "aic", "bic")


@dataclass(frozen=True)
class NestedTest:
    """Tests of a reduced fit against a fuller fit that contains it.

    Attributes
    ----------
    reduced, full : str
        Labels of the two fits.
    df : int
        Difference in estimated quantities ``k_full - k_reduced`` (model plus error-scale
        parameters).
    lr_statistic, lr_pvalue : float
        ``2 (lnL_full - lnL_reduced)`` and its chi-square(df) upper tail (Wilks 1938).
    f_statistic, f_pvalue : float
        ``[(S_r - S_f)/(p_f - p_r)] / [S_f/(n - p_f)]`` and its F(p_f - p_r, n - p_f) upper tail
        (Bates & Watts 1988); NaN when the two fits do not share the error model and weights.
    note : str
        Why a test is not available, or empty.
    """

    reduced: str
    full: str
    df: int
    lr_statistic: float
    lr_pvalue: float
    f_statistic: float
    f_pvalue: float
    note: str = ""

    def to_dict(self) -> dict[str, Any]:
        """Plain Python types."""
        return {
            "reduced": self.reduced,
            "full": self.full,
            "df": int(self.df),
            "lr_statistic": float(self.lr_statistic),
            "lr_pvalue": float(self.lr_pvalue),
            "f_statistic": float(self.f_statistic),
            "f_pvalue": float(self.f_pvalue),
            "note": self.note,
        }


@dataclass(frozen=True)
class Comparison:
    """Outcome of :func:`compare_fits`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per fit (index: label) with columns ``n_obs, n_params, k, sse, loglike, aic,
        aicc, bic, delta, weight, converged``; ``delta`` and ``weight`` refer to ``criterion``.
        Rows are in the order given.
    criterion : str
        ``"aicc"``, ``"aic"`` or ``"bic"``.
    best : str
        Label with the smallest criterion.
    tests : tuple of NestedTest
    """

    table: pd.DataFrame
    criterion: str
    best: str
    tests: tuple[NestedTest, ...]

    def to_dict(self) -> dict[str, Any]:
        """Plain Python types: ``{"criterion", "best", "fits": {label: {...}}, "tests": [...]}``."""
        fits = {
            str(label): {k: (v.item() if hasattr(v, "item") else v) for k, v in row.items()}
            for label, row in self.table.to_dict(orient="index").items()
        }
        return {
            "criterion": self.criterion,
            "best": self.best,
            "fits": fits,
            "tests": [t.to_dict() for t in self.tests],
        }


def _same_data(a: Estimate, b: Estimate) -> bool:
    if a.n_obs != b.n_obs:
        return False
    ya, yb = np.asarray(a.observed), np.asarray(b.observed)
    return bool(np.allclose(ya, yb, rtol=1e-12, atol=0.0))


def akaike_weights(values: Sequence[float] | NDArray[np.float64]
                   ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Differences to the best and weights of an information criterion.

    ``delta_i = C_i - min C`` and ``weight_i = exp(-delta_i/2) / sum_j exp(-delta_j/2)``
    (Burnham & Anderson 2002, §2.9).

    Examples
    --------
    >>> d, w = akaike_weights([10.0, 10.0])
    >>> d.tolist(), w.tolist()
    ([0.0, 0.0], [0.5, 0.5])
    """
    c = np.asarray(values, dtype=float)
    delta = c - np.min(c)
    w = np.exp(-0.5 * delta)
    return delta, w / np.sum(w)


def likelihood_ratio_test(loglike_reduced: float, loglike_full: float, df: int
                          ) -> tuple[float, float]:
    """``LR = 2 (lnL_full - lnL_reduced)`` and its chi-square(df) upper tail (Wilks 1938); a
    negative LR (the fuller fit short of its optimum) has p = 1."""
    lr = 2.0 * (loglike_full - loglike_reduced)
    return float(lr), float(chi2.sf(max(lr, 0.0), df))


def f_test(sse_reduced: float, sse_full: float, dp: int, dof_full: int) -> tuple[float, float]:
    """Extra-sum-of-squares F ``[(S_r - S_f)/dp] / [S_f/dof_full]`` and its F(dp, dof_full)
    upper tail (Bates & Watts 1988, §3.10); a negative F has p = 1."""
    fs = ((sse_reduced - sse_full) / dp) / (sse_full / dof_full)
    return float(fs), float(fisher_f.sf(max(fs, 0.0), dp, dof_full))


def compare_fits(
    estimates: Mapping[str, Estimate] | Sequence[Estimate],
    *,
    nested: Sequence[tuple[str, str]] = (),
    criterion: str = "aicc",
) -> Comparison:
    """Rank fits of the same observations and test nested pairs.

    Parameters
    ----------
    estimates : mapping of label to Estimate, or sequence of Estimate
        At least two fits of the same observations (labels ``"fit1"``, ... for a sequence).
    nested : sequence of (reduced, full) label pairs
        Pairs where the reduced model is a special case of the full one (the caller knows; it
        cannot be inferred from the numbers).
    criterion : {"aicc", "aic", "bic"}
        Criterion for ``delta`` and the Akaike weights.

    Returns
    -------
    Comparison

    Raises
    ------
    StudyError
        Fewer than two fits, different observations, an unknown label or criterion, or a
        "nested" pair whose reduced model has no fewer parameters.

    Notes
    -----
    ``delta_i = C_i - min C`` and ``weight_i = exp(-delta_i/2) / sum_j exp(-delta_j/2)``
    (Burnham & Anderson 2002). The criteria use the convention of
    :mod:`kinfit.estimate.statistics` (ln L with constants, k counting the error scales).
    """
    if isinstance(estimates, Mapping):
        fits = dict(estimates)
    else:
        fits = {f"fit{i + 1}": e for i, e in enumerate(estimates)}
    if len(fits) < 2:
        raise StudyError(f"compare_fits() needs at least two fits; got {len(fits)}")
    if criterion not in CRITERIA:
        raise StudyError(
            f"The 'criterion' option of compare_fits() must be a str among {set(CRITERIA)}. "
            f"Got {criterion!r} instead."
        )
    labels = list(fits)
    ref = fits[labels[0]]
    for lab in labels[1:]:
        if not _same_data(ref, fits[lab]):
            raise StudyError(
                f"compare_fits(): fit '{lab}' was made on different observations from "
                f"'{labels[0]}' (n = {fits[lab].n_obs} vs {ref.n_obs}, or other values); "
                "information criteria only compare fits of the same data"
            )
    rows = []
    for lab in labels:
        e = fits[lab]
        st = e.statistics
        rows.append(
            {
                "n_obs": e.n_obs,
                "n_params": e.n_params,
                "k": st.k,
                "sse": e.sse,
                "loglike": st.loglike,
                "aic": st.aic,
                "aicc": st.aicc,
                "bic": st.bic,
                "converged": bool(e.converged),
            }
        )
    table = pd.DataFrame(rows, index=pd.Index(labels, name="fit"))
    c = table[criterion].to_numpy(dtype=float)
    table["delta"], table["weight"] = akaike_weights(c)
    best = labels[int(np.argmin(c))]
    tests = []
    for pair in nested:
        if len(pair) != 2 or any(q not in fits for q in pair):
            raise StudyError(f"compare_fits(): nested pair {pair!r} must name two of {labels}")
        red_lab, full_lab = pair
        tests.append(_nested_test(red_lab, fits[red_lab], full_lab, fits[full_lab]))
    return Comparison(table=table, criterion=criterion, best=best, tests=tuple(tests))


def _nested_test(red_lab: str, red: Estimate, full_lab: str, full: Estimate) -> NestedTest:
    if red.n_params >= full.n_params:
        raise StudyError(
            f"compare_fits(): '{red_lab}' ({red.n_params} parameters) cannot be nested in "
            f"'{full_lab}' ({full.n_params} parameters); list pairs as (reduced, full)"
        )
    df = full.statistics.k - red.statistics.k
    lr, lr_p = likelihood_ratio_test(red.statistics.loglike, full.statistics.loglike, df)
    note = (
        "" if lr >= 0 else "the fuller fit has the lower likelihood: it did not reach its optimum"
    )
    same_weights = red.error_model == full.error_model == "constant" and np.allclose(
        red.fit_weights, full.fit_weights, rtol=1e-12, atol=0.0
    )
    dp = full.n_params - red.n_params
    dof = full.n_obs - full.n_params
    if same_weights and dof > 0:
        fs, fp = f_test(red.sse, full.sse, dp, dof)
    else:
        fs = fp = float("nan")
        note = (note + "; " if note else "") + (
            "F test needs the constant error model with the same weights in both fits"
        )
    return NestedTest(red_lab, full_lab, int(df), float(lr), lr_p, float(fs), fp, note)
