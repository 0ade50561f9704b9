"""The chunks of one long sweep worked on several local processes at once.

A sweep of tens of minutes is worked in chunks by each stage (detection, measurement, events), and
the chunks of one stage are independent once the stage before it is done. :func:`run_ordered`
hands them to worker processes forked for that stage: a forked child sees the parent's memory as
it was (the recording's memory map, the loader, what earlier stages found), so nothing but each
chunk's result travels, pickled by the standard library, back to the parent. The results come
back in chunk order and the chunks are the same whatever the number of workers, so the output is
the same bytes with one worker or many (``tests/analysis/test_chunkpool.py``).

The number of workers is a context setting, one unless a caller asks for more
(:func:`use_workers`). The command line asks for the cores available, at most four
(:func:`default_workers`), and so does the app's re-analysis after a settings change
(:class:`analysis.session.Session`'s ``workers``): a forked worker only computes its chunk with
numpy, sends the result down a pipe and ends with ``os._exit``, touching nothing the app's other
threads hold. The batch processes stay at one: a batch already keeps every core busy with
whole files. Forking is
used on Linux only; elsewhere the chunks are worked one after another.
"""

from __future__ import annotations

import contextlib
import contextvars
import os
import signal
import sys
from typing import Callable, Iterator, TypeVar

__all__ = ["available_cores", "can_fork", "default_workers", "run_ordered", "use_workers", "workers"]

T = TypeVar("T")

#: A stage is split over workers only when each gets at least this many chunks: starting the
#: processes costs tens of milliseconds, more than a short recording's whole analysis.
MIN_CHUNKS_PER_WORKER = 2

_WORKERS: contextvars.ContextVar[int] = contextvars.ContextVar("upstroke_chunk_workers", default=1)
#: The task of the stage being worked (set before the fork, so that the children inherit it).
_TASK: Callable[[int], object] | None = None
#: True in a worker process: its chunks never fork again.
_IN_WORKER = False


#: The most workers the command line starts by default: each holds a chunk's arrays (about
#: 50-100 MB at 20-50 kHz), and past a few workers the stages' serial parts dominate anyway.
DEFAULT_MAX_WORKERS = 4


def default_workers() -> int:
    """Workers for a long recording when the user does not say: the cores, at most
    :data:`DEFAULT_MAX_WORKERS`."""
    return min(available_cores(), DEFAULT_MAX_WORKERS)


def available_cores() -> int:
    """The processor cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def can_fork() -> bool:
    """Whether chunks can go to forked workers here (Linux, outside a worker)."""
    return sys.platform.startswith("linux") and not _IN_WORKER and hasattr(os, "fork")


def workers() -> int:
    """The number of worker processes asked for in this context (1: work in this process)."""
    return _WORKERS.get()


@contextlib.contextmanager
def use_workers(n: int) -> Iterator[None]:
    """Work the chunks of the stages run inside the block on ``n`` processes (1: this one alone).

    Examples
    --------
    >>> with use_workers(2):
    ...     workers()
    2
    >>> workers()
    1
    """
    token = _WORKERS.set(max(1, int(n)))
    try:
        yield
    finally:
        _WORKERS.reset(token)


def _start_worker(parent: int) -> None:
    global _IN_WORKER
    _IN_WORKER = True
    # Ctrl-C reaches the whole process group: the parent alone handles it (it stops the pool).
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    # A worker dies with its parent (killed, say): it would otherwise wait for work forever.
    with contextlib.suppress(OSError, AttributeError):
        import ctypes  # only on Linux, to ask for a parent-death signal

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0)
    if os.getppid() != parent:  # the parent died before the request took effect
        os._exit(1)


#: Linux's prctl option: the signal a process gets when its parent dies (<linux/prctl.h>).
_PR_SET_PDEATHSIG = 1


def _call(i: int):
    assert _TASK is not None
    return _TASK(i)


def run_ordered(task: Callable[[int], T], n_tasks: int, on_result: Callable[[int, T], None] | None = None) -> list[T]:
    """``[task(0), ..., task(n_tasks - 1)]``, on the context's workers when that pays.

    Parameters
    ----------
    task : callable
        ``task(i)`` works chunk ``i`` and returns its result (picklable). It may read anything
        the process holds; what it changes in memory stays in the worker, so everything it
        produces must be in what it returns.
    n_tasks : int
    on_result : callable or None
        ``on_result(i, result)``, in chunk order as the results arrive (progress).

    Returns
    -------
    list
        The results in chunk order.

    Examples
    --------
    >>> run_ordered(lambda i: i * i, 4)
    [0, 1, 4, 9]
    """
    global _TASK
    n_workers = min(workers(), n_tasks // MIN_CHUNKS_PER_WORKER)
    results: list[T] = []
    if n_workers <= 1 or not can_fork():
        for i in range(n_tasks):
            results.append(task(i))
            if on_result is not None:
                on_result(i, results[-1])
        return results
    # Imported here: a short recording (most of the app's work) never needs them.
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures.process import BrokenProcessPool

    previous, _TASK = _TASK, task
    # This process works the first chunks itself while n_workers - 1 forked children work the
    # rest, a few chunks per message; when it is done it takes back the messages no child has
    # started yet. Chunks no child could work (no process to be had under a process or memory
    # limit, a worker killed) are worked here too: the results are the same wherever they come from.
    share = -(-n_tasks // n_workers)
    step = max(1, (n_tasks - share) // (4 * (n_workers - 1)))
    batches = [list(range(a, min(n_tasks, a + step))) for a in range(share, n_tasks, step)]
    pool = None
    futures: list = []
    try:
        try:
            pool = ProcessPoolExecutor(n_workers - 1, mp_context=multiprocessing.get_context("fork"),
                                       initializer=_start_worker, initargs=(os.getpid(),))
            for batch in batches:
                futures.append(pool.submit(_call_many, batch))
        except (OSError, BrokenProcessPool):
            pass  # the batches without a future are worked below
        for i in range(share):
            results.append(task(i))
            if on_result is not None:
                on_result(i, results[-1])
        for k, batch in enumerate(batches):
            found = None
            if k < len(futures) and not futures[k].cancel():
                with contextlib.suppress(BrokenProcessPool):
                    found = futures[k].result()
            if found is None:
                found = [task(i) for i in batch]
            for i, result in zip(batch, found):
                results.append(result)
                if on_result is not None:
                    on_result(i, result)
    except BaseException:
        if pool is not None:
            pool.shutdown(wait=True, cancel_futures=True)
        raise
    finally:
        _TASK = previous
    if pool is not None:
        pool.shutdown(wait=True)
    return results


def _call_many(batch: list[int]) -> list:
    return [_call(i) for i in batch]
