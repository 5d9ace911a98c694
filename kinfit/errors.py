"""Errors and warnings of kinfit: one small hierarchy, each carrying the data that explain it."""

from __future__ import annotations

import difflib
from collections.abc import Iterable

__all__ = [
    "KinfitError",
    "StudyError",
    "ModelError",
    "SolverError",
    "ConvergenceWarning",
    "IdentifiabilityWarning",
    "RegimeWarning",
    "PlausibilityWarning",
    "did_you_mean",
]


class KinfitError(Exception):
    """Base class of every error kinfit raises on purpose.

    Examples
    --------
    >>> try:
    ...     raise KinfitError("something went wrong")
    ... except KinfitError as exc:
    ...     str(exc)
    'something went wrong'
    """


class StudyError(KinfitError, ValueError):
    """Bad input: a study file, table, option or parameter that cannot be used as given.

    The message names the culprit (file, row, column or run), what was expected, what was found
    and the fix. The command line maps it to exit code 2 without a traceback.

    Attributes
    ----------
    file, row, column, run : str or int or None
        Where the problem is, when known. ``row`` is the line of the file as an editor or a
        spreadsheet shows it, the header being row 1.

    Examples
    --------
    >>> err = StudyError("must be positive", file="runs.csv", row=3, column="temperature [K]")
    >>> str(err)
    "runs.csv, row 3, column 'temperature [K]': must be positive"
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        row: int | None = None,
        column: str | None = None,
        run: str | None = None,
    ) -> None:
        self.file, self.row, self.column, self.run = file, row, column, run
        self.detail = message
        where = []
        if file is not None:
            where.append(str(file))
        if run is not None:
            where.append(f"run '{run}'")
        if row is not None:
            where.append(f"row {row}")
        if column is not None:
            where.append(f"column '{column}'")
        text = f"{', '.join(where)}: {message}" if where else message
        super().__init__(text)


class ModelError(KinfitError, ValueError):
    """A model or parameter value that the physics cannot accept (negative diffusivity, an order
    outside the supported range, a forbidden token in a rate expression).

    Examples
    --------
    >>> str(ModelError("parameter 'effective_diffusivity' must be > 0, got -1e-09"))
    "parameter 'effective_diffusivity' must be > 0, got -1e-09"
    """


class SolverError(KinfitError, RuntimeError):
    """A numerical solve (surface concentration, pellet profile, integrator) failed.

    Attributes
    ----------
    reason : str
        What failed and where, in words a user can act on.

    Examples
    --------
    >>> str(SolverError("surface concentration did not converge at 3 points"))
    'surface concentration did not converge at 3 points'
    """

    def __init__(self, reason: str) -> None:
        self.reason = reason
        super().__init__(reason)


class ConvergenceWarning(UserWarning):
    """An optimiser or sampler stopped without meeting its convergence test.

    Examples
    --------
    >>> import warnings
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     warnings.warn("least squares: max evaluations reached", ConvergenceWarning)
    >>> caught[0].category.__name__
    'ConvergenceWarning'
    """


class IdentifiabilityWarning(UserWarning):
    """The data cannot pin a parameter or a combination of parameters down.

    Examples
    --------
    >>> IdentifiabilityWarning("only one stirrer speed: agitation_exponent is not identified").args[0]
    'only one stirrer speed: agitation_exponent is not identified'
    """


class RegimeWarning(UserWarning):
    """A run or a prediction lies in a transport regime where its numbers cannot be carried over.

    Examples
    --------
    >>> RegimeWarning("run R03 is film-limited").args[0]
    'run R03 is film-limited'
    """


class PlausibilityWarning(UserWarning):
    """An input value that is possible but unusual enough to be a typo or a wrong unit.

    Examples
    --------
    >>> PlausibilityWarning("particle density 12 g/cm^3 is above 10 g/cm^3").args[0]
    'particle density 12 g/cm^3 is above 10 g/cm^3'
    """


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """A hint naming the nearest valid name (difflib's ratio >= 0.6), or "".

    Examples
    --------
    >>> did_you_mean("rate_lw", ["rate_law", "reference_temperature"])
    " (did you mean 'rate_law'?)"
    >>> did_you_mean("colour", ["rate_law"])
    ''
    """
    close = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1)
    return f" (did you mean '{close[0]}'?)" if close else ""
