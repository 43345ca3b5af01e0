"""Where parallel work runs: this process, local worker processes, or an existing Dask cluster.

One small front for every step that fans work out: :class:`Executor` has a ``map`` (ordered
results, like the built-in) and a ``map_seeded`` that hands each task its own seed, spawned from
one ``numpy.random.SeedSequence`` by task position. A seeded result therefore depends on the seed
and the task list only, never on the backend or the number of workers.

Backends, by the settings of ``[compute]`` in the config (or ``--scheduler``/``--workers`` on
the command line):

- ``workers = 1``: the tasks run one after the other in this process;
- ``workers = N`` (nothing set: the CPUs this process may use): N local processes. On Linux
  these are forked copies of this process (:func:`share_tasks`): they start in milliseconds
  with everything already imported and computed, and nothing is shipped to them. Elsewhere
  joblib's loky workers, which import the stack afresh and are sent the function and data with
  cloudpickle (seconds to start);
- ``scheduler = "tcp://host:8786"``: an existing Dask cluster, through ``distributed.Client``.
  We start no scheduler of our own; start one with Dask's own tools.

Two more shapes of parallel work use the same forked copies (and run in this process where
forking is unsafe or one worker is set): :func:`share_tasks`, tasks of uneven cost that each
process takes in turn (the month's figures), and :func:`in_background`, one long piece of work
that runs while this process goes on (the forecast beside the other analyses; the bundle's
tables, layers and interactive map beside the figures). A copy's warnings are raised again here
and its errors raised here, so a run behaves the same with any number of workers.

This module sits low in the layering (it imports only :mod:`marchland.errors`) and imports
joblib and distributed only when a parallel map is asked for, so ``marchland check`` and
``--help`` stay quick.
"""

from __future__ import annotations

import contextlib
import functools
import os
import re
import sys
import warnings
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .errors import InputError

__all__ = [
    "SCHEDULER_PATTERN",
    "Executor",
    "default_workers",
    "get_executor",
    "one_blas_thread",
    "release_memory",
    "share_tasks",
]

#: Accepted scheduler addresses: a Dask network protocol, a host and an optional port (or an
#: in-process ``inproc://`` address, as a ``LocalCluster(processes=False)`` has).
SCHEDULER_PATTERN = re.compile(r"^((tcp|tls|ucx|ws|wss)://[^\s/:]+(:\d{1,5})?/?|inproc://\S+)$")


def default_workers() -> int:
    """Return the worker processes used when none is set: the CPUs this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover  (not on Linux)
        return max(1, os.cpu_count() or 1)


@contextlib.contextmanager
def one_blas_thread() -> Iterator[None]:
    """Run the enclosed code with the BLAS library (OpenBLAS, MKL) on one thread.

    marchland's parallel work is processes (forked copies, Dask workers), each busy with its
    own task: BLAS threads on top would only compete for the same cores (OpenBLAS threads
    also spin while they wait, which counts as CPU time). One thread also makes matrix
    products add up in the same order on every machine, whatever its number of cores, so a
    month's numbers do not depend on where it ran. Forked copies inherit the setting.
    """
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1, user_api="blas"):
        yield


def release_memory() -> None:
    """Hand memory this process has freed back to the operating system.

    Between the steps of a large run most freed memory stays with the allocators (glibc's
    heap, Arrow's pool of string columns) and keeps counting in the process's resident size,
    which every forked copy then starts from: at 10,000 units it was 0.19 of 0.80 GB after
    reading the inputs. Nothing is freed that is in use; no values change. Where glibc is not
    the C library (macOS, Windows, musl) only Arrow's pool is asked.
    """
    pa = sys.modules.get("pyarrow")
    if pa is not None:
        pa.default_memory_pool().release_unused()
    trim = _malloc_trim()
    if trim is not None:
        trim(0)


@functools.cache
def _malloc_trim() -> Any:
    """Return glibc's ``malloc_trim``, or None where the C library has none."""
    import ctypes
    import ctypes.util

    if not sys.platform.startswith("linux"):
        return None
    try:
        return ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6").malloc_trim
    except (OSError, AttributeError):  # pragma: no cover  (musl and others)
        return None


@dataclass
class Executor:
    """A ``map`` over tasks on one backend; use as a context manager to release workers.

    Parameters
    ----------
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``). When given, ``workers`` is
        ignored: the cluster decides.
    workers : int, default 1
        Local worker processes when no scheduler is given; 1 runs in this process.

    Examples
    --------
    >>> with Executor(workers=1) as ex:
    ...     ex.map(abs, [-1, 2, -3])
    [1, 2, 3]
    >>> def draw(n, seed):
    ...     return float(np.random.default_rng(seed).random())
    >>> with Executor() as ex:
    ...     a = ex.map_seeded(draw, [1, 2, 3], seed=7)
    >>> a == Executor().map_seeded(draw, [1, 2, 3], seed=7)
    True
    """

    scheduler: str | None = None
    workers: int = 1
    _client: Any = field(default=None, init=False, repr=False)

    def __post_init__(self) -> None:
        if self.scheduler is not None and not SCHEDULER_PATTERN.match(str(self.scheduler)):
            raise InputError(
                "needs a Dask scheduler address such as 'tcp://host:8786'",
                column="compute.scheduler",
                value=self.scheduler,
            )
        if (
            isinstance(self.workers, bool)
            or not isinstance(self.workers, (int, np.integer))
            or self.workers < 1
        ):
            raise InputError(
                "needs a whole number >= 1", column="compute.workers", value=self.workers
            )

    @property
    def backend(self) -> str:
        """``"dask"``, ``"processes"`` or ``"serial"``."""
        if self.scheduler is not None:
            return "dask"
        return "processes" if self.workers > 1 else "serial"

    @property
    def forks(self) -> bool:
        """Whether local workers are forked copies of this process (cheap to start)."""
        return self.backend == "processes" and _can_fork()

    @property
    def parallelism(self) -> int:
        """Tasks that can run at once (Dask: the cluster's worker threads)."""
        if self.scheduler is None:
            return self.workers
        threads = self._connect().nthreads()
        return max(1, sum(threads.values()))

    def _connect(self) -> Any:
        if self._client is None:
            from distributed import Client

            try:
                self._client = Client(self.scheduler, timeout="10s", set_as_default=False)
            except OSError as exc:
                raise InputError(
                    f"cannot reach the Dask scheduler ({exc}); start it first or leave "
                    "[compute] scheduler unset to run on this machine",
                    column="compute.scheduler",
                    value=self.scheduler,
                ) from None
        return self._client

    def map(self, fn: Callable[..., Any], items: Iterable[Any], *args: Any) -> list[Any]:
        """Return ``[fn(item, *args) for item in items]``, the tasks spread over the backend.

        ``fn`` and the items must pickle (a module-level function, plain data) unless the
        backend is serial. Results come back in the order of ``items``.
        """
        items = list(items)
        if self.backend == "serial" or len(items) < 2:
            return [fn(item, *args) for item in items]
        if self.backend == "processes":
            k = min(self.workers, len(items))
            if self.forks:
                return share_tasks(lambda i: fn(items[i], *args), len(items), workers=k)
            from joblib import Parallel, delayed

            return list(Parallel(n_jobs=k, backend="loky")(delayed(fn)(i, *args) for i in items))
        client = self._connect()
        shared = [client.scatter(a, broadcast=True) for a in args]
        futures = client.map(fn, items, *[[s] * len(items) for s in shared], pure=False)
        return client.gather(futures)

    def map_seeded(
        self, fn: Callable[..., Any], items: Iterable[Any], *args: Any, seed: int | None
    ) -> list[Any]:
        """Like :meth:`map`, calling ``fn(item, *args, task_seed)`` with a seed per task.

        Task seeds are ``SeedSequence(seed).spawn(n)`` in task order: the same ``seed`` and
        items give the same results on every backend and any number of workers.
        """
        items = list(items)
        seeds = np.random.SeedSequence(seed).spawn(len(items))
        return self.map(_seeded_call, list(zip(items, seeds, strict=True)), fn, *args)

    def close(self) -> None:
        """Disconnect from the Dask cluster (local workers are managed by joblib)."""
        if self._client is not None:
            self._client.close()
            self._client = None

    def __enter__(self) -> Executor:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _seeded_call(pair: tuple[Any, np.random.SeedSequence], fn: Callable[..., Any], *args: Any):
    item, seed = pair
    return fn(item, *args, seed)


def get_executor(
    compute: Any = None, *, scheduler: str | None = None, workers: int | None = None
) -> Executor:
    """Build the executor for a run from a ``[compute]`` config part and command-line overrides.

    Parameters
    ----------
    compute : object, optional
        Anything with ``scheduler`` and ``workers`` attributes (``Config.compute``).
    scheduler, workers : optional
        Command-line values; they win over the config's.

    Returns
    -------
    Executor

    Examples
    --------
    >>> get_executor(workers=2).backend
    'processes'
    >>> get_executor(scheduler="tcp://10.0.0.5:8786").backend
    'dask'
    """
    sched = scheduler if scheduler is not None else getattr(compute, "scheduler", None)
    n = workers if workers is not None else getattr(compute, "workers", None)
    return Executor(scheduler=sched or None, workers=default_workers() if n is None else int(n))


def share_tasks(
    fn: Callable[[int], Any],
    n: int,
    *,
    workers: int,
    done: Callable[[int, int], None] | None = None,
) -> list[Any]:
    """Return ``[fn(0), ..., fn(n - 1)]``, computed here and in ``workers - 1`` forked copies.

    For work that needs what this process holds in memory (a month's results, figures that
    do not pickle) and whose tasks differ in cost: each process takes the next task nobody has
    taken (one shared counter), so a long task does not hold the others up. The copies are
    made by ``fork``, so they start at once with everything already imported and computed;
    :class:`Executor`'s workers would import the stack afresh and be sent the data. Where
    ``fork`` is not the platform's safe choice (Windows, macOS) or one worker is asked for, the
    tasks run here one after the other; results are the same either way.

    Parameters
    ----------
    fn : callable
        ``fn(i)`` runs task ``i``; its result must pickle and should be small (it travels back
        over a pipe): write large outputs to files.
    n : int
        Number of tasks.
    workers : int
        Processes in all, this one included.
    done : callable, optional
        Called here as ``done(finished, n)`` whenever this process learns of a finished task.

    Returns
    -------
    list
        Results in task order.

    Raises
    ------
    Exception
        The first error a task raised, in whichever process it ran.

    Examples
    --------
    >>> share_tasks(lambda i: i * i, 5, workers=2)
    [0, 1, 4, 9, 16]
    """
    forking = workers > 1 and n > 1 and _can_fork()
    if not forking:
        out = []
        for i in range(n):
            out.append(fn(i))
            if done is not None:
                done(i + 1, n)
        return out
    import multiprocessing as mp
    import queue as queue_mod

    ctx = mp.get_context("fork")
    counter = ctx.Value("i", 0)
    results = ctx.Queue()
    procs = [
        ctx.Process(target=_take_tasks, args=(fn, n, counter, results, os.getpid()), daemon=True)
        for _ in range(min(workers, n) - 1)
    ]
    for p in procs:
        _start(p)
    got: dict[int, Any] = {}

    def receive(value: tuple[int, bool, Any]) -> None:
        i, ok, payload = value
        got[i] = _deliver(ok, payload)
        if done is not None:
            done(len(got), n)

    try:
        while (i := _next_task(counter, n)) is not None:
            receive((i, True, (fn(i), [])))  # done here: its warnings were raised here
            while True:
                try:
                    receive(results.get_nowait())
                except queue_mod.Empty:
                    break
        while len(got) < n:
            try:
                receive(results.get(timeout=1.0))
            except queue_mod.Empty:
                dead = [p for p in procs if p.exitcode not in (None, 0)]
                if dead:
                    raise RuntimeError(
                        f"a worker process stopped (exit code {dead[0].exitcode}) before "
                        "finishing its task"
                    ) from None
    finally:
        for p in procs:
            if len(got) < n:
                p.terminate()
            p.join()
        results.close()
    return [got[i] for i in range(n)]


def _can_fork() -> bool:
    """Return whether work may be shared with forked copies of this process.

    Linux only: macOS's system libraries are not fork-safe and Windows cannot fork. Numba's
    parallel kernels (the cluster scan) must not run in a copy (their thread pool does not
    survive a fork); no task shared this way calls them.
    """
    return sys.platform.startswith("linux")


def _next_task(counter: Any, n: int) -> int | None:
    with counter.get_lock():
        i = counter.value
        if i >= n:
            return None
        counter.value = i + 1
    return i


def _take_tasks(fn: Callable[[int], Any], n: int, counter: Any, results: Any, parent: int) -> None:
    """Take tasks until none is left, sending back each result or the error (a forked copy)."""
    _die_with_parent(parent)
    while (i := _next_task(counter, n)) is not None:
        ok, payload = _captured(fn, i)
        results.put((i, ok, payload))
        if not ok:
            break
    results.close()
    results.join_thread()


def _die_with_parent(parent: int) -> None:
    """In a forked copy: be killed when ``parent``, the process that forked it, dies (Linux).

    A run killed midway (SIGKILL, no clean-up) must not leave a copy working on: one writing
    a month's tables into the partial folder would write again into what the next run clears.
    Linux's ``PR_SET_PDEATHSIG`` through libc; elsewhere nothing is done.
    """
    import ctypes
    import signal

    try:
        prctl = ctypes.CDLL(None, use_errno=True).prctl
    except (OSError, AttributeError):  # not Linux
        return
    prctl(1, signal.SIGKILL)  # 1: PR_SET_PDEATHSIG
    if os.getppid() != parent:  # the parent died before the call above
        os._exit(1)


def _start(process: Any) -> None:
    with warnings.catch_warnings():
        # Python 3.12+ warns that forking a process with threads may deadlock; ours are idle
        # library pools (BLAS, numba) and the copies only run the task given.
        warnings.filterwarnings("ignore", message=r".*use of fork\(\) may lead to deadlocks")
        process.start()


def _captured(fn: Callable[..., Any], *args: Any) -> tuple[bool, Any]:
    """Run ``fn`` in a forked copy: ``(True, (value, warnings))`` or ``(False, error)``.

    Warnings travel back with the value and are raised again in the calling process
    (:func:`_deliver`), so work done in a copy warns as it would have here.
    """
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            value = fn(*args)
        return True, (value, [(w.message, w.category, w.filename, w.lineno) for w in caught])
    except BaseException as exc:
        return False, _picklable(exc)


def _deliver(ok: bool, payload: Any) -> Any:
    """Return a copy's value after raising its warnings here, or raise its error here."""
    if not ok:
        raise payload
    value, said = payload
    for message, category, filename, lineno in said:
        warnings.warn_explicit(message, category, filename, lineno)
    return value


def _picklable(exc: BaseException) -> BaseException:
    import pickle
    import traceback

    try:
        pickle.loads(pickle.dumps(exc))
        return exc
    except Exception:
        text = "".join(traceback.format_exception(exc))
        return RuntimeError(f"a task failed in a worker process:\n{text}")


class Background:
    """One piece of work running in a forked copy of this process; :meth:`result` waits.

    Made by :func:`in_background`. Where the work could not be forked it has already run here
    and :meth:`result` returns (or raises) what it gave.
    """

    def __init__(self, fn: Callable[[], Any], fork: bool) -> None:
        self._process = self._conn = None
        self._outcome: tuple[bool, Any] | None = None
        if not fork:
            try:
                self._outcome = True, (fn(), [])
            except Exception as exc:
                self._outcome = False, exc
            return
        import multiprocessing as mp

        ctx = mp.get_context("fork")
        self._conn, child = ctx.Pipe(duplex=False)
        # Not a daemon: the work may share its own tasks with forked copies (share_tasks).
        self._process = ctx.Process(target=_send_back, args=(fn, child, os.getpid()))
        _start(self._process)
        child.close()

    def cancel(self) -> None:
        """Stop the work if it is still running (when its result will not be asked for)."""
        if self._outcome is None and self._process is not None:
            self._process.terminate()
            self._process.join()
            self._conn.close()
            self._outcome = False, RuntimeError("the work was cancelled")

    def result(self) -> Any:
        """Wait for the work; return its value (its warnings raised here) or raise its error."""
        if self._outcome is None:
            try:
                self._outcome = self._conn.recv()
            except EOFError:
                self._process.join()
                code = self._process.exitcode
                self._outcome = (
                    False,
                    RuntimeError(
                        f"a worker process stopped (exit code {code}) before finishing its task"
                    ),
                )
            finally:
                self._conn.close()
                if self._process.is_alive():
                    self._process.join()
        ok, payload = self._outcome
        value = _deliver(ok, payload)  # raises the work's error, or its warnings, here
        self._outcome = True, (value, [])  # asked again: the value, warnings not repeated
        return value


def in_background(fn: Callable[[], Any], *, workers: int = 2) -> Background:
    """Start ``fn()`` in a forked copy of this process while this one goes on.

    For a long step whose inputs are ready and whose output is needed later (the forecast
    while the other analyses run; the bundle's tables and layers while the figures are
    drawn). With ``workers`` below 2 or where forking is unsafe (not Linux), ``fn`` runs here
    at once. The value must pickle (it comes back over a pipe); warnings are raised here when
    :meth:`Background.result` is called.

    Examples
    --------
    >>> job = in_background(lambda: sum(range(10)))
    >>> job.result()
    45
    """
    return Background(fn, fork=workers > 1 and _can_fork())


def _send_back(fn: Callable[[], Any], conn: Any, parent: int) -> None:
    _die_with_parent(parent)
    conn.send(_captured(fn))
    conn.close()
