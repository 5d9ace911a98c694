"""Writing outputs safely: every file is written to a temporary name in the same folder and
renamed into place, so an interrupted run never leaves a half-written file; plus the
reproducibility manifest shared by every command."""

from __future__ import annotations

import json
import math
import os
import platform
import sys
import tempfile
from collections.abc import Mapping, Sequence
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["write_text_atomic", "write_bytes_atomic", "write_json_atomic", "write_frame_atomic",
           "manifest", "to_plain", "prepare_out_dir"]

_LIBRARIES = ("numpy", "scipy", "lmfit", "pandas", "emcee", "matplotlib", "pint", "arviz-base",
              "arviz-stats")


def prepare_out_dir(path: str | Path) -> Path:
    """Create the output folder (and parents) and return it."""
    from kinfit.errors import StudyError

    out = Path(path)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise StudyError(f"cannot create output folder '{out}': {exc.strerror}; choose another "
                         "--out") from None
    return out


def write_bytes_atomic(path: str | Path, data: bytes) -> Path:
    """Write bytes to ``path`` through a temporary file and an atomic rename."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
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
    """Write a pandas DataFrame as CSV atomically."""
    return write_text_atomic(path, frame.to_csv(index=False))


def manifest(*, files: Mapping[str, str] | None = None, seed: int | None = None,
             argv: Sequence[str] | None = None, extra: Mapping[str, Any] | None = None
             ) -> dict[str, Any]:
    """The reproducibility manifest: input hashes, versions, seed and command line."""
    from kinfit import __version__

    versions: dict[str, str | None] = {"kinfit": __version__,
                                       "python": platform.python_version()}
    for lib in _LIBRARIES:
        try:
            versions[lib] = metadata.version(lib)
        except metadata.PackageNotFoundError:
            versions[lib] = None
    out: dict[str, Any] = {
        "inputs": {str(k): {"sha256": v} for k, v in (files or {}).items()},
        "versions": versions,
        "seed": seed,
        "command": list(argv if argv is not None else sys.argv),
        "platform": platform.platform(),
    }
    if extra:
        out.update(extra)
    return out
