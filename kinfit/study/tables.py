"""Reading the study's tables (CSV or XLSX, units in headers) into checked SI columns."""

from __future__ import annotations

import io
import zipfile
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from kinfit.core.units import parse_header, printable, to_si
from kinfit.errors import StudyError

__all__ = ['read_table', 'table_line']


def _is_file(path: Path) -> bool:
    """``path.is_file()`` that says False, not raises, for names the OS cannot even look up
    (too long, an embedded NUL byte)."""
    try:
        return path.is_file()
    except (OSError, ValueError):
        return False


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
    with book:  # closes the file on every path, refusals included
        names = [str(n) for n in book.sheet_names]
        listed = ", ".join(f"'{n}'" for n in names)
        if isinstance(sheet, str) and sheet not in names:
            raise StudyError(f"{path.name}: the workbook has no sheet '{printable(sheet)}'; "
                             f"its sheets are {listed}")
        if isinstance(sheet, int) and not 0 <= sheet < len(names):
            raise StudyError(f"{path.name}: sheet number {sheet} does not exist (counting from "
                             f"0); the workbook's sheets are {listed}")
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
