"""Batch analysis: many recordings, each an independent task, on local cores or a Dask cluster.

A batch is a list of recording paths (:func:`find_recordings` builds it from folders and glob
patterns). Each file is one task, :func:`analyze_file`, that opens the recording, analyses it with
the same pipeline as ``upstroke analyze`` and returns a plain :class:`FileOutcome`: the beat
table's columns as numpy arrays, the warnings and the metadata a results file stores, or the one
line of the error that stopped it. Samples never leave the task, so only small results travel
back to the caller, which alone writes the results file.

Tasks run in one of three places:

* in this process, one after another (``workers=1``);
* in a local process pool (:class:`concurrent.futures.ProcessPoolExecutor`, ``workers=N``);
* on a running Dask distributed cluster (``scheduler="tcp://host:8786"``), each recording one
  task sent with ``Client.submit`` and collected with ``as_completed``.

Whatever the order in which tasks finish, :func:`run_batch` returns the outcomes in input order,
so the results equal those of a sequential analysis of the same files in the same order.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import queue
import select
import signal
import sys
import threading
import time
import traceback
from concurrent import futures as _cf
from typing import Any, Callable, Iterator, Mapping, Sequence

from analysis.batch._task import run_task
from analysis.batch._types import (
    BatchCancelled,
    BatchResult,
    ClusterError,
    FileOutcome,
    FileTask,
)
from analysis.errors import InputError
from analysis.sweeps import SweepSelection

__all__ = ["analyze_file", "make_tasks", "run_batch"]

#: How often (seconds) a waiting batch looks at its cancel flag.
_POLL_S = 0.1
#: How long to wait for a Dask scheduler to answer.
CONNECT_TIMEOUT_S = 10.0
#: What to install when the cluster extra is missing.
CLUSTER_FIX = 'install the cluster extra: pip install "upstroke[cluster]"'


def make_tasks(
    paths: Sequence[str | os.PathLike],
    *,
    settings: Any = None,
    channel: int | str | None = None,
    sweeps: Sequence[int] | SweepSelection | None = None,
    units: Mapping[int | str, str] | Sequence[tuple[int | str, str]] | None = None,
    conditions: Sequence[Any] = (),
    file_conditions: Mapping[str, Sequence[Any]] | None = None,
) -> list[FileTask]:
    """One :class:`FileTask` per path, in order.

    Parameters
    ----------
    paths : sequence of str or path
    settings : analysis.settings._settings.Settings, dict or None
        The analysis settings; None for the defaults.
    channel, sweeps, units
        As for :func:`analysis.analyze` and :func:`analysis.open_recording`; the same for every
        file.
    conditions : sequence of Condition or str
        Conditions for every file (a Condition or its command-line text).
    file_conditions : mapping of path to sequence, or None
        Conditions for particular files instead (for example those an existing results file
        keeps; see :func:`analysis.batch.prepare_existing`).
    """
    settings_dict = _settings_to_dict(settings)

    def texts(items: Sequence[Any]) -> tuple[str, ...]:
        return tuple(c if isinstance(c, str) else c.text() for c in items)

    condition_texts = texts(conditions)
    per_file = {os.fspath(k): texts(v) for k, v in (file_conditions or {}).items()}
    unit_pairs = None
    if units:
        unit_pairs = tuple(units.items() if isinstance(units, Mapping) else units)
    # A selection of ranges stays ranges: each file checks it against its own sweep count.
    sweep_tuple = sweeps if sweeps is None or isinstance(sweeps, SweepSelection) else tuple(int(s) for s in sweeps)
    return [
        FileTask(
            index=i, path=os.fspath(p), open_path=os.path.abspath(os.fspath(p)), settings=settings_dict,
            channel=channel, sweeps=sweep_tuple, units=unit_pairs,
            conditions=per_file.get(os.fspath(p), condition_texts),
        )
        for i, p in enumerate(paths)
    ]


def _settings_to_dict(settings: Any) -> dict[str, Any] | None:
    if settings is None or isinstance(settings, Mapping):
        return None if settings is None else dict(settings)
    return settings.to_dict()


def analyze_file(task: FileTask) -> FileOutcome:
    """Analyse one recording; never raises for a bad file.

    This is the unit of work of a batch: a module-level function of plain values, so a process
    pool or a Dask worker can run it. It opens the file, runs :func:`analysis.analyze` exactly as
    ``upstroke analyze`` does, and returns the beat table's columns, not the samples.

    Parameters
    ----------
    task : FileTask

    Returns
    -------
    FileOutcome
        With ``error`` set to the one-line message when the file is not a usable recording, or
        ``fault`` set to the traceback of an unexpected exception.
    """

    start = time.perf_counter()
    try:
        outcome = run_task(task)
    except InputError as exc:
        return FileOutcome(task.index, task.path, error=_relabel(exc.one_line(), task))
    except MemoryError:
        return FileOutcome(
            task.index, task.path,
            error=f"{task.path}: not enough memory to analyse this file; use fewer workers or a machine with more memory",
        )
    except Exception:
        return FileOutcome(task.index, task.path, fault=traceback.format_exc())
    outcome.meta["elapsed_s"] = time.perf_counter() - start
    return outcome


def _relabel(line: str, task: FileTask) -> str:
    # Workers open the absolute path; messages name the file as the user knows it.
    return line.replace(task.open_path, task.path) if task.open_path != task.path else line


# -- running a batch -------------------------------------------------------------------------
ProgressCallback = Callable[[FileOutcome, int, int], None]


def run_batch(
    tasks: Sequence[FileTask],
    *,
    workers: int | None = None,
    scheduler: str | Any | None = None,
    cancel: Any = None,
    on_done: ProgressCallback | None = None,
) -> BatchResult:
    """Run every task and return the outcomes in input order.

    Parameters
    ----------
    tasks : sequence of FileTask
        From :func:`make_tasks`.
    workers : int or None
        Local processes; None uses every core (``os.cpu_count()``). With 1 the files are analysed
        one after another in this process. Ignored when ``scheduler`` is given.
    scheduler : str, dask.distributed.Client or None
        The address of a running Dask scheduler (``"tcp://10.0.0.5:8786"``) or a connected
        client; each file becomes one task on the cluster.
    cancel : object with ``is_set()`` or None
        A flag (for example :class:`threading.Event`) looked at between files; once set, no
        further file starts, running local workers are stopped and :class:`BatchCancelled` is
        raised.
    on_done : callable or None
        ``on_done(outcome, n_done, n_total)`` after each file, in completion order.

    Returns
    -------
    BatchResult

    Raises
    ------
    BatchCancelled
        When ``cancel`` was set before the last file finished.
    ClusterError
        When Dask is not installed or the scheduler cannot be reached.
    KeyboardInterrupt
        Passed on after the workers are stopped.
    """
    tasks = list(tasks)
    if [t.index for t in tasks] != list(range(len(tasks))):
        raise ValueError("tasks must be numbered 0..n-1 in order (use make_tasks)")
    results: list[FileOutcome | None] = [None] * len(tasks)
    if scheduler is not None:
        source: Iterator[FileOutcome] = _run_dask(tasks, scheduler, cancel)
        where = scheduler if isinstance(scheduler, str) else "a Dask cluster"
    else:
        n = min(max(1, int(workers or os.cpu_count() or 1)), max(1, len(tasks)))
        source = _run_inline(tasks, cancel) if n == 1 else _run_pool(tasks, n, cancel)
        where = "this process" if n == 1 else f"{n} local processes"
    done = 0
    try:
        for outcome in source:
            results[outcome.index] = outcome
            done += 1
            if on_done is not None:
                on_done(outcome, done, len(tasks))
    finally:
        source.close()  # stops the workers at once when the caller's callback raised
    return BatchResult([r for r in results if r is not None], where=where)


def _cancelled(cancel: Any) -> bool:
    return cancel is not None and cancel.is_set()


def _run_inline(tasks: Sequence[FileTask], cancel: Any) -> Iterator[FileOutcome]:
    for i, task in enumerate(tasks):
        if _cancelled(cancel):
            raise BatchCancelled(i, len(tasks))
        yield analyze_file(task)


def _worker_init(batch_pid: int | None = None) -> None:
    # Ctrl-C in a terminal reaches the whole process group; the parent alone decides what to do
    # (stop the workers, write nothing), so the workers ignore it instead of each printing a
    # traceback.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if batch_pid is not None:
        _die_with(batch_pid)


#: prctl(2) option: the signal a process gets when its parent ends (linux/prctl.h).
_PR_SET_PDEATHSIG = 1
#: How often a worker that cannot be told of its batch's end looks whether it is still there.
_WATCH_S = 0.25


def _die_with(batch_pid: int) -> None:
    """End this worker as soon as the batch process ends, however it ends (even ``kill -9``).

    Without this a worker busy with a long file runs it to the end with nobody to send the
    result to, and keeps the fork server alive with it (each worker holds the pipe whose end
    tells the fork server to exit). Two guards:

    * the parent-death signal (Linux prctl PR_SET_PDEATHSIG): SIGKILL when the worker's parent
      ends, which is the batch process itself with the spawn start method;
    * a thread that waits for the batch process to end and then ends the worker: on a pidfd
      (Linux 5.3 and later: readable once the process has exited), on kqueue's process-exit
      event (macOS, BSD), or by looking every quarter second elsewhere.
    """
    if sys.platform.startswith("linux"):
        try:
            import ctypes  # only to call prctl(2)

            ctypes.CDLL(None, use_errno=True).prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0)
        except (OSError, AttributeError):
            pass  # no usable libc: the thread below still ends the worker
    if os.name == "nt":
        return  # not covered on Windows: os.kill(pid, 0) would send Ctrl-C there
    threading.Thread(target=_watch, args=(batch_pid,), name="upstroke-batch-watch", daemon=True).start()


def _watch(pid: int) -> None:
    try:
        if hasattr(os, "pidfd_open"):
            fd = os.pidfd_open(pid)
            select.select([fd], [], [])  # readable once the process has exited
        elif hasattr(select, "kqueue"):
            kq = select.kqueue()
            event = select.kevent(pid, filter=select.KQ_FILTER_PROC, flags=select.KQ_EV_ADD,
                                  fflags=select.KQ_NOTE_EXIT)
            kq.control([event], 1, None)  # returns when the process exits
        else:
            while _running(pid):
                time.sleep(_WATCH_S)
    except ProcessLookupError:
        pass  # already gone
    except OSError:
        while _running(pid):
            time.sleep(_WATCH_S)
    os._exit(1)


def _running(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True
    return True


def _pool_context() -> multiprocessing.context.BaseContext:
    # Never fork: the caller may be a Qt app with threads. The fork server starts each worker
    # from a clean process that has already imported the analysis core.
    if sys.platform != "win32" and "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(["analysis.batch._batch", "analysis.batch._task", "analysis.pipeline._analyze", "analysis.session._persist"])
        return ctx
    return multiprocessing.get_context("spawn")


def _stop_pool(pool: _cf.ProcessPoolExecutor) -> None:
    """Cancel what has not started and stop the workers that are running now."""
    stop = getattr(pool, "terminate_workers", None)  # Python 3.14 and later
    if stop is not None:
        stop()
        return
    # shutdown() forgets the worker processes, so take them first; without terminating them the
    # interpreter would wait at exit for the files being analysed now.
    workers = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for proc in workers:
        if proc.is_alive():
            proc.terminate()
    for proc in workers:
        proc.join(timeout=5)


#: Thread counts for the numerical libraries in each worker, unless the user set them: N
#: processes each running a multi-threaded linear algebra library would fight over the cores.
_WORKER_ENV = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


@contextlib.contextmanager
def _worker_environment() -> Iterator[None]:
    # Worker processes (and the fork server they start from) are started while the pool takes
    # its first tasks, and inherit the environment of that moment.
    added = {k: v for k, v in _WORKER_ENV.items() if k not in os.environ}
    os.environ.update(added)
    try:
        yield
    finally:
        for key in added:
            os.environ.pop(key, None)


def _run_pool(tasks: Sequence[FileTask], n_workers: int, cancel: Any) -> Iterator[FileOutcome]:
    pool = _cf.ProcessPoolExecutor(max_workers=n_workers, mp_context=_pool_context(), initializer=_worker_init,
                                   initargs=(os.getpid(),))
    finished = False
    # Each future puts itself on this queue when done: collecting costs the same per file
    # whatever the number of files still pending (waiting on all pending futures would not).
    done: queue.SimpleQueue = queue.SimpleQueue()
    try:
        with _worker_environment():
            pending = {}
            for t in tasks:
                fut = pool.submit(analyze_file, t)
                pending[fut] = t
                fut.add_done_callback(done.put)
        done_count = 0
        while pending:
            if _cancelled(cancel):
                raise BatchCancelled(done_count, len(tasks))
            try:
                fut = done.get(timeout=_POLL_S)
            except queue.Empty:
                continue
            task = pending.pop(fut)
            done_count += 1
            yield _pool_outcome(fut, task)
        finished = True
    finally:
        if finished:
            pool.shutdown(wait=True)
        else:
            _stop_pool(pool)


def _pool_outcome(fut: _cf.Future, task: FileTask) -> FileOutcome:
    try:
        return fut.result()
    except _cf.process.BrokenProcessPool:
        return FileOutcome(
            task.index, task.path,
            fault=f"a worker process died while {task.path} was running or waiting (out of memory, or "
            "killed); the pool stopped with it: analyse this file again on its own to see whether it is the cause\n",
        )
    except Exception:
        return FileOutcome(task.index, task.path, fault=traceback.format_exc())


def _connect(scheduler: str) -> Any:
    try:
        from dask.distributed import Client  # optional extra (upstroke[cluster]); only a cluster batch needs it
    except ImportError:
        raise ClusterError(None, "--scheduler needs Dask distributed, which is not installed", CLUSTER_FIX) from None
    try:
        return Client(scheduler, timeout=f"{CONNECT_TIMEOUT_S}s", set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ClusterError(
            None, f"cannot reach the Dask scheduler at {scheduler} ({type(exc).__name__}: {exc})",
            "start one with `dask scheduler` and workers with `dask worker ADDRESS`, or check the address",
        ) from None


def _run_dask(tasks: Sequence[FileTask], scheduler: str | Any, cancel: Any) -> Iterator[FileOutcome]:
    own_client = isinstance(scheduler, str)
    client = _connect(scheduler) if own_client else scheduler
    from dask.distributed import as_completed  # optional extra (upstroke[cluster]); only a cluster batch needs it

    futs: dict[Any, FileTask] = {}
    finished = False
    try:
        for task in tasks:
            # pure=False: the same file analysed twice in one session is two tasks, never a
            # cached result from a file that may have changed since.
            fut = client.submit(analyze_file, task, pure=False, key=f"upstroke-file-{task.index}-{_token()}")
            futs[fut] = task
        queue = as_completed(list(futs), loop=client.loop)
        done_count = 0
        while not queue.is_empty():
            if _cancelled(cancel):
                raise BatchCancelled(done_count, len(tasks))
            if not queue.has_ready():
                time.sleep(_POLL_S)
                continue
            for fut in queue.next_batch(block=False):
                task = futs.pop(fut)
                done_count += 1
                yield _dask_outcome(fut, task)
                fut.release()
        finished = True
    finally:
        if not finished and futs:
            client.cancel(list(futs))
        if own_client:
            client.close()


def _dask_outcome(fut: Any, task: FileTask) -> FileOutcome:
    if fut.status == "error":
        exc = fut.exception()
        text = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
        return FileOutcome(task.index, task.path, fault=text)
    if fut.status == "cancelled":
        return FileOutcome(task.index, task.path, fault="the cluster cancelled the task\n")
    return fut.result()


def _token() -> str:
    return f"{os.getpid():x}{time.monotonic_ns():x}"
