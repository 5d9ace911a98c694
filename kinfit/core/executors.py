"""Where independent refits run: in this process, in a pool of worker processes, or on a Dask
cluster, behind one ``concurrent.futures`` interface.

The estimation core (:mod:`kinfit.estimate`) accepts any :class:`concurrent.futures.Executor`
for the refinements of a multistart, the sides of the likelihood profiles and the bootstrap
replicates, and draws every random number before it hands work out, so a result does not
depend on where the work ran (checked in ``tests/test_parallel.py``). This module makes that
executor from two user choices, ``--workers N`` and ``--scheduler ADDRESS``, and runs candidate
models of a comparison side by side.

What travels to a worker is pickled, once per task: a
:class:`~kinfit.estimate.problem.Problem` whose ``predict`` is the bound method of a
:class:`~kinfit.model.compiled.Model`, which holds its :class:`~kinfit.study.load.Study`. Every object on that
path is a plain class or a frozen dataclass of module-level types, so it pickles with the
standard library (measured: 25 kB and about 1 ms for a 24-run campaign, 0.3 MB and about 10 ms
for 384 runs, against 0.2 s and 3 s for one fit of them).

Worker processes start with ``forkserver`` where the platform has it (``spawn`` elsewhere)
rather than ``fork``: a forked child inherits the parent's threads' locks (progress bars, a
Dask client, BLAS pools) and can deadlock. The forkserver imports kinfit's model and estimator
once (about 2-3 s, the first time in a session), so each worker starts from a warm interpreter.
Each worker then loads the effectiveness-factor table of its pellet geometry on first use
(``kinfit/data/power_law_eta.npz``, about 0.1 s; about 1.4 s to rebuild when the file is
missing or stale).

Examples
--------
>>> with make_executor(workers=1) as ex:
...     ex is None
True
"""

from __future__ import annotations

import multiprocessing
import os
from collections.abc import Iterator
from concurrent.futures import Executor, Future, ProcessPoolExecutor
from contextlib import contextmanager
from typing import Any

from kinfit.errors import StudyError

__all__ = ["SerialExecutor", "make_executor", "available_workers", "DASK_TIMEOUT", "PRELOAD"]

#: Seconds to wait for a Dask scheduler to answer before giving up with a message.
DASK_TIMEOUT = 20.0
#: Modules the forkserver imports once, so that worker processes start warm.
PRELOAD = ("numpy", "scipy.optimize", "kinfit.model.compiled", "kinfit.estimate.least_squares",
           "kinfit.estimate.uncertainty")
_START_METHODS = ("forkserver", "spawn", "fork")


class SerialExecutor(Executor):
    """An executor that runs each call at once, in the calling thread.

    It exists so that code written against :class:`concurrent.futures.Executor` (and tests of
    executor independence) can run without any pool. A call that raises stores its exception in
    the future, as a pool would.

    Examples
    --------
    >>> list(SerialExecutor().map(abs, [-1, 2, -3]))
    [1, 2, 3]
    """

    def __init__(self) -> None:
        self._shutdown = False

    def submit(self, fn: Any, /, *args: Any, **kwargs: Any) -> Future[Any]:
        """Run ``fn(*args, **kwargs)`` now and return its completed future."""
        if self._shutdown:
            raise RuntimeError("cannot schedule new futures after shutdown")
        future: Future[Any] = Future()
        future.set_running_or_notify_cancel()
        try:
            future.set_result(fn(*args, **kwargs))
        except Exception as exc:  # noqa: BLE001 - delivered through the future, as a pool does
            future.set_exception(exc)
        return future

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        """Refuse further work (nothing is ever pending)."""
        self._shutdown = True


def available_workers() -> int:
    """CPUs this process may run on (``os.sched_getaffinity`` where it exists)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        return os.cpu_count() or 1


def _start_method(requested: str | None) -> str:
    if requested is None:
        have = multiprocessing.get_all_start_methods()
        return "forkserver" if "forkserver" in have else "spawn"
    if requested not in _START_METHODS or requested not in multiprocessing.get_all_start_methods():
        raise StudyError(
            f"The 'start_method' option of make_executor() must be a str among "
            f"{[m for m in _START_METHODS if m in multiprocessing.get_all_start_methods()]}. "
            f"Got {requested!r} instead."
        )
    return requested


def _check_workers(workers: Any) -> int | None:
    if workers is None:
        return None
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise StudyError(
            f"The 'workers' option must be an int >= 1 (the number of worker processes). "
            f"Got {workers!r} instead."
        )
    return int(workers)


def _check_scheduler(scheduler: Any) -> str | None:
    if scheduler is None:
        return None
    if not isinstance(scheduler, str) or not scheduler.strip() or any(c.isspace() for c in
                                                                         scheduler.strip()):
        raise StudyError(
            "The 'scheduler' option must be the address of a running Dask scheduler, such as "
            f"'tcp://10.0.0.5:8786'. Got {scheduler!r} instead."
        )
    return scheduler.strip()


@contextmanager
def make_executor(
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    start_method: str | None = None,
    timeout: float = DASK_TIMEOUT,
) -> Iterator[Executor | None]:
    """The executor for independent refits, as a context manager that cleans up after itself.

    Parameters
    ----------
    workers : int, optional
        Worker processes on this machine. None or 1: no pool (``None`` is yielded and the
        estimators run the work in the calling process). More than 1: a
        :class:`concurrent.futures.ProcessPoolExecutor` of that size. More workers than
        :func:`available_workers` is allowed (the work is just shared out more thinly).
    scheduler : str, optional
        Address of a running Dask distributed scheduler (for example
        ``"tcp://10.0.0.5:8786"``); the yielded executor is ``Client(scheduler).get_executor()``,
        Dask's own :class:`concurrent.futures.Executor`. Needs the ``scale`` extra
        (``pip install kinfit[scale]``). Exclusive with ``workers``.
    start_method : {"forkserver", "spawn", "fork"}, optional
        How a local pool starts its processes; default ``forkserver`` where available, else
        ``spawn`` (see the module notes on why not ``fork``).
    timeout : float
        Seconds to wait for the Dask scheduler to answer (default :data:`DASK_TIMEOUT`).

    Yields
    ------
    concurrent.futures.Executor or None

    Raises
    ------
    StudyError
        Invalid ``workers`` or ``scheduler``; both given; Dask not installed; the scheduler
        cannot be reached within ``timeout`` seconds.

    Notes
    -----
    Leaving the block normally waits for submitted work. Leaving it by an exception (a
    ``KeyboardInterrupt`` included) cancels work not yet started and does not wait for it, so an
    interrupted run stops promptly.

    Examples
    --------
    >>> with make_executor(workers=2) as ex:
    ...     list(ex.map(abs, [-1, -2]))
    [1, 2]
    """
    n = _check_workers(workers)
    address = _check_scheduler(scheduler)
    if address is not None and n is not None and n > 1:
        raise StudyError(
            f"give either workers ({n} local processes) or a Dask scheduler ({address!r}), not "
            "both; the scheduler's cluster decides how many workers it has"
        )
    if address is not None:
        with _dask_executor(address, float(timeout)) as ex:
            yield ex
        return
    if n is None or n == 1:
        yield None
        return
    method = _start_method(start_method)
    ctx = multiprocessing.get_context(method)
    if method == "forkserver":
        ctx.set_forkserver_preload(list(PRELOAD))
    pool = ProcessPoolExecutor(max_workers=n, mp_context=ctx)
    try:
        yield pool
    except BaseException:
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    else:
        pool.shutdown(wait=True)


@contextmanager
def _dask_executor(address: str, timeout: float) -> Iterator[Executor]:
    try:
        from distributed import Client
    except ImportError:
        raise StudyError(
            "a Dask scheduler was named but Dask is not installed; install it with "
            "'pip install kinfit[scale]' (dask[distributed]) or use --workers instead"
        ) from None
    try:
        client = Client(address, timeout=timeout, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise StudyError(
            f"cannot reach the Dask scheduler at {address!r} within {timeout:g} s "
            f"({type(exc).__name__}: {exc}); start one with 'dask scheduler' and give its "
            "address as tcp://HOST:PORT, or use --workers instead"
        ) from None
    # pure=False: every submitted refit is its own task (no deduplication by argument hash)
    executor = client.get_executor(pure=False)
    try:
        yield executor
    except BaseException:
        executor.shutdown(wait=False)
        client.close()
        raise
    else:
        executor.shutdown(wait=True)
        client.close()
