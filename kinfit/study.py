"""Study input: a TOML study file and its tables (CSV or XLSX, long form, units in headers),
validated at the boundary and converted to SI into one immutable :class:`Study` of :class:`Run`
records, the one object the rest of kinfit receives.
"""

from __future__ import annotations

import hashlib
import io
import tomllib
import zipfile
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from kinfit.errors import StudyError, did_you_mean
from kinfit.parameters import ParameterTable, parameter_table_from_toml
from kinfit.plausibility import check_density, check_runs, uninformative_runs
from kinfit.units import parse_header, parse_quantity, printable, to_si

__all__ = ["Run", "Study", "load_study", "FACTORS", "comparison_sets", "ComparisonSet",
           "read_table", "table_line"]

#: runs-table columns: name -> (quantity kind, required, must be strictly positive)
RUN_COLUMNS: dict[str, tuple[str, bool, bool]] = {
    "temperature": ("temperature", True, True),
    "stirrer_speed": ("speed", True, False),
    "particle_diameter": ("length", True, True),
    "catalyst_loading": ("loading", True, True),
    "initial_concentration": ("concentration", True, True),
    "volume": ("volume", False, True),
}
RUN_TEXT_COLUMNS = ("run", "group", "note")
OBS_COLUMNS: dict[str, str] = {
    "time": "time",
    "concentration": "concentration",
    "conversion": "dimensionless",
    "rate": "rate_per_mass",
    "weight": "dimensionless",
    "replicate": "dimensionless",
}
#: the factors a campaign varies and that the classic transport tests compare
FACTORS = ("temperature", "stirrer_speed", "particle_diameter", "catalyst_loading",
           "initial_concentration")
GEOMETRIES = ("sphere", "cylinder", "slab")


def _frozen(a: Any) -> NDArray[np.float64]:
    arr = np.array(a, dtype=float)
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, slots=True)
class Run:
    """One experiment, all values in SI units.

    Attributes
    ----------
    id : str
    temperature : float
        K.
    stirrer_speed : float
        Revolutions per second.
    particle_diameter : float
        m.
    catalyst_loading : float
        Catalyst mass per liquid volume, kg/m^3.
    initial_concentration : float
        mol/m^3.
    times, concentrations : ndarray
        Observation times (s) and bulk concentrations (mol/m^3) of a profile campaign; empty for
        a rate campaign.
    rates : ndarray
        Observed rates per catalyst mass, mol/(kg s), of a rate campaign; empty otherwise.
    weights : ndarray
        Relative weight of each observation (default 1).
    group : str or None
        Catalyst batch or other group label.
    volume : float or None
        Liquid volume, m^3.
    note : str
    """

    id: str
    temperature: float
    stirrer_speed: float
    particle_diameter: float
    catalyst_loading: float
    initial_concentration: float
    times: NDArray[np.float64]
    concentrations: NDArray[np.float64]
    rates: NDArray[np.float64]
    weights: NDArray[np.float64]
    group: str | None = None
    volume: float | None = None
    note: str = ""

    def __repr__(self) -> str:
        """The run in the lab's units, e.g. ``Run('R01', T=40 degC, N=300 rpm, dp=10 um, w=1
        g/L, C0=0.8 mol/L, 15 points)``; the fields themselves are SI."""
        parts = [f"T={self.temperature - 273.15:.4g} degC",
                 f"N={self.stirrer_speed * 60:.4g} rpm",
                 f"dp={self.particle_diameter * 1e6:.4g} um",
                 f"w={self.catalyst_loading:.4g} g/L",
                 f"C0={self.initial_concentration / 1000:.4g} mol/L"]
        if self.group:
            parts.append(f"group={self.group!r}")
        return f"Run({self.id!r}, {', '.join(parts)}, {self.n_obs} points)"

    @property
    def n_obs(self) -> int:
        """Number of observations of the run."""
        return int(self.rates.size if self.rates.size else self.concentrations.size)

    def factor(self, name: str) -> float:
        """Value of one of :data:`FACTORS`."""
        return float(getattr(self, name))


@dataclass(frozen=True)
class Study:
    """A validated campaign with its model choices, in SI units.

    Attributes
    ----------
    path : Path
        The study file.
    name : str
    kind : {"profile", "rate"}
        Concentration-time profiles in a batch reactor, or initial/differential rates.
    runs : tuple of Run
    catalyst : dict
        ``geometry``, ``particle_density`` (kg/m^3), optional ``porosity``.
    kinetics : dict
        ``rate_law`` and its options, ``reference_temperature`` (K),
        ``reference_concentration`` (mol/m^3), and rate-law specific keys.
    film : dict
        ``model`` and its options (``reference_speed`` in rev/s, ``reference_diameter`` in m).
    pellet : dict
        ``diffusivity``: ``"direct"`` (fit ``effective_diffusivity``) or ``"tortuosity"``
        (De = porosity Dm / tortuosity).
    parameters : ParameterTable
    error_model : str
    fit : dict
        Fit options from the ``[fit]`` section (seed, multistart, ...).
    fluid : dict
        The ``[fluid]`` section (solvent name and property values, SI), for film
        correlations and the tortuosity form of the effective diffusivity.
    files : dict
        Input file path -> SHA-256 hex digest, for the manifest.
    raw : dict
        The parsed TOML, for the record.
    """

    path: Path
    name: str
    kind: str
    runs: tuple[Run, ...]
    catalyst: Mapping[str, Any]
    kinetics: Mapping[str, Any]
    film: Mapping[str, Any]
    pellet: Mapping[str, Any]
    parameters: ParameterTable
    error_model: str = "constant"
    fit: Mapping[str, Any] = field(default_factory=dict)
    fluid: Mapping[str, Any] = field(default_factory=dict)
    files: Mapping[str, str] = field(default_factory=dict)
    raw: Mapping[str, Any] = field(default_factory=dict)

    @property
    def run_ids(self) -> tuple[str, ...]:
        """Run identifiers in table order."""
        return tuple(r.id for r in self.runs)

    @property
    def n_obs(self) -> int:
        """Total number of observations."""
        return sum(r.n_obs for r in self.runs)

    def run(self, run_id: str) -> Run:
        """The run with this id."""
        for r in self.runs:
            if r.id == run_id:
                return r
        raise StudyError(f"run '{run_id}' is not in the study; runs are {list(self.run_ids)}")

    def groups(self) -> tuple[str, ...]:
        """Distinct group labels (runs without a group form the group ``"default"``)."""
        return tuple(dict.fromkeys(r.group or "default" for r in self.runs))

    def varied_factors(self, rtol: float = 0.01) -> dict[str, tuple[float, ...]]:
        """Factors taking more than one value in the campaign, with their distinct values."""
        out = {}
        for f in FACTORS:
            vals = _distinct([r.factor(f) for r in self.runs], rtol)
            if len(vals) > 1:
                out[f] = vals
        return out

    def frame(self) -> pd.DataFrame:
        """One row per run with the factors in SI units and the number of points."""
        rows = []
        for r in self.runs:
            t = r.times
            rows.append({
                "run": r.id, "temperature [K]": r.temperature,
                "stirrer_speed [1/s]": r.stirrer_speed,
                "particle_diameter [m]": r.particle_diameter,
                "catalyst_loading [kg/m^3]": r.catalyst_loading,
                "initial_concentration [mol/m^3]": r.initial_concentration,
                "group": r.group or "", "points": r.n_obs,
                "time_span [s]": float(t.max() - t.min()) if t.size else 0.0,
            })
        return pd.DataFrame(rows)


def _distinct(values: list[float], rtol: float) -> tuple[float, ...]:
    out: list[float] = []
    for v in sorted(values):
        if not out or abs(v - out[-1]) > rtol * max(abs(out[-1]), 1e-300):
            out.append(v)
    return tuple(out)


@dataclass(frozen=True)
class ComparisonSet:
    """Runs that differ only in one factor (the others equal within a tolerance)."""

    factor: str
    runs: tuple[str, ...]
    values: tuple[float, ...]
    fixed: Mapping[str, float]


def comparison_sets(study: Study, factor: str, *, rtol: float = 0.01) -> list[ComparisonSet]:
    """Sets of runs that differ only in ``factor``: the classic transport tests.

    Runs are grouped by the other factors (equal within ``rtol`` relative); a group that holds
    at least two distinct values of ``factor`` is a set. Concentration-profile runs with a
    single point or with points only at t = 0 carry no rate and are kept out.
    """
    if factor not in FACTORS:
        raise StudyError(f"factor '{factor}' is not one of {list(FACTORS)}")
    others = [f for f in FACTORS if f != factor]
    sets: list[ComparisonSet] = []
    used: set[str] = set(uninformative_runs(study.runs))  # no rate information: kept out
    for r in study.runs:
        if r.id in used:
            continue
        members = [
            s for s in study.runs
            if s.id not in used and (s.group or "") == (r.group or "") and all(
                abs(s.factor(f) - r.factor(f)) <= rtol * abs(r.factor(f)) for f in others
            )
        ]
        vals = _distinct([m.factor(factor) for m in members], rtol)
        if len(vals) >= 2:
            used.update(m.id for m in members)
            sets.append(ComparisonSet(
                factor, tuple(m.id for m in members), vals, {f: r.factor(f) for f in others}
            ))
    return sets


# ----------------------------------------------------------------------------- loading
def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _is_file(path: Path) -> bool:
    """``path.is_file()`` that says False, not raises, for names the OS cannot even look up
    (too long, an embedded NUL byte)."""
    try:
        return path.is_file()
    except (OSError, ValueError):
        return False


def _read_toml(path: Path) -> dict[str, Any]:
    if not _is_file(path):
        raise StudyError(f"study file '{printable(path)}' does not exist (or is not a file); "
                         "check the path")
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise StudyError(f"{path}: not UTF-8 text ({exc.reason}); save it as UTF-8") from None
    except OSError as exc:
        raise StudyError(f"{path}: cannot read the study file ({exc.strerror}); check its "
                         "permissions") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise StudyError(f"{path}: TOML syntax error: {exc}; fix that line") from None


def _table_ref(data: Mapping[str, Any], key: str, base: Path, study: Path) -> tuple[Path, Any]:
    if key not in data:
        raise StudyError(
            f"{study}: [data] has no '{key}' entry; add {key} = \"{key}.csv\" (a path relative "
            "to the study file)"
        )
    ref = data[key]
    sheet: Any = 0
    if isinstance(ref, Mapping):
        if "file" not in ref:
            raise StudyError(f"{study}: [data].{key} needs a 'file' key")
        sheet = ref.get("sheet", 0)
        ref = ref["file"]
    if not isinstance(ref, str):
        raise StudyError(f"{study}: [data].{key} must be a file path string, got {ref!r}")
    try:
        path = (base / ref).resolve()
    except (OSError, ValueError, RuntimeError):
        path = base / ref
    if not _is_file(path):
        raise StudyError(
            f"{study}: [data].{key} names '{printable(ref)}', which does not exist or is not a "
            f"file (looked for {printable(path)}); fix the path, relative to the study file"
        )
    return path, sheet


def read_table(path: Path, sheet: Any = 0) -> pd.DataFrame:
    """A CSV or XLSX table as text cells, with ``attrs["row_lines"]`` (the file line of each
    data row, see :func:`table_line`); semicolon-separated CSVs with decimal commas are
    recognised; unreadable files raise :class:`StudyError` with the cause and the fix."""
    try:
        if path.suffix.lower() in (".xlsx", ".xlsm"):
            frame = _read_workbook(path, sheet)
        elif path.suffix.lower() in (".csv", ".txt"):
            frame = _read_csv(path)
        else:
            raise StudyError(f"{path.name}: tables must be .csv or .xlsx, got '{path.suffix}'")
    except StudyError:
        raise
    except (ValueError, OSError, pd.errors.ParserError, KeyError, zipfile.BadZipFile) as exc:
        text = " ".join(str(exc).split())  # pandas' messages end with a newline
        raise StudyError(f"{path.name}: cannot read the table ({printable(text, limit=160)}); "
                         "check the file") from None
    if frame.empty and len(frame.columns) == 0:
        raise StudyError(f"{path.name}: the table is empty; it needs a header line and rows")
    return frame


def _read_workbook(path: Path, sheet: Any) -> pd.DataFrame:
    try:
        book = pd.ExcelFile(path)
    except Exception as exc:  # noqa: BLE001 - any reader failure: not a usable workbook
        raise StudyError(
            f"{path.name}: cannot read the workbook ({type(exc).__name__}: "
            f"{printable(exc, limit=160)}); save it again as .xlsx or export it as CSV"
        ) from None
    names = [str(n) for n in book.sheet_names]
    if isinstance(sheet, str) and sheet not in names:
        raise StudyError(f"{path.name}: the workbook has no sheet '{printable(sheet)}'; its "
                         f"sheets are {names}")
    if isinstance(sheet, int) and not 0 <= sheet < len(names):
        raise StudyError(f"{path.name}: sheet number {sheet} does not exist (counting from 0); "
                         f"the workbook's sheets are {names}")
    frame = pd.read_excel(book, sheet_name=sheet, dtype=object)
    # the header is the sheet's first row; pandas keeps blank rows below it as empty rows
    frame.attrs["row_lines"] = list(range(2, len(frame) + 2))
    frame.attrs["sheets"] = names
    frame.attrs["sheet"] = names[sheet] if isinstance(sheet, int) else sheet
    return frame


def _read_csv(path: Path) -> pd.DataFrame:
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise StudyError(
            f"{path.name}, line {line}: the file is not UTF-8 text (byte 0x{raw[exc.start]:02x} "
            "cannot be read: it was probably saved as Windows-1252 or Latin-1, for example "
            "for a degree sign or a micro sign); save it again as 'CSV UTF-8', or write the "
            "units as plain ASCII (degC, um)") from None
    lines = text.splitlines()
    kept = [n for n, ln in enumerate(lines, start=1)
            if ln.strip() and not ln.lstrip().startswith("#")]
    header = lines[kept[0] - 1] if kept else ""
    sep = ";" if header.count(";") > 0 and header.count(",") == 0 else ","
    frame = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False,
                        skipinitialspace=True, comment="#", sep=sep)
    frame.attrs["row_lines"] = kept[1:]
    if sep == ";":
        frame.attrs["decimal_comma"] = True
    return frame


def table_line(frame: pd.DataFrame, i: int) -> int:
    """The file line of data row ``i`` (from 0) as an editor or a spreadsheet shows it, the
    header being line 1 (comment and blank lines of a CSV counted)."""
    lines = frame.attrs.get("row_lines")
    return int(lines[i]) if lines is not None and i < len(lines) else i + 2


def _numeric(frame: pd.DataFrame, col: str, fname: str, runs: pd.Series | None) -> np.ndarray:
    values = frame[col]
    out = np.empty(len(values))
    for i, cell in enumerate(values.tolist()):
        run = None if runs is None else str(runs.iloc[i])
        if cell is None or (isinstance(cell, float) and np.isnan(cell)) or str(cell).strip() == "":
            raise StudyError(
                "the cell is empty; fill it in or delete the row",
                file=fname, row=table_line(frame, i), column=col, run=run,
            )
        text = str(cell).strip()
        if frame.attrs.get("decimal_comma"):
            text = text.replace(",", ".")  # a semicolon-separated table writes 1,5 for 1.5
        try:
            out[i] = float(text)
        except ValueError:
            raise StudyError(
                f"'{printable(cell)}' is not a number; write a plain number (the unit goes in "
                "the header)",
                file=fname, row=table_line(frame, i), column=col, run=run,
            ) from None
        if not np.isfinite(out[i]):
            raise StudyError(
                f"'{cell}' is not a finite number", file=fname, row=table_line(frame, i), column=col, run=run
            )
    return out


def _columns(frame: pd.DataFrame, fname: str, allowed: dict[str, str],
             text_cols: tuple[str, ...]) -> dict[str, tuple[str, str | None]]:
    """Map column name -> (header text, unit) and reject unknown or duplicate columns."""
    cols: dict[str, tuple[str, str | None]] = {}
    for header in frame.columns:
        if not str(header).strip().isprintable():
            raise StudyError(f"column header '{printable(header)}' holds a non-printable "
                             "character; retype the header", file=fname)
        try:
            h = parse_header(str(header), where=fname)
        except StudyError as exc:
            sheets = frame.attrs.get("sheets") or []
            if len(sheets) > 1:
                raise StudyError(
                    f"{exc}. This is sheet '{frame.attrs.get('sheet')}' of a workbook with "
                    f"sheets {sheets}; if the table is on another sheet, name it in the study "
                    f"file: {{file = \"{fname}\", sheet = \"{sheets[1]}\"}}") from None
            raise
        if h.name in cols:
            raise StudyError(f"column '{h.name}' appears twice; keep one", file=fname)
        if h.name not in allowed and h.name not in text_cols:
            raise StudyError(
                f"unknown column '{header}'; allowed columns are "
                f"{sorted(list(allowed) + list(text_cols))}", file=fname
            )
        if h.name in allowed and allowed[h.name] != "dimensionless" and not h.unit:
            raise StudyError(
                f"column '{header}' has no unit; write it as '{h.name} [unit]'", file=fname
            )
        cols[h.name] = (str(header), h.unit)
    return cols


def _si_column(frame, cols, name, kind, fname, runs):
    header, unit = cols[name]
    raw = _numeric(frame, header, fname, runs)
    si = np.asarray(to_si(raw, unit or "", kind, where=f"{fname}, column '{header}'"))
    bad = np.flatnonzero(~np.isfinite(si))
    if bad.size:
        i = int(bad[0])
        raise StudyError(
            f"{raw[i]:g} {unit or ''} overflows once converted to SI units; correct the value or "
            "its unit", file=fname, row=table_line(frame, i), column=header,
            run=None if runs is None else str(runs.iloc[i]),
        )
    return si


def _load_runs(path: Path, sheet: Any) -> tuple[dict[str, dict[str, Any]], list[str]]:
    fname = path.name
    frame = read_table(path, sheet)
    allowed = {k: v[0] for k, v in RUN_COLUMNS.items()}
    cols = _columns(frame, fname, allowed, RUN_TEXT_COLUMNS)
    for name, (_, required, _) in RUN_COLUMNS.items():
        if required and name not in cols:
            raise StudyError(
                f"missing column '{name} [unit]'; the runs table needs run, "
                + ", ".join(f"{k} [unit]" for k, v in RUN_COLUMNS.items() if v[1]), file=fname
            )
    if "run" not in cols:
        raise StudyError("missing column 'run' (the run identifier)", file=fname)
    ids = [str(x).strip() for x in frame[cols["run"][0]].tolist()]
    for i, rid in enumerate(ids):
        if not rid or rid.lower() == "nan":
            raise StudyError("the run identifier is empty", file=fname, row=table_line(frame, i), column="run")
        if not rid.isprintable():
            raise StudyError(f"the run identifier '{printable(rid)}' holds a non-printable "
                             "character; use letters, digits and punctuation", file=fname,
                             row=table_line(frame, i), column="run")
    seen: dict[str, int] = {}
    for i, rid in enumerate(ids):
        if rid in seen:
            raise StudyError(
                f"run id '{rid}' appears twice (rows {seen[rid]} and {table_line(frame, i)}); give "
                "each run "
                "its own id", file=fname, row=table_line(frame, i), column="run", run=rid,
            )
        seen[rid] = table_line(frame, i)
    id_series = pd.Series(ids)
    values: dict[str, np.ndarray] = {}
    for name, (kind, _, positive) in RUN_COLUMNS.items():
        if name not in cols:
            continue
        v = _si_column(frame, cols, name, kind, fname, id_series)
        bad = np.nonzero(v <= 0 if positive else v < 0)[0]
        if bad.size:
            i = int(bad[0])
            raw = frame[cols[name][0]].iloc[i]
            need = "> 0" if positive else ">= 0"
            if kind == "temperature":
                need = "above absolute zero"
            raise StudyError(
                f"{name} must be {need}, got {raw} {cols[name][1] or ''}".rstrip()
                + "; correct the value or its unit",
                file=fname, row=table_line(frame, i), column=cols[name][0], run=ids[i],
            )
        values[name] = v
    runs: dict[str, dict[str, Any]] = {}
    for i, rid in enumerate(ids):
        rec: dict[str, Any] = {name: float(v[i]) for name, v in values.items()}
        for tc in ("group", "note"):
            if tc in cols:
                cell = frame[cols[tc][0]].iloc[i]
                text = "" if cell is None or str(cell) == "nan" else str(cell).strip()
                rec[tc] = text or None if tc == "group" else text
        rec["_line"] = table_line(frame, i)
        rec["_headers"] = {name: cols[name][0] for name in values}
        runs[rid] = rec
    return runs, ids


def _load_observations(path: Path, sheet: Any, runs: dict[str, dict[str, Any]],
                       tolerance: float) -> tuple[str, dict[str, dict[str, np.ndarray]]]:
    fname = path.name
    frame = read_table(path, sheet)
    cols = _columns(frame, fname, OBS_COLUMNS, ("run",))
    if "run" not in cols:
        raise StudyError("missing column 'run' (the run identifier)", file=fname)
    if "rate" in cols:
        kind = "rate"
        if "time" in cols or "concentration" in cols or "conversion" in cols:
            raise StudyError(
                "a table gives either 'rate [..]' (rate campaign) or 'time [..]' with "
                "'concentration [..]' or 'conversion [-]' (profiles), not both", file=fname
            )
    else:
        kind = "profile"
        if "time" not in cols:
            raise StudyError("missing column 'time [unit]'", file=fname)
        if ("concentration" in cols) == ("conversion" in cols):
            raise StudyError(
                "give exactly one of 'concentration [unit]' and 'conversion [-]'"
                if "concentration" in cols else
                "missing column 'concentration [unit]' (or 'conversion [-]')", file=fname
            )
    ids = [str(x).strip() for x in frame[cols["run"][0]].tolist()]
    id_series = pd.Series(ids)
    for i, rid in enumerate(ids):
        if rid not in runs:
            raise StudyError(
                f"observations name run '{printable(rid)}', which the runs table lacks; add the "
                "run or fix the id", file=fname, row=table_line(frame, i), column="run", run=printable(rid),
            )
    weights = (_si_column(frame, cols, "weight", "dimensionless", fname, id_series)
               if "weight" in cols else np.ones(len(ids)))
    if np.any(weights <= 0):
        i = int(np.nonzero(weights <= 0)[0][0])
        raise StudyError("weight must be > 0", file=fname, row=table_line(frame, i), column="weight", run=ids[i])
    rep = (_si_column(frame, cols, "replicate", "dimensionless", fname, id_series)
           if "replicate" in cols else np.zeros(len(ids)))
    out: dict[str, dict[str, np.ndarray]] = {}
    idx = np.asarray(ids)
    if kind == "rate":
        rate = _si_column(frame, cols, "rate", "rate_per_mass", fname, id_series)
        neg = np.nonzero(rate < 0)[0]
        if neg.size:
            i = int(neg[0])
            raise StudyError(f"rate must be >= 0, got {frame[cols['rate'][0]].iloc[i]}",
                             file=fname, row=table_line(frame, i), column=cols["rate"][0], run=ids[i])
        for rid in dict.fromkeys(ids):
            m = idx == rid
            out[rid] = {"rates": rate[m], "weights": weights[m]}
        return kind, out
    t = _si_column(frame, cols, "time", "time", fname, id_series)
    if "concentration" in cols:
        c = _si_column(frame, cols, "concentration", "concentration", fname, id_series)
        col = cols["concentration"][0]
    else:
        x = _si_column(frame, cols, "conversion", "dimensionless", fname, id_series)
        col = cols["conversion"][0]
        bad = np.nonzero((x < -tolerance) | (x > 1 + tolerance))[0]
        if bad.size:
            i = int(bad[0])
            raise StudyError(f"conversion must lie in [0, 1], got {x[i]:g}",
                             file=fname, row=table_line(frame, i), column=col, run=ids[i])
        c0 = np.array([runs[r]["initial_concentration"] for r in ids])
        c = c0 * (1.0 - x)
    neg_t = np.nonzero(t < 0)[0]
    if neg_t.size:
        i = int(neg_t[0])
        raise StudyError(f"time must be >= 0, got {frame[cols['time'][0]].iloc[i]}",
                         file=fname, row=table_line(frame, i), column=cols["time"][0], run=ids[i])
    neg = np.nonzero(c < -tolerance * np.array([runs[r]["initial_concentration"] for r in ids]))[0]
    if neg.size:
        i = int(neg[0])
        raise StudyError(f"concentration must be >= 0, got {frame[col].iloc[i]}",
                         file=fname, row=table_line(frame, i), column=col, run=ids[i])
    for rid in dict.fromkeys(ids):
        rows = np.nonzero(idx == rid)[0]
        c0 = runs[rid]["initial_concentration"]
        for r_ in np.unique(rep[rows]):
            sub = rows[rep[rows] == r_]
            dt = np.diff(t[sub])
            if np.any(dt <= 0):
                j = int(sub[1:][dt <= 0][0])
                raise StudyError(
                    f"time does not increase within the run ({frame[cols['time'][0]].iloc[j]} "
                    "after a time at least as late); sort the rows by time or mark replicates "
                    "in a 'replicate' column", file=fname, row=table_line(frame, j), column=cols["time"][0],
                    run=rid,
                )
        high = rows[c[rows] > c0 * (1.0 + tolerance)]
        if high.size:
            j = int(high[0])
            raise StudyError(
                f"concentration {c[j]:.6g} mol/m^3 exceeds the run's initial concentration "
                f"{c0:.6g} mol/m^3 by more than {tolerance:.0%}; check the value, its unit, or "
                "the run's initial_concentration", file=fname, row=table_line(frame, j), column=col, run=rid,
            )
        out[rid] = {"times": t[rows], "concentrations": np.maximum(c[rows], 0.0),
                    "weights": weights[rows]}
    return kind, out


#: keys each closed section accepts; a misspelt key is an error, not silently ignored
#: ([kinetics] and [film] take their rate law's and film model's options, checked there)
SECTION_KEYS: dict[str, frozenset[str]] = {
    "study": frozenset({"name", "description", "author", "date", "notes"}),
    "data": frozenset({"runs", "observations", "tolerance"}),
    "catalyst": frozenset({"geometry", "particle_density", "porosity", "name", "notes"}),
    "pellet": frozenset({"diffusivity", "molecular_diffusivity", "temperature_scaling"}),
    "error": frozenset({"model"}),
    "fit": frozenset({"compare"}),
    "fluid": frozenset({"solvent", "viscosity", "density", "molar_mass", "association_factor",
                        "solute_molar_volume", "diffusivity", "diffusivity_temperature"}),
    # the stirred vessel, for the just-suspended check (kinfit/suspension.py)
    "vessel": frozenset({"impeller_diameter", "suspension_constant", "notes"}),
}
SECTIONS = frozenset({*SECTION_KEYS, "kinetics", "film", "parameters"})


def _section(doc: Mapping[str, Any], name: str, path: Path, required: bool) -> dict[str, Any]:
    sec = doc.get(name, {})
    if not isinstance(sec, Mapping):
        raise StudyError(f"{path}: '{name}' must be a [section], got {type(sec).__name__}")
    if required and not sec:
        raise StudyError(f"{path}: the study file needs a [{name}] section")
    allowed = SECTION_KEYS.get(name)
    if allowed is not None:
        unknown = sorted(set(sec) - allowed)
        if unknown:
            raise StudyError(f"{path}: [{name}] has unknown key '{printable(unknown[0])}'"
                             f"{did_you_mean(unknown[0], allowed)}; allowed keys are "
                             f"{sorted(allowed)}")
    return dict(sec)


def _choice(sec: Mapping[str, Any], key: str, valid: tuple[str, ...], where: str,
            default: str | None = None) -> str:
    value = sec.get(key, default)
    if value is None:
        raise StudyError(f"{where}: '{key}' is missing; use one of {list(valid)}")
    if not isinstance(value, str) or value.strip().lower() not in valid:
        raise StudyError(f"{where}: {key} = {value!r} is not recognised; use one of {list(valid)}")
    return value.strip().lower()


_QUANTITY_KEYS = {
    "particle_density": "density", "porosity": "dimensionless",
    "reference_temperature": "temperature", "reference_concentration": "concentration",
    "reference_speed": "speed", "reference_diameter": "length",
    "impeller_diameter": "length", "liquid_volume": "volume", "power_number": "dimensionless",
    "viscosity": "viscosity", "density": "density", "molecular_diffusivity": "diffusivity",
    "slip_velocity": "velocity", "superficial_velocity": "velocity",
    "solute_molar_volume": "molar_volume", "solvent_molar_mass": "molar_mass",
    "association": "dimensionless", "bed_porosity": "dimensionless",
    "molar_mass": "molar_mass", "association_factor": "dimensionless",
    "diffusivity_temperature": "temperature",
}
_FLUID_KEYS = {**_QUANTITY_KEYS, "diffusivity": "diffusivity"}
_FRACTION_KEYS = {"porosity", "bed_porosity"}


def _quantities(sec: dict[str, Any], section: str, path: Path) -> dict[str, Any]:
    keys = _FLUID_KEYS if section == "fluid" else _QUANTITY_KEYS
    out = {}
    for key, value in sec.items():
        kind = keys.get(key)
        if kind is not None:
            where = f"{path.name} [{section}].{key}"
            out[key] = parse_quantity(value, kind, where=where)
            # every quantity of these sections is a positive scale (used as a divisor, under a
            # logarithm, or as a temperature in K); porosities are fractions
            if not out[key] > 0:
                raise StudyError(f"{where} must be > 0 (in SI units), got {printable(value)}; "
                                 "correct the value or its unit")
            if key in _FRACTION_KEYS and out[key] > 1:
                raise StudyError(f"{where} is a fraction and must lie in (0, 1], got "
                                 f"{printable(value)}")
        else:
            out[key] = value
    return out


def _check_vessel(sec: dict[str, Any], path: Path) -> None:
    """The [vessel] section: a positive impeller diameter and Zwietering's constant S."""
    _quantities({k: v for k, v in sec.items() if k == "impeller_diameter"}, "vessel", path)
    s = sec.get("suspension_constant")
    if s is not None and (isinstance(s, bool) or not isinstance(s, int | float) or not s > 0):
        raise StudyError(f"{path.name} [vessel].suspension_constant must be a positive number "
                         f"(Zwietering's S, typically 4 to 12), got {printable(repr(s))}")


def load_study(path: str | Path) -> Study:
    """Read and validate a study file and its tables.

    Parameters
    ----------
    path : str or Path
        The TOML study file; table paths in ``[data]`` are relative to it.

    Returns
    -------
    Study

    Raises
    ------
    StudyError
        For any problem of the input, with the file, row, column or run and the fix.
    """
    path = Path(path)
    doc = _read_toml(path)
    stray = sorted(set(doc) - SECTIONS)
    if "claim" in stray:
        raise StudyError(f"{path} is a claim file ([[claim]] tables), not a study; judge it "
                         f"with 'kinfit audit {path}'")
    if stray:
        raise StudyError(f"{path}: unknown section or key '{printable(stray[0])}' at the top "
                         f"level{did_you_mean(stray[0], SECTIONS)}; the study file's sections "
                         f"are {sorted(SECTIONS)}")
    base = path.resolve().parent
    files = {str(path): _sha256(path)}
    data = _section(doc, "data", path, True)
    tolerance = data.get("tolerance", 0.1)
    if not isinstance(tolerance, int | float) or not 0 <= tolerance < 1:
        raise StudyError(f"{path}: [data].tolerance must be a number in [0, 1), got {tolerance!r}")
    runs_path, runs_sheet = _table_ref(data, "runs", base, path)
    obs_path, obs_sheet = _table_ref(data, "observations", base, path)
    files[str(runs_path)] = _sha256(runs_path)
    files[str(obs_path)] = _sha256(obs_path)
    run_info, order = _load_runs(runs_path, runs_sheet)
    kind, obs = _load_observations(obs_path, obs_sheet, run_info, float(tolerance))
    missing = [r for r in order if r not in obs]
    if missing:
        raise StudyError(
            f"run '{missing[0]}' has no observations in {obs_path.name}"
            + (f" (nor do {missing[1:]})" if len(missing) > 1 else "")
            + "; add its rows or remove the run", file=runs_path.name, run=missing[0],
        )
    runs = []
    empty = _frozen([])
    for rid in order:
        info, o = run_info[rid], obs[rid]
        runs.append(Run(
            id=rid,
            temperature=info["temperature"],
            stirrer_speed=info["stirrer_speed"],
            particle_diameter=info["particle_diameter"],
            catalyst_loading=info["catalyst_loading"],
            initial_concentration=info["initial_concentration"],
            times=_frozen(o.get("times", empty)),
            concentrations=_frozen(o.get("concentrations", empty)),
            rates=_frozen(o.get("rates", empty)),
            weights=_frozen(o["weights"]),
            group=info.get("group"),
            volume=info.get("volume"),
            note=info.get("note", ""),
        ))

    catalyst = _quantities(_section(doc, "catalyst", path, True), "catalyst", path)
    catalyst["geometry"] = _choice(catalyst, "geometry", GEOMETRIES, f"{path.name} [catalyst]")
    if "particle_density" not in catalyst:
        raise StudyError(f"{path.name} [catalyst]: particle_density is missing; "
                         "write for example particle_density = \"1500 kg/m^3\"")
    if catalyst["particle_density"] <= 0:
        raise StudyError(f"{path.name} [catalyst]: particle_density must be > 0")
    check_density(catalyst["particle_density"], f"{path.name} [catalyst].particle_density")
    kinetics = _quantities(_section(doc, "kinetics", path, True), "kinetics", path)
    if "rate_law" not in kinetics:
        typo = [k for k in kinetics if did_you_mean(k, ["rate_law"])]
        raise StudyError(f"{path.name} [kinetics]: rate_law is missing" + (
            f"; '{printable(typo[0])}' looks like a misspelling of 'rate_law'" if typo else "")
            + "; write rate_law = \"power\" (or another rate law)")
    if not isinstance(kinetics["rate_law"], str) or not kinetics["rate_law"].strip():
        raise StudyError(f"{path.name} [kinetics]: rate_law must be the name of a rate law, "
                         f"such as \"power\"; got {printable(repr(kinetics['rate_law']))}")
    if "reference_temperature" not in kinetics:
        raise StudyError(f"{path.name} [kinetics]: reference_temperature is missing; write "
                         "for example reference_temperature = \"50 degC\" (a mid-campaign value)")
    film = _quantities(_section(doc, "film", path, False), "film", path)
    film.setdefault("model", "agitation")
    if not isinstance(film["model"], str) or not film["model"].strip():
        raise StudyError(f"{path.name} [film]: model must be the name of a film model, such as "
                         f"\"agitation\" or \"none\"; got {printable(repr(film['model']))}")
    pellet = _quantities(_section(doc, "pellet", path, False), "pellet", path)
    pellet["diffusivity"] = _choice(pellet, "diffusivity", ("direct", "tortuosity", "none"),
                                    f"{path.name} [pellet]", "direct")
    error = _section(doc, "error", path, False)
    error_model = _choice(error, "model", ("constant", "proportional", "combined"),
                          f"{path.name} [error]", "constant")
    fit = _section(doc, "fit", path, False)
    fluid = _quantities(_section(doc, "fluid", path, False), "fluid", path)
    # transport scales with the liquid's viscosity by default when the study names its liquid
    default_scaling = "viscosity" if fluid.get("solvent") else "none"
    for sec, sec_name in ((pellet, "pellet"), (film, "film")):
        sec["temperature_scaling"] = _choice(sec, "temperature_scaling", ("viscosity", "none"),
                                             f"{path.name} [{sec_name}]", default_scaling)
        if sec["temperature_scaling"] == "viscosity" and not fluid:
            raise StudyError(f"{path.name} [{sec_name}]: temperature_scaling = \"viscosity\" "
                             "needs the liquid's viscosity: add a [fluid] section (e.g. solvent "
                             "= \"water\"), or set temperature_scaling = \"none\"")
    _check_vessel(_section(doc, "vessel", path, False), path)
    if "density" in fluid:
        check_density(fluid["density"], f"{path.name} [fluid].density")
    check_runs(run_info, runs_path.name, film_model=str(film["model"]).strip().lower())
    params = parameter_table_from_toml(_section(doc, "parameters", path, True), path.name)
    study_meta = _section(doc, "study", path, False)
    name = str(study_meta.get("name", path.stem))
    return Study(
        path=path, name=name, kind=kind, runs=tuple(runs), catalyst=catalyst,
        kinetics=kinetics, film=film, pellet=pellet, parameters=params,
        error_model=error_model, fit=fit, fluid=fluid, files=files, raw=doc,
    )


