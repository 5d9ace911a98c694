"""Prior densities on physical parameter values, and the small syntax a study file uses for them.

A prior is a density on the *physical* value of one parameter (SI units). The sampler adds the
log-Jacobian of the optimiser transform itself (see :mod:`kinfit.estimate.sampling`), so a prior
means the same thing whatever transform the parameter uses. Bounds of the parameter truncate
every prior.

Study-file syntax
-----------------
A prior is written either as a table or as a short string::

    prior = {kind = "normal", mean = 60000, sd = 5000}
    prior = "normal(60000, 5000)"
    prior = "lognormal(1e-9, 0.5)"          # median 1e-9, sd of ln x 0.5
    prior = "lognormal(mu=-20.72, sd_log=0.5)"
    prior = "uniform"                       # flat inside the parameter's bounds (the default)
    prior = "uniform(0, 2)"
    prior = "loguniform(1e-6, 1)"           # p(x) ~ 1/x

Grammar of the string form: ``kind`` or ``kind(arg, ...)`` where each ``arg`` is a number or
``key=number``; positional arguments fill the keys in the order listed below. Values may be
unit strings (``"60 kJ/mol"``) when the caller passes a converter ``to_si``.

========== ============================== ==========================================
kind        keys (positional order)        density on x
========== ============================== ==========================================
uniform     min, max (optional)            constant on [min, max] ∩ bounds
loguniform  min, max (optional)            proportional to 1/x on [min, max] ∩ bounds
normal      mean, sd                       N(mean, sd²)
lognormal   median | mu, sd_log            ln x ~ N(mu, sd_log²), median = exp(mu)
========== ============================== ==========================================
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

from kinfit.errors import StudyError

__all__ = ["Prior", "PRIOR_KINDS", "from_spec", "prior_table"]

#: Recognised prior kinds, with the keys each accepts in positional order.
PRIOR_KINDS: dict[str, tuple[str, ...]] = {
    "uniform": ("min", "max"),
    "loguniform": ("min", "max"),
    "normal": ("mean", "sd"),
    "lognormal": ("median", "sd_log"),
}
_LN_SQRT_2PI = 0.5 * math.log(2.0 * math.pi)
_SPEC_RE = re.compile(r"^\s*([A-Za-z_]+)\s*(?:\((.*)\))?\s*$", re.DOTALL)


@dataclass(frozen=True)
class Prior:
    """A prior density on the physical value of one parameter.

    Build one with :meth:`uniform`, :meth:`loguniform`, :meth:`normal`, :meth:`lognormal` or
    :func:`from_spec`, not with the raw fields.

    Parameters
    ----------
    kind : {"uniform", "loguniform", "normal", "lognormal"}
    a, b : float
        ``uniform``/``loguniform``: lower and upper limit (``-inf``/``inf`` or ``0``/``inf``
        when open); ``normal``: mean and standard deviation; ``lognormal``: mean ``mu`` and
        standard deviation of ``ln x``. Same unit as the parameter (SI); for ``lognormal`` ``a``
        is the log of a value in SI units.

    Notes
    -----
    Densities (Gelman et al., *Bayesian Data Analysis*, 3rd ed., 2013, appendix A; from memory):

    .. math::

        \\ln p_\\mathrm{normal}(x) = -\\tfrac12 ((x-m)/s)^2 - \\ln s - \\tfrac12 \\ln 2\\pi

        \\ln p_\\mathrm{lognormal}(x) = -\\ln x -\\tfrac12 ((\\ln x-\\mu)/s)^2 - \\ln s
            - \\tfrac12 \\ln 2\\pi

    A uniform or log-uniform prior with an open limit is improper (``is_proper`` is False): its
    ``logpdf`` is 0 (or ``-ln x``) inside, ``-inf`` outside, and it cannot be drawn from.

    Examples
    --------
    >>> p = Prior.normal(60000.0, 5000.0)
    >>> round(float(p.logpdf(60000.0)), 6)
    -9.436132
    >>> str(Prior.lognormal(median=1e-9, sd_log=0.5))
    'lognormal(1e-09, 0.5)'
    """

    kind: str = "uniform"
    a: float = -math.inf
    b: float = math.inf

    def __post_init__(self) -> None:
        if self.kind not in PRIOR_KINDS:
            raise StudyError(
                f"prior kind '{self.kind}' is not recognised; use one of {list(PRIOR_KINDS)}"
            )
        a, b = float(self.a), float(self.b)
        object.__setattr__(self, "a", a)
        object.__setattr__(self, "b", b)
        if self.kind in ("uniform", "loguniform"):
            if not a < b or (self.kind == "loguniform" and a < 0):
                raise StudyError(
                    f"prior '{self.kind}' needs min < max"
                    + (" and min >= 0" if self.kind == "loguniform" else "")
                    + f", got min = {a:g}, max = {b:g}"
                )
        elif not (math.isfinite(a) and math.isfinite(b) and b > 0):
            raise StudyError(
                f"prior '{self.kind}' needs a finite location and a width > 0, got {a:g} and {b:g}"
            )

    # -- constructors ---------------------------------------------------------------------
    @classmethod
    def uniform(cls, lower: float = -math.inf, upper: float = math.inf) -> Prior:
        """Flat density on ``[lower, upper]`` (intersected with the parameter's bounds)."""
        return cls("uniform", lower, upper)

    @classmethod
    def loguniform(cls, lower: float = 0.0, upper: float = math.inf) -> Prior:
        """Density proportional to ``1/x`` on ``[lower, upper]``, ``lower >= 0``."""
        return cls("loguniform", lower, upper)

    @classmethod
    def normal(cls, mean: float, sd: float) -> Prior:
        """Normal density with the given mean and standard deviation (SI units)."""
        return cls("normal", mean, sd)

    @classmethod
    def lognormal(
        cls, median: float | None = None, sd_log: float = 1.0, *, mu: float | None = None
    ) -> Prior:
        """Log-normal density: ``ln x ~ N(mu, sd_log^2)``; give ``median = exp(mu)`` or ``mu``."""
        if (median is None) == (mu is None):
            raise StudyError("a lognormal prior needs exactly one of 'median' or 'mu'")
        if median is not None:
            if not median > 0:
                raise StudyError(f"a lognormal prior needs median > 0, got {median:g}")
            mu = math.log(median)
        return cls("lognormal", float(mu), sd_log)  # type: ignore[arg-type]

    # -- properties -----------------------------------------------------------------------
    @property
    def is_proper(self) -> bool:
        """Whether the density integrates to one (a uniform with an open limit does not)."""
        if self.kind in ("uniform", "loguniform"):
            return (
                math.isfinite(self.a)
                and math.isfinite(self.b)
                and self.a > (0.0 if self.kind == "loguniform" else -math.inf)
            )
        return True

    @property
    def support(self) -> tuple[float, float]:
        """Interval outside which the density is zero (before the parameter's bounds)."""
        if self.kind in ("uniform", "loguniform"):
            return self.a, self.b
        if self.kind == "lognormal":
            return 0.0, math.inf
        return -math.inf, math.inf

    # -- densities --------------------------------------------------------------------------
    def logpdf(self, x: ArrayLike) -> NDArray[np.float64]:
        """Log density at physical values ``x`` (any shape); ``-inf`` outside the support.

        Parameters
        ----------
        x : array_like
            Physical values, SI units.

        Returns
        -------
        ndarray
            Same shape as ``x``. Improper priors return their unnormalised log density.
        """
        x = np.asarray(x, dtype=float)
        lo, hi = self.support
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            if self.kind == "uniform":
                inside = (x >= lo) & (x <= hi)
                val = -math.log(hi - lo) if self.is_proper else 0.0
                out = np.where(inside, val, -np.inf)
            elif self.kind == "loguniform":
                inside = (x >= lo) & (x <= hi) & (x > 0)
                norm = math.log(math.log(hi / lo)) if self.is_proper else 0.0
                out = np.where(inside, -np.log(np.where(inside, x, 1.0)) - norm, -np.inf)
            elif self.kind == "normal":
                z = (x - self.a) / self.b
                out = -0.5 * z * z - math.log(self.b) - _LN_SQRT_2PI
            else:
                pos = x > 0
                lx = np.log(np.where(pos, x, 1.0))
                z = (lx - self.a) / self.b
                out = np.where(pos, -lx - 0.5 * z * z - math.log(self.b) - _LN_SQRT_2PI, -np.inf)
        out = np.where(np.isnan(out), -np.inf, out)
        return out

    # -- drawing ---------------------------------------------------------------------------
    def _limits(self, lower: float, upper: float) -> tuple[float, float]:
        lo, hi = self.support
        return max(lo, lower), min(hi, upper)

    def rvs(
        self,
        rng: np.random.Generator,
        size: int | tuple[int, ...],
        *,
        lower: float = -math.inf,
        upper: float = math.inf,
    ) -> NDArray[np.float64]:
        """Draw from the prior truncated to ``[lower, upper]`` (inverse-CDF sampling).

        Parameters
        ----------
        rng : numpy.random.Generator
        size : int or tuple of int
        lower, upper : float
            The parameter's bounds, SI units.

        Raises
        ------
        StudyError
            If the truncated prior is improper or holds no probability.
        """
        lo, hi = self._limits(lower, upper)
        if not lo < hi:
            raise StudyError(f"prior {self} holds no probability inside [{lower:g}, {upper:g}]")
        u = rng.uniform(size=size)
        if self.kind == "uniform":
            if not (math.isfinite(lo) and math.isfinite(hi)):
                raise StudyError(f"cannot draw from the improper prior {self} on [{lo:g}, {hi:g}]")
            return lo + u * (hi - lo)
        if self.kind == "loguniform":
            if not (math.isfinite(hi) and lo > 0):
                raise StudyError(f"cannot draw from the improper prior {self} on [{lo:g}, {hi:g}]")
            return np.exp(math.log(lo) + u * (math.log(hi) - math.log(lo)))
        if self.kind == "normal":
            a, b = self.a, self.b
            tlo, thi = lo, hi
        else:
            a, b = self.a, self.b
            tlo = math.log(lo) if lo > 0 else -math.inf
            thi = math.log(hi) if math.isfinite(hi) else math.inf
        c_lo = special.ndtr((tlo - a) / b)
        c_hi = special.ndtr((thi - a) / b)
        if not c_hi > c_lo:
            raise StudyError(f"prior {self} holds no probability inside [{lower:g}, {upper:g}]")
        z = a + b * special.ndtri(c_lo + u * (c_hi - c_lo))
        return z if self.kind == "normal" else np.exp(z)

    # -- text forms ------------------------------------------------------------------------
    def to_dict(self) -> dict[str, str | float]:
        """Plain-type form for JSON, using the study-file keys (``inf`` limits left out)."""
        if self.kind in ("uniform", "loguniform"):
            d: dict[str, str | float] = {"kind": self.kind}
            if math.isfinite(self.a) and not (self.kind == "loguniform" and self.a == 0):
                d["min"] = self.a
            if math.isfinite(self.b):
                d["max"] = self.b
            return d
        if self.kind == "normal":
            return {"kind": "normal", "mean": self.a, "sd": self.b}
        return {"kind": "lognormal", "median": math.exp(self.a), "sd_log": self.b}

    def __str__(self) -> str:
        d = self.to_dict()
        args = [f"{float(v):.12g}" for k, v in d.items() if k != "kind"]
        if self.kind in ("uniform", "loguniform") and "max" in d and "min" not in d:
            args = [f"max={float(d['max']):.12g}"]
        return f"{self.kind}({', '.join(args)})" if args else str(self.kind)


def _number(value: object, key: str, name: str, to_si: Callable[[str], float] | None) -> float:
    """One prior argument as a float in SI units."""
    if isinstance(value, bool):
        raise StudyError(f"parameter '{name}': prior key '{key}' must be a number, got {value!r}")
    if isinstance(value, int | float):
        return float(value)
    if isinstance(value, str):
        text = value.strip()
        try:
            return float(text)
        except ValueError:
            if to_si is None:
                raise StudyError(
                    f"parameter '{name}': prior key '{key}' is '{text}', not a number; write "
                    "the value in SI units or pass a unit converter"
                ) from None
            try:
                return float(to_si(text))
            except StudyError:
                raise
            except Exception as exc:  # converter failed: name the key and the text
                raise StudyError(
                    f"parameter '{name}': prior key '{key}' = '{text}' could not be converted "
                    f"to SI units ({exc})"
                ) from exc
    raise StudyError(
        f"parameter '{name}': prior key '{key}' must be a number, got {type(value).__name__}"
    )


def _parse_string(spec: str, name: str) -> tuple[str, dict[str, object]]:
    m = _SPEC_RE.match(spec)
    if m is None:
        raise StudyError(
            f"parameter '{name}': prior '{spec}' is not of the form kind(arg, ...), for example "
            "'normal(60000, 5000)' or 'lognormal(1e-9, 0.5)'"
        )
    kind = m.group(1).lower()
    _check_kind(kind, name)
    keys = PRIOR_KINDS[kind]
    args: dict[str, object] = {}
    body = (m.group(2) or "").strip()
    if body:
        positional = True
        for i, token in enumerate(t.strip() for t in body.split(",")):
            if "=" in token:
                key, _, val = token.partition("=")
                args[key.strip().lower()] = val.strip()
                positional = False
            elif not positional:
                raise StudyError(
                    f"parameter '{name}': prior '{spec}' has a positional argument after a "
                    "keyword argument; put positional ones first"
                )
            elif i >= len(keys):
                raise StudyError(
                    f"parameter '{name}': prior '{kind}' takes at most {len(keys)} arguments "
                    f"({', '.join(keys)}), got {len(body.split(','))}"
                )
            else:
                args[keys[i]] = token
    return kind, args


def _check_kind(kind: object, name: str) -> None:
    if kind not in PRIOR_KINDS:
        raise StudyError(
            f"parameter '{name}': prior kind {kind!r} is not recognised; use one of "
            f"{list(PRIOR_KINDS)}"
        )


def from_spec(
    spec: str | Mapping[str, object] | Prior | None,
    name: str,
    *,
    to_si: Callable[[str], float] | None = None,
) -> Prior:
    """Build a :class:`Prior` from a study-file entry.

    Parameters
    ----------
    spec : str, mapping, Prior or None
        ``"normal(60000, 5000)"``, ``{kind = "normal", mean = 60000, sd = 5000}``, an existing
        prior (returned as is) or None (the default flat prior). See the module docstring for
        the syntax.
    name : str
        Parameter name, used in error messages.
    to_si : callable, optional
        Converts a quantity string such as ``"60 kJ/mol"`` to a float in SI units.

    Returns
    -------
    Prior

    Raises
    ------
    StudyError
        Unknown kind (the message lists the valid ones), unknown or missing keys, non-positive
        widths, ``min >= max``, a non-positive lognormal median.

    Examples
    --------
    >>> from_spec({"kind": "normal", "mean": 60000, "sd": 5000}, "activation_energy")
    Prior(kind='normal', a=60000.0, b=5000.0)
    >>> from_spec("lognormal(1e-9, 0.5)", "effective_diffusivity").support
    (0.0, inf)
    """
    if spec is None:
        return Prior.uniform()
    if isinstance(spec, Prior):
        return spec
    if isinstance(spec, str):
        kind, raw = _parse_string(spec, name)
    elif isinstance(spec, Mapping):
        raw = {str(k).lower(): v for k, v in spec.items()}
        if "kind" not in raw:
            raise StudyError(
                f"parameter '{name}': prior table has no 'kind'; add kind = one of "
                f"{list(PRIOR_KINDS)}"
            )
        raw_kind = raw.pop("kind")
        _check_kind(raw_kind.lower() if isinstance(raw_kind, str) else raw_kind, name)
        kind = str(raw_kind).lower()
    else:
        raise StudyError(
            f"parameter '{name}': prior must be a string or a table, got {type(spec).__name__}"
        )
    allowed = PRIOR_KINDS[kind] + (("mu",) if kind == "lognormal" else ())
    unknown = sorted(set(raw) - set(allowed))
    if unknown:
        raise StudyError(
            f"parameter '{name}': prior '{kind}' does not take {unknown}; its keys are "
            f"{list(allowed)}"
        )
    vals = {k: _number(v, k, name, to_si) for k, v in raw.items()}
    for k, v in vals.items():
        if math.isnan(v) or (math.isinf(v) and kind not in ("uniform", "loguniform")):
            raise StudyError(f"parameter '{name}': prior key '{k}' must be finite, got {v}")

    def need(key: str) -> float:
        if key not in vals:
            raise StudyError(
                f"parameter '{name}': prior '{kind}' needs '{key}'; give "
                f"{kind}({', '.join(PRIOR_KINDS[kind])})"
            )
        return vals[key]

    if kind in ("uniform", "loguniform"):
        lo = vals.get("min", 0.0 if kind == "loguniform" else -math.inf)
        hi = vals.get("max", math.inf)
        if kind == "loguniform" and lo < 0:
            raise StudyError(f"parameter '{name}': a loguniform prior needs min >= 0, got {lo:g}")
        if not lo < hi:
            raise StudyError(
                f"parameter '{name}': prior '{kind}' needs min < max, got min = {lo:g}, "
                f"max = {hi:g}; swap or widen them"
            )
        return Prior(kind, lo, hi)
    if kind == "normal":
        mean, sd = need("mean"), need("sd")
        if not sd > 0:
            raise StudyError(f"parameter '{name}': prior 'normal' needs sd > 0, got {sd:g}")
        return Prior.normal(mean, sd)
    sd_log = need("sd_log")
    if not sd_log > 0:
        raise StudyError(f"parameter '{name}': prior 'lognormal' needs sd_log > 0, got {sd_log:g}")
    if ("median" in vals) == ("mu" in vals):
        raise StudyError(
            f"parameter '{name}': prior 'lognormal' needs exactly one of 'median' (> 0) or "
            "'mu' (mean of ln x)"
        )
    if "median" in vals:
        if not vals["median"] > 0:
            raise StudyError(
                f"parameter '{name}': prior 'lognormal' needs median > 0, got {vals['median']:g}"
            )
        return Prior.lognormal(median=vals["median"], sd_log=sd_log)
    return Prior.lognormal(mu=vals["mu"], sd_log=sd_log)


def prior_table(
    names: tuple[str, ...] | list[str],
    priors: Mapping[str, str | Mapping[str, object] | Prior | None] | None,
    *,
    default: Mapping[str, Prior] | None = None,
    to_si: Callable[[str], float] | None = None,
) -> tuple[Prior, ...]:
    """One :class:`Prior` per name, in the order of ``names``.

    Parameters
    ----------
    names : sequence of str
        Every parameter that may carry a prior.
    priors : mapping, optional
        ``{name: spec}``; names not given get ``default[name]`` or the flat uniform prior.
    default : mapping, optional
        Per-name defaults (the sampler uses a log-uniform prior for error scales).
    to_si : callable, optional
        Unit converter passed to :func:`from_spec`.

    Raises
    ------
    StudyError
        A prior names a parameter that is not in ``names`` (the message lists them).
    """
    priors = {} if priors is None else dict(priors)
    unknown = sorted(set(priors) - set(names))
    if unknown:
        raise StudyError(
            f"prior given for {unknown}, which {'is' if len(unknown) == 1 else 'are'} not a "
            f"varying parameter; priors may be set on {list(names)}"
        )
    default = {} if default is None else dict(default)
    return tuple(
        from_spec(priors[n], n, to_si=to_si) if n in priors else default.get(n, Prior.uniform())
        for n in names
    )
