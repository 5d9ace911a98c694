"""kinfit check: validate a study and show what the campaign can tell."""

from __future__ import annotations

import argparse

from kinfit.cli.common import EXIT_OK, add_common
from kinfit.fitting.fit import main_spec
from kinfit.model.simulation import transport_scaling_warning
from kinfit.study.campaign import campaign_summary
from kinfit.study.load import load_study

__all__ = ["add_arguments", "run"]


def run(args: argparse.Namespace) -> int:

    study = load_study(args.study)
    spec = main_spec(study)  # the model choices and the parameter table must fit together
    print(campaign_summary(study))
    print(f"\nmodel: {spec.label}; parameters {', '.join(spec.parameter_names)}")

    warning = transport_scaling_warning(study, spec)
    if warning:
        print(warning)
    print("study is valid")
    return EXIT_OK


def add_arguments(p: argparse.ArgumentParser) -> None:
    """Arguments of ``kinfit check STUDY``."""
    add_common(p)
