"""kinfit audit: claimed kinetics against transport criteria and data."""

from __future__ import annotations

import argparse
import sys
from dataclasses import replace
from pathlib import Path

from kinfit.analysis.audit.audit import audit_claims
from kinfit.analysis.audit.limits import (
    VERDICTS,
)
from kinfit.analysis.audit.markdown import refit_inadequacy
from kinfit.core.files import (
    prepare_out_dir,
    recorded_command,
)

__all__ = ["add_arguments", "run"]


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit audit CLAIM [--out DIR]``."""
    parser.add_argument("claim", type=Path, help="the claim file (TOML)")
    parser.add_argument("--out", type=Path, default=Path("reports") / "audit",
                        help="output folder (default: reports/audit)")
    parser.add_argument("--require-consistent", action="store_true",
                        help="exit 1 unless every claim is consistent with intrinsic kinetics")


def run(args: argparse.Namespace) -> int:
    """Run ``kinfit audit``; returns the exit code."""

    result = audit_claims(args.claim)
    result = replace(result, manifest={**result.manifest, "command": recorded_command(sys.argv)})
    out = prepare_out_dir(args.out)
    result.save(out)
    for c in result.claims:
        print(f"{c.name}: {c.verdict}")
        caution = refit_inadequacy(c.reproduction)
        if caution:
            print(f"  caution: {caution}")
        for e in c.evidence:
            print(f"  - {e}")
        for m in c.missing:
            print(f"  missing: {m}")
    print(f"\nwrote {out / 'audit.json'} and {out / 'audit.md'}")
    if args.require_consistent and any(c.verdict != VERDICTS[0] for c in result.claims):
        print("kinfit: not every claim is consistent with intrinsic kinetics", file=sys.stderr)
        return 1
    return 0
