"""Exit codes and the arguments every command shares."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from kinfit.fitting.model_checks import adequacy_lines

__all__ = ["EXIT_OK", "EXIT_FAILED", "EXIT_BAD_INPUT", "EXIT_INTERRUPTED", "add_common",
           "print_adequacy", "adequacy_exit"]


EXIT_OK, EXIT_FAILED, EXIT_BAD_INPUT = 0, 1, 2


EXIT_INTERRUPTED = 130  # Ctrl-C, as shells report SIGINT


def add_common(p: argparse.ArgumentParser, *, out: bool = False) -> None:
    p.add_argument("study", type=Path, help="the study file (TOML)")
    if out:
        p.add_argument("--out", type=Path, default=Path("reports"),
                       help="output folder (default: reports)")


def print_adequacy(adequacy: Any) -> None:
    lines = adequacy_lines(adequacy)
    if lines:
        print("\n" + "\n".join(lines))


def adequacy_exit(args: argparse.Namespace, adequacy: Any) -> int:
    """EXIT_FAILED when --require-adequate was given and an adequacy test failed."""
    if getattr(args, "require_adequate", False) and not (adequacy or {}).get("adequate"):
        print(f"kinfit: the model is not adequate: {(adequacy or {}).get('message', '')}",
              file=sys.stderr)
        return EXIT_FAILED
    return EXIT_OK
