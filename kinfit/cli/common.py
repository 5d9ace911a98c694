"""Exit codes and the arguments every command shares."""

from __future__ import annotations

import argparse
from pathlib import Path

__all__ = ["EXIT_OK", "EXIT_FAILED", "EXIT_BAD_INPUT", "EXIT_INTERRUPTED", "add_common"]


EXIT_OK, EXIT_FAILED, EXIT_BAD_INPUT = 0, 1, 2


EXIT_INTERRUPTED = 130  # Ctrl-C, as shells report SIGINT


def add_common(p: argparse.ArgumentParser, *, out: bool = False) -> None:
    p.add_argument("study", type=Path, help="the study file (TOML)")
    if out:
        p.add_argument("--out", type=Path, default=Path("reports"),
                       help="output folder (default: reports)")
