"""Command-line options shared by several commands (parallel refits)."""

from __future__ import annotations

import argparse
from typing import Any

from kinfit.core.executors import available_workers, make_executor

__all__ = ['add_parallel_arguments', 'executor_from_args']


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be >= 1, got {value}")
    return value


def add_parallel_arguments(parser: argparse.ArgumentParser) -> argparse.ArgumentParser:
    """Add ``--workers N`` and ``--scheduler ADDRESS`` (mutually exclusive) to ``parser``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        A command's parser (kinfit's parser turns argument errors into exit code 2).

    Returns
    -------
    argparse.ArgumentParser
        The same parser, for chaining.

    Examples
    --------
    >>> p = add_parallel_arguments(argparse.ArgumentParser())
    >>> p.parse_args(["--workers", "4"]).workers
    4
    """
    group = parser.add_mutually_exclusive_group()
    group.add_argument(
        "--workers", type=_positive_int, default=None, metavar="N",
        help="run independent refits (multistart, profiles, bootstrap, candidate models) in N "
             f"local processes (this machine has {available_workers()} CPUs available)",
    )
    group.add_argument(
        "--scheduler", default=None, metavar="ADDRESS",
        help="run them on a Dask cluster instead, e.g. tcp://127.0.0.1:8786 (needs the 'scale' "
             "extra: pip install kinfit[scale])",
    )
    return parser


def executor_from_args(args: argparse.Namespace) -> Any:
    """:func:`make_executor` for the options :func:`add_parallel_arguments` added.

    Examples
    --------
    >>> ns = argparse.Namespace(workers=None, scheduler=None)
    >>> with executor_from_args(ns) as ex:
    ...     ex is None
    True
    """
    return make_executor(workers=getattr(args, "workers", None),
                         scheduler=getattr(args, "scheduler", None))
