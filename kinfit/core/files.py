"""Writing outputs safely: every file is written to a temporary name in the same folder and
renamed into place, so an interrupted run never leaves a half-written file; plus the
reproducibility manifest shared by every command."""

from __future__ import annotations

import contextlib
import hashlib
import json
import math
import os
import platform
import sys
import tempfile
from collections.abc import Iterator, Mapping, Sequence
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np

from kinfit.core.version import __version__
from kinfit.errors import StudyError

__all__ = ["file_sha256", "CAUTIONS", "cautions_markdown", "recorded_path", "recorded_command", "atomic_path",
           "write_text_atomic", "write_bytes_atomic", "write_json_atomic", "write_frame_atomic",
           "manifest", "to_plain", "prepare_out_dir", "DRAWS_FILES", "draws_file"]

#: The posterior draws table that ``kinfit sample`` writes into its folder: gzip-compressed by
#: default, plain CSV on request (``--draws-csv``); readers take whichever is there.
DRAWS_FILES = ("posterior_draws.csv.gz", "posterior_draws.csv")


def draws_file(folder: str | Path) -> Path | None:
    """The posterior draws table in ``folder`` (see :data:`DRAWS_FILES`), or None."""
    for name in DRAWS_FILES:
        if (Path(folder) / name).is_file():
            return Path(folder) / name
    return None

_LIBRARIES = ("numpy", "scipy", "lmfit", "pandas", "emcee", "matplotlib", "pint", "arviz-base",
              "arviz-stats")


#: the caution every written output that feeds design or planning carries (report, audit.md,
#: plan.md)
CAUTIONS = (
    "These results feed reactor design, and reactor design can hurt people. kinfit estimates "
    "kinetic and transport parameters from the data it was given; it does not assess safety.",
    "Scale-up, heat removal, exotherms and thermal runaway, pressure relief, and the hazards "
    "of hydrogen and other flammable or toxic gases under pressure are outside this tool.",
    "Rates affected by external mass transfer cannot be carried to another reactor, and no "
    "prediction outside the fitted ranges of temperature, stirrer speed, particle size and "
    "concentration is warranted (see the limits of validity).",
    "Check every number before use, and defer to local codes, standards and licensed "
    "engineering practice.",
)


def cautions_markdown() -> list[str]:
    """The cautions as a Markdown section (lines)."""
    return ["## Cautions", "", *(f"- {t}" for t in CAUTIONS)]


def recorded_path(path: str | Path, base: str | Path | None = None) -> str:
    """A path as outputs record it: relative to the folder of ``base`` (the study or claim
    file; the working folder when ``base`` is None), in forward-slash form, so that no output
    carries a machine's absolute path.

    Examples
    --------
    >>> recorded_path("/data/campaign/runs.csv", "/data/campaign/study.toml")
    'runs.csv'
    >>> recorded_path("/data/out/results.json", "/data/campaign/study.toml")
    '../out/results.json'
    """
    folder = Path(base).absolute().parent if base is not None else Path.cwd()
    target = Path(os.path.abspath(Path(path) if Path(path).is_absolute() else Path.cwd() / path))
    try:
        rel = os.path.relpath(target, os.path.abspath(folder))
    except ValueError:  # another drive (Windows): the file name is all that can be kept
        rel = target.name
    return Path(rel).as_posix()


def recorded_command(argv: Sequence[str]) -> list[str]:
    """The command line as outputs record it: the program as ``kinfit`` and every absolute
    path argument (also in ``--opt=PATH`` form) relative to the working folder, which the
    manifest records relative to the study file."""
    parts = [str(a) for a in argv]
    if parts and (Path(parts[0]).name in ("kinfit", "__main__.py", "cli.py")
                  or Path(parts[0]).is_absolute()):
        parts[0] = "kinfit"
    out = parts[:1]
    for a in parts[1:]:
        key, eq, val = a.partition("=") if a.startswith("--") else ("", "", a)
        if os.path.isabs(val):
            val = recorded_path(val)
        out.append(f"{key}{eq}{val}")
    return out


def prepare_out_dir(path: str | Path) -> Path:
    """Create the output folder (and parents) and return it."""

    out = Path(path)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise StudyError(f"cannot create output folder '{out}': {exc.strerror}; choose another "
                         "--out") from None
    return out


def _file_mode() -> int:
    """The mode a new file gets under the process umask (mkstemp alone gives 0600)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """A temporary file beside ``path`` to write to; it replaces ``path`` (atomically, by
    :func:`os.replace` in the same folder) when the block succeeds and is removed when it
    fails or is interrupted, so ``path`` is never half-written.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_path(d / "a.txt") as tmp:
    ...     _ = tmp.write_text("done")
    >>> (d / "a.txt").read_text()
    'done'
    """
    dest = Path(path)
    dest.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{dest.name}.", suffix=".tmp", dir=dest.parent)
    os.close(fd)
    os.chmod(tmp, _file_mode())
    try:
        yield Path(tmp)
        os.replace(tmp, dest)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_bytes_atomic(path: str | Path, data: bytes) -> Path:
    """Write bytes to ``path`` through a temporary file and an atomic rename."""
    path = Path(path)
    with atomic_path(path) as tmp, open(tmp, "wb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())
    return path


def write_text_atomic(path: str | Path, text: str) -> Path:
    """Write UTF-8 text atomically."""
    return write_bytes_atomic(path, text.encode("utf-8"))


def to_plain(obj: Any) -> Any:
    """Convert numpy scalars and arrays (recursively) to plain Python types for JSON.

    Non-finite floats become ``None`` (JSON has no NaN)."""
    if isinstance(obj, Mapping):
        return {str(k): to_plain(v) for k, v in obj.items()}
    if isinstance(obj, np.ndarray):
        return to_plain(obj.tolist())
    if isinstance(obj, Sequence) and not isinstance(obj, str | bytes):
        return [to_plain(v) for v in obj]
    if isinstance(obj, np.bool_ | bool):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating | float):
        f = float(obj)
        return f if math.isfinite(f) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def write_json_atomic(path: str | Path, data: Mapping[str, Any]) -> Path:
    """Write a mapping as indented JSON atomically."""
    return write_text_atomic(path, json.dumps(to_plain(data), indent=2, allow_nan=False) + "\n")


def write_frame_atomic(path: str | Path, frame) -> Path:
    """Write a pandas DataFrame as CSV atomically; gzip-compressed (reproducibly: no time
    stamp in the header) when the name ends in ``.gz``."""
    if str(path).endswith(".gz"):
        import gzip

        text = frame.to_csv(index=False).encode("utf-8")
        return write_bytes_atomic(path, gzip.compress(text, compresslevel=6, mtime=0))
    return write_text_atomic(path, frame.to_csv(index=False))


def file_sha256(path: str | Path) -> str:
    """SHA-256 hex digest of a file's bytes."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def manifest(*, files: Mapping[str, str] | None = None, seed: int | None = None,
             argv: Sequence[str] | None = None, extra: Mapping[str, Any] | None = None,
             base: str | Path | None = None) -> dict[str, Any]:
    """The reproducibility manifest: input hashes, versions, seed and command line.

    Input paths are recorded relative to the folder of ``base`` (the study or claim file),
    the command line by :func:`recorded_command`, and the working folder it was run from
    relative to ``base`` as ``folder``: no absolute path is written."""

    versions: dict[str, str | None] = {"kinfit": __version__,
                                       "python": platform.python_version()}
    for lib in _LIBRARIES:
        try:
            versions[lib] = metadata.version(lib)
        except metadata.PackageNotFoundError:
            versions[lib] = None
    out: dict[str, Any] = {
        "inputs": {recorded_path(k, base): {"sha256": v} for k, v in (files or {}).items()},
        "versions": versions,
        "seed": seed,
        "command": recorded_command(argv if argv is not None else sys.argv),
        "folder": recorded_path(Path.cwd(), base) if base is not None else ".",
        "platform": platform.platform(),
    }
    if extra:
        out.update(extra)
    return out
