"""Reader and hand-coded models for the NIST StRD nonlinear regression datasets.

Source: NIST Statistical Reference Datasets, nonlinear regression (Statistical Engineering
Division, ITL; https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml), 27 ``.dat`` files kept
in the repository at ``tests/data/nist-strd`` (public domain; provenance in its README). Each file states its model formula; every model below is keyed by that
formula (spaces removed, ``[]`` read as ``()``), vectorised over parameter rows (m, p) -> (m, n),
with its analytic Jacobian (p,) -> (n, p). Accuracy is scored by the log relative error of
McCullough (1998), *The American Statistician* 52(4), 358-366.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

__all__ = ["NistDataset", "nist_dir", "load", "MODELS", "lre", "DATASETS"]

Array = NDArray[np.float64]
PI = 3.141592653589793238462643383279

DATASETS = (
    "Misra1a", "Chwirut2", "Chwirut1", "Lanczos3", "Gauss1", "Gauss2", "DanWood", "Misra1b",
    "Kirby2", "Hahn1", "Nelson", "MGH17", "Lanczos1", "Lanczos2", "Gauss3", "Misra1c", "Misra1d",
    "Roszman1", "ENSO", "MGH09", "Thurber", "BoxBOD", "Rat42", "MGH10", "Eckerle4", "Rat43",
    "Bennett5",
)  # fmt: skip


def nist_dir() -> Path:
    """``tests/data/nist-strd`` of this repository (a missing file fails its test, never skips)."""
    return Path(__file__).resolve().parent / "data" / "nist-strd"


@dataclass(frozen=True)
class NistDataset:
    """One parsed StRD file."""

    name: str
    level: str  # "lower", "average" or "higher"
    formula: str  # normalised model formula as printed in the file
    start1: Array
    start2: Array
    certified: Array
    certified_se: Array
    rss: float
    rsd: float
    x: Array  # (n, k) predictors
    y: Array  # (n,) response (log of the data for Nelson, whose model is for log y)

    @property
    def n(self) -> int:
        return int(self.y.size)

    @property
    def p(self) -> int:
        return int(self.certified.size)


def _ranges(text: str) -> tuple[tuple[int, int], tuple[int, int], tuple[int, int]]:
    s = re.search(r"Starting Values\s*\(lines\s+(\d+)\s+to\s+(\d+)\)", text, re.I)
    c = re.search(r"Certified Values\s*\(lines\s+(\d+)\s+to\s+(\d+)\)", text, re.I)
    d = re.search(r"Data\s*\(lines\s+(\d+)\s+to\s+(\d+)\)", text, re.I)
    if not (s and c and d):
        raise ValueError("line ranges not found in the header")
    return (
        (int(s.group(1)), int(s.group(2))),
        (int(c.group(1)), int(c.group(2))),
        (int(d.group(1)), int(d.group(2))),
    )


def normalise_formula(text: str) -> str:
    """Spaces removed, ``[]`` as ``()``, the ``+ e`` error term and a ``pi = ...`` line dropped."""
    t = text.replace(" ", "").replace("[", "(").replace("]", ")")
    t = re.sub(r"^pi=[0-9.E+-]+", "", t)
    return t.removesuffix("+e")


def load(name: str, folder: Path) -> NistDataset:
    """Parse ``folder/name.dat`` using the line ranges stated in its own header."""
    text = (folder / f"{name}.dat").read_text().replace("\r", "")
    lines = text.split("\n")
    (s0, s1), (_, c1), (d0, d1) = _ranges(text)
    par = [ln.split("=")[1].split() for ln in lines[s0 - 1 : s1]]
    vals = np.array([[float(v) for v in row] for row in par])
    block = {ln.split(":")[0].strip(): ln.split()[-1] for ln in lines[s1:c1] if ":" in ln}
    level = re.search(r"(Lower|Average|Higher) Level of Difficulty", text).group(1).lower()
    i = next(k for k, ln in enumerate(lines) if ln.startswith("Model:"))
    j = next(k for k in range(i, len(lines)) if re.search(r"Starting\s+values", lines[k], re.I))
    k = next(q for q in range(i, j) if "Parameters" in lines[q])
    formula = normalise_formula("".join(lines[k + 1 : j]))
    data = np.array([[float(v) for v in ln.split()] for ln in lines[d0 - 1 : d1]])
    y, x = data[:, 0], data[:, 1:]
    if name == "Nelson":  # the stated model is for log[y]
        y = np.log(y)
    return NistDataset(
        name=name,
        level=level,
        formula=formula,
        start1=vals[:, 0],
        start2=vals[:, 1],
        certified=vals[:, 2],
        certified_se=vals[:, 3],
        rss=float(block["Residual Sum of Squares"]),
        rsd=float(block["Residual Standard Deviation"]),
        x=x,
        y=y,
    )


def lre(value: Array, certified: Array, cap: float = 11.0) -> Array:
    """Log relative error, ``-log10(|x - c| / |c|)``, capped at 11 digits (McCullough 1998)."""
    value = np.asarray(value, dtype=float)
    c = np.asarray(certified, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        e = np.where(c != 0, np.abs(value - c) / np.abs(c), np.abs(value))
        out = -np.log10(e)
    out = np.where(np.isfinite(value), out, 0.0)
    return np.clip(np.nan_to_num(out, nan=0.0, posinf=cap), 0.0, cap)


# ------------------------------------------------------------------------------------------
# models: f(B, X) with B (m, p) -> (m, n); jac(b, X) with b (p,) -> (n, p)
# ------------------------------------------------------------------------------------------
Model = tuple[Callable[[Array, Array], Array], Callable[[Array, Array], Array]]


def _cols(b: Array) -> list[Array]:
    b = np.atleast_2d(b)
    return [b[:, [i]] for i in range(b.shape[1])]


def _exp_rise(B: Array, X: Array) -> Array:
    b1, b2 = _cols(B)
    return b1 * (1 - np.exp(-b2 * X[:, 0]))


def _exp_rise_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    e = np.exp(-b[1] * x)
    return np.column_stack([1 - e, b[0] * x * e])


def _chwirut(B: Array, X: Array) -> Array:
    b1, b2, b3 = _cols(B)
    x = X[:, 0]
    return np.exp(-b1 * x) / (b2 + b3 * x)


def _chwirut_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    e, d = np.exp(-b[0] * x), b[1] + b[2] * x
    return np.column_stack([-x * e / d, -e / d**2, -x * e / d**2])


def _lanczos(B: Array, X: Array) -> Array:
    b1, b2, b3, b4, b5, b6 = _cols(B)
    x = X[:, 0]
    return b1 * np.exp(-b2 * x) + b3 * np.exp(-b4 * x) + b5 * np.exp(-b6 * x)


def _lanczos_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    cols = []
    for a, k in ((b[0], b[1]), (b[2], b[3]), (b[4], b[5])):
        e = np.exp(-k * x)
        cols += [e, -a * x * e]
    return np.column_stack(cols)


def _gauss(B: Array, X: Array) -> Array:
    b1, b2, b3, b4, b5, b6, b7, b8 = _cols(B)
    x = X[:, 0]
    return (
        b1 * np.exp(-b2 * x)
        + b3 * np.exp(-((x - b4) ** 2) / b5**2)
        + b6 * np.exp(-((x - b7) ** 2) / b8**2)
    )


def _gauss_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    e0 = np.exp(-b[1] * x)
    g1 = np.exp(-((x - b[3]) ** 2) / b[4] ** 2)
    g2 = np.exp(-((x - b[6]) ** 2) / b[7] ** 2)
    return np.column_stack(
        [
            e0,
            -b[0] * x * e0,
            g1,
            b[2] * g1 * 2 * (x - b[3]) / b[4] ** 2,
            b[2] * g1 * 2 * (x - b[3]) ** 2 / b[4] ** 3,
            g2,
            b[5] * g2 * 2 * (x - b[6]) / b[7] ** 2,
            b[5] * g2 * 2 * (x - b[6]) ** 2 / b[7] ** 3,
        ]
    )


def _danwood(B: Array, X: Array) -> Array:
    b1, b2 = _cols(B)
    return b1 * X[:, 0] ** b2


def _danwood_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    return np.column_stack([x ** b[1], b[0] * x ** b[1] * np.log(x)])


def _misra1b(B: Array, X: Array) -> Array:
    b1, b2 = _cols(B)
    return b1 * (1 - (1 + b2 * X[:, 0] / 2) ** (-2))


def _misra1b_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    q = 1 + b[1] * x / 2
    return np.column_stack([1 - q**-2, b[0] * x * q**-3])


def _rational(num: int, den: int) -> Model:
    """(b1 + b2 x + ... ) / (1 + c1 x + ...) with ``num`` numerator and ``den`` denominator terms."""

    def f(B: Array, X: Array) -> Array:
        b = _cols(B)
        x = X[:, 0]
        top = sum(b[i] * x**i for i in range(num))
        bot = 1 + sum(b[num + i] * x ** (i + 1) for i in range(den))
        return top / bot

    def j(b: Array, X: Array) -> Array:
        x = X[:, 0]
        top = sum(b[i] * x**i for i in range(num))
        bot = 1 + sum(b[num + i] * x ** (i + 1) for i in range(den))
        cols = [x**i / bot for i in range(num)]
        cols += [-top * x ** (i + 1) / bot**2 for i in range(den)]
        return np.column_stack(cols)

    return f, j


def _nelson(B: Array, X: Array) -> Array:
    b1, b2, b3 = _cols(B)
    return b1 - b2 * X[:, 0] * np.exp(-b3 * X[:, 1])


def _nelson_j(b: Array, X: Array) -> Array:
    x1, x2 = X[:, 0], X[:, 1]
    e = np.exp(-b[2] * x2)
    return np.column_stack([np.ones_like(x1), -x1 * e, b[1] * x1 * x2 * e])


def _mgh17(B: Array, X: Array) -> Array:
    b1, b2, b3, b4, b5 = _cols(B)
    x = X[:, 0]
    return b1 + b2 * np.exp(-x * b4) + b3 * np.exp(-x * b5)


def _mgh17_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    e4, e5 = np.exp(-x * b[3]), np.exp(-x * b[4])
    return np.column_stack([np.ones_like(x), e4, e5, -b[1] * x * e4, -b[2] * x * e5])


def _misra1c(B: Array, X: Array) -> Array:
    b1, b2 = _cols(B)
    return b1 * (1 - (1 + 2 * b2 * X[:, 0]) ** (-0.5))


def _misra1c_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    q = 1 + 2 * b[1] * x
    return np.column_stack([1 - q**-0.5, b[0] * x * q**-1.5])


def _misra1d(B: Array, X: Array) -> Array:
    b1, b2 = _cols(B)
    x = X[:, 0]
    return b1 * b2 * x * (1 + b2 * x) ** (-1)


def _misra1d_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    q = 1 + b[1] * x
    return np.column_stack([b[1] * x / q, b[0] * x / q**2])


def _roszman(B: Array, X: Array) -> Array:
    b1, b2, b3, b4 = _cols(B)
    x = X[:, 0]
    return b1 - b2 * x - np.arctan(b3 / (x - b4)) / PI


def _roszman_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    d = x - b[3]
    q = d**2 + b[2] ** 2
    return np.column_stack([np.ones_like(x), -x, -d / q / PI, -b[2] / q / PI])


def _enso(B: Array, X: Array) -> Array:
    b1, b2, b3, b4, b5, b6, b7, b8, b9 = _cols(B)
    x = X[:, 0]
    w = 2 * PI * x
    return (
        b1
        + b2 * np.cos(w / 12)
        + b3 * np.sin(w / 12)
        + b5 * np.cos(w / b4)
        + b6 * np.sin(w / b4)
        + b8 * np.cos(w / b7)
        + b9 * np.sin(w / b7)
    )


def _enso_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    w = 2 * PI * x
    c4, s4, c7, s7 = np.cos(w / b[3]), np.sin(w / b[3]), np.cos(w / b[6]), np.sin(w / b[6])
    d4 = (b[4] * s4 - b[5] * c4) * w / b[3] ** 2
    d7 = (b[7] * s7 - b[8] * c7) * w / b[6] ** 2
    return np.column_stack(
        [np.ones_like(x), np.cos(w / 12), np.sin(w / 12), d4, c4, s4, d7, c7, s7]
    )


def _mgh09(B: Array, X: Array) -> Array:
    b1, b2, b3, b4 = _cols(B)
    x = X[:, 0]
    return b1 * (x**2 + x * b2) / (x**2 + x * b3 + b4)


def _mgh09_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    top, bot = x**2 + x * b[1], x**2 + x * b[2] + b[3]
    return np.column_stack(
        [top / bot, b[0] * x / bot, -b[0] * top * x / bot**2, -b[0] * top / bot**2]
    )


def _rat42(B: Array, X: Array) -> Array:
    b1, b2, b3 = _cols(B)
    return b1 / (1 + np.exp(b2 - b3 * X[:, 0]))


def _rat42_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    e = np.exp(b[1] - b[2] * x)
    q = 1 + e
    return np.column_stack([1 / q, -b[0] * e / q**2, b[0] * x * e / q**2])


def _mgh10(B: Array, X: Array) -> Array:
    b1, b2, b3 = _cols(B)
    return b1 * np.exp(b2 / (X[:, 0] + b3))


def _mgh10_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    e = np.exp(b[1] / (x + b[2]))
    return np.column_stack([e, b[0] * e / (x + b[2]), -b[0] * e * b[1] / (x + b[2]) ** 2])


def _eckerle4(B: Array, X: Array) -> Array:
    b1, b2, b3 = _cols(B)
    return (b1 / b2) * np.exp(-0.5 * ((X[:, 0] - b3) / b2) ** 2)


def _eckerle4_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    z = (x - b[2]) / b[1]
    g = np.exp(-0.5 * z**2)
    f = b[0] / b[1] * g
    return np.column_stack([g / b[1], f * (z**2 - 1) / b[1], f * z / b[1]])


def _rat43(B: Array, X: Array) -> Array:
    b1, b2, b3, b4 = _cols(B)
    return b1 / ((1 + np.exp(b2 - b3 * X[:, 0])) ** (1 / b4))


def _rat43_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    e = np.exp(b[1] - b[2] * x)
    q = 1 + e
    f = b[0] * q ** (-1 / b[3])
    return np.column_stack(
        [f / b[0], -f * e / (b[3] * q), f * x * e / (b[3] * q), f * np.log(q) / b[3] ** 2]
    )


def _bennett5(B: Array, X: Array) -> Array:
    b1, b2, b3 = _cols(B)
    return b1 * (b2 + X[:, 0]) ** (-1 / b3)


def _bennett5_j(b: Array, X: Array) -> Array:
    x = X[:, 0]
    q = b[1] + x
    f = b[0] * q ** (-1 / b[2])
    return np.column_stack([f / b[0], -f / (b[2] * q), f * np.log(q) / b[2] ** 2])


#: formula as printed in the files (normalised) -> (vectorised model, analytic Jacobian)
MODELS: dict[str, Model] = {
    "y=b1*(1-exp(-b2*x))": (_exp_rise, _exp_rise_j),
    "y=exp(-b1*x)/(b2+b3*x)": (_chwirut, _chwirut_j),
    "y=b1*exp(-b2*x)+b3*exp(-b4*x)+b5*exp(-b6*x)": (_lanczos, _lanczos_j),
    "y=b1*exp(-b2*x)+b3*exp(-(x-b4)**2/b5**2)+b6*exp(-(x-b7)**2/b8**2)": (_gauss, _gauss_j),
    "y=b1*x**b2": (_danwood, _danwood_j),
    "y=b1*(1-(1+b2*x/2)**(-2))": (_misra1b, _misra1b_j),
    "y=(b1+b2*x+b3*x**2)/(1+b4*x+b5*x**2)": _rational(3, 2),
    "y=(b1+b2*x+b3*x**2+b4*x**3)/(1+b5*x+b6*x**2+b7*x**3)": _rational(4, 3),
    "log(y)=b1-b2*x1*exp(-b3*x2)": (_nelson, _nelson_j),
    "y=b1+b2*exp(-x*b4)+b3*exp(-x*b5)": (_mgh17, _mgh17_j),
    "y=b1*(1-(1+2*b2*x)**(-.5))": (_misra1c, _misra1c_j),
    "y=b1*b2*x*((1+b2*x)**(-1))": (_misra1d, _misra1d_j),
    "y=b1-b2*x-arctan(b3/(x-b4))/pi": (_roszman, _roszman_j),
    (
        "y=b1+b2*cos(2*pi*x/12)+b3*sin(2*pi*x/12)+b5*cos(2*pi*x/b4)+b6*sin(2*pi*x/b4)"
        "+b8*cos(2*pi*x/b7)+b9*sin(2*pi*x/b7)"
    ): (_enso, _enso_j),
    "y=b1*(x**2+x*b2)/(x**2+x*b3+b4)": (_mgh09, _mgh09_j),
    "y=b1/(1+exp(b2-b3*x))": (_rat42, _rat42_j),
    "y=b1*exp(b2/(x+b3))": (_mgh10, _mgh10_j),
    "y=(b1/b2)*exp(-0.5*((x-b3)/b2)**2)": (_eckerle4, _eckerle4_j),
    "y=b1/((1+exp(b2-b3*x))**(1/b4))": (_rat43, _rat43_j),
    "y=b1*(b2+x)**(-1/b3)": (_bennett5, _bennett5_j),
}
