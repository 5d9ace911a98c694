"""Whether saved results still belong to the study: the SHA-256 digests of the input files the
fit recorded in its manifest, compared with the files the study reads now."""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path
from typing import Any

from kinfit.study import Study

__all__ = ["changed_inputs"]


def changed_inputs(study: Study, manifest: Mapping[str, Any] | None) -> list[str]:
    """Names of the study's files whose content differs from what the fit read (matched by
    path, else by file name); empty when all match or the fit recorded none."""
    now = {str(Path(k).resolve()): v for k, v in study.files.items()}
    by_name = {Path(k).name: v for k, v in study.files.items()}
    base = study.path.resolve().parent
    out = []
    for path, info in ((manifest or {}).get("inputs") or {}).items():
        digest = info.get("sha256") if isinstance(info, Mapping) else str(info)
        p = Path(path)
        key = str((p if p.is_absolute() else base / p).resolve())
        current = now.get(key, by_name.get(p.name))
        if current is not None and current != digest:
            out.append(p.name)
    return out
