"""Where tasks run: in this process, a local process pool, or a Dask cluster.

One function, :func:`map_tasks`, yields results as tasks finish, with a tqdm
progress bar. Workers x threads per worker is kept at or below the cores of this
machine for the local pool; on Dask the cluster's own worker settings apply
(distributed sets OMP_NUM_THREADS=1 in its worker processes by default).
"""

from __future__ import annotations

import importlib.util
import itertools
import multiprocessing
import os
import sys
import threading
import time
import warnings
from contextlib import contextmanager
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from typing import Any, Callable, Iterable, Iterator

from tqdm.auto import tqdm

from redoxfront.campaign import THREAD_VARIABLES


PARENT_CHECK_S = 0.5
"""How often a pool worker checks that the process that started it is still alive, s."""


def exit_with_parent(parent_pid: int, kernel_signal: bool) -> None:
    """Make this worker end when ``parent_pid`` dies, even by kill -9 (which runs no clean-up).

    Linux: the kernel sends SIGKILL to the worker when its parent dies (``prctl``
    PR_SET_PDEATHSIG, used only when the pool was started from the main thread, since the
    signal follows the starting thread). Everywhere: a daemon thread checks every
    :data:`PARENT_CHECK_S` seconds that the parent is still the worker's parent and
    ends the worker at once when it is not (an orphan is re-parented).
    """
    if kernel_signal and sys.platform.startswith("linux"):
        try:
            import ctypes
            import signal

            ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL), 0, 0, 0)  # PR_SET_PDEATHSIG = 1
        except (OSError, AttributeError):
            pass
    if os.getppid() != parent_pid:  # the parent died before the signal was set up
        os._exit(1)

    def watch() -> None:
        while True:
            time.sleep(PARENT_CHECK_S)
            if os.getppid() != parent_pid:
                os._exit(1)

    threading.Thread(target=watch, name="parent-watch", daemon=True).start()


def _init_worker(threads: int, parent_pid: int | None = None, kernel_signal: bool = False) -> None:
    for var in THREAD_VARIABLES:
        os.environ[var] = str(threads)
    if parent_pid is not None:
        exit_with_parent(parent_pid, kernel_signal)


@contextmanager
def _thread_environment(threads: int) -> Iterator[None]:
    """Set the thread variables to ``threads`` for what starts inside (child processes read them
    when they start); this process's own values are put back after."""
    saved = {v: os.environ.get(v) for v in THREAD_VARIABLES}
    for var in THREAD_VARIABLES:
        os.environ[var] = str(threads)
    try:
        yield
    finally:
        for var, value in saved.items():
            if value is None:
                os.environ.pop(var, None)
            else:
                os.environ[var] = value


def _start_method(threads_per_worker: int) -> str:
    """'fork' when cheap and safe, else 'spawn'.

    Forking shares the parent's imported modules (fast start) but also its thread
    settings: it is used only on Linux, while the engine's OpenMP runtime is not loaded
    in this process, and when the thread variables already say ``threads_per_worker``.
    """
    same_threads = all(os.environ.get(v) == str(threads_per_worker) for v in THREAD_VARIABLES)
    if sys.platform.startswith("linux") and "tblite" not in sys.modules and same_threads:
        return "fork"
    return "spawn"


def plan_workers(workers: int, threads_per_worker: int) -> int:
    """Workers for the local pool so that workers x threads <= cores."""
    cores = os.cpu_count() or 1
    fit = max(1, cores // max(1, threads_per_worker))
    if workers > fit:
        warnings.warn(
            f"{workers} workers x {threads_per_worker} threads exceeds {cores} cores; using {fit} workers",
            stacklevel=2,
        )
    return min(workers, fit)


def default_window(workers: int) -> int:
    """Tasks in flight at once: enough to keep every worker busy while the driver handles a
    result (the pool queues one more per worker), few enough that the driver holds only a
    few tasks' inputs and results."""
    return max(2, 3 * workers)


def map_tasks(
    func: Callable[..., Any],
    items: Iterable[Any],
    *,
    args: tuple[Any, ...] = (),
    workers: int = 1,
    threads_per_worker: int = 1,
    dask_address: str | None = None,
    progress: bool = True,
    desc: str = "tasks",
    total: int | None = None,
    window: int | None = None,
    unit: str = "mol",
) -> Iterator[Any]:
    """Yield ``func(item, *args)`` for every item, in completion order.

    ``items`` may be a lazy iterable (a generator that reads or looks up what each task needs):
    it is drawn one item at a time as tasks finish, with at most ``window`` tasks in flight
    (default :func:`default_window`), so the driver holds a bounded number of tasks' inputs
    and results whatever the number of items. ``total``: the number of items, for the
    progress bar, when ``items`` has no length.

    ``dask_address``: a scheduler address ('tcp://host:8786'), or 'local' for a
    LocalCluster on this machine; None uses the local process pool (or this
    process when ``workers == 1``).
    """
    if total is None and hasattr(items, "__len__"):
        total = len(items)  # type: ignore[arg-type]
    bar = tqdm(total=total, desc=desc, disable=not progress, unit=unit)
    try:
        if dask_address is not None:
            yield from _map_dask(func, items, args, workers, dask_address, bar, window)
            return
        workers = plan_workers(workers, threads_per_worker)
        if workers == 1 or (total is not None and total <= 1):
            if "tblite" not in sys.modules:  # OpenMP reads its thread count once, at load
                for var in THREAD_VARIABLES:
                    os.environ.setdefault(var, str(threads_per_worker))
            for item in items:
                yield func(item, *args)
                bar.update(1)
            return
        method = _start_method(threads_per_worker)
        ctx = multiprocessing.get_context(method)
        watch = (threads_per_worker, os.getpid(), threading.current_thread() is threading.main_thread())
        with _thread_environment(threads_per_worker):  # spawned children inherit these at start
            with ProcessPoolExecutor(workers, mp_context=ctx, initializer=_init_worker,
                                     initargs=watch) as pool:
                if method == "fork":  # fork every worker now, before ``items`` opens a store or a file
                    pool.submit(os.getpid).result()
                yield from _windowed(lambda item: pool.submit(func, item, *args), items,
                                     window or default_window(workers), bar)
    finally:
        bar.close()


def _windowed(submit: Callable[[Any], Future], items: Iterable[Any], window: int, bar: Any) -> Iterator[Any]:
    """Keep ``window`` futures in flight; yield results as they finish; draw the next item only
    when one has finished."""
    source = iter(items)
    running: set[Future] = set()
    for item in itertools.islice(source, window):
        running.add(submit(item))
    while running:
        finished, running = wait(running, return_when=FIRST_COMPLETED)
        for fut in finished:
            result = fut.result()
            for item in itertools.islice(source, 1):
                running.add(submit(item))
            yield result
            bar.update(1)


WORKER_PRELOAD = ("distributed", "numpy", "rdkit.Chem", "rdkit.Chem.AllChem", "tblite.interface",
                  "redoxfront.compute.step", "redoxfront.compute.fast_tier")
"""Modules a local cluster's worker processes start with: imported once, in the server process
they are forked from, instead of once in every worker."""


def start_worker_server() -> None:
    """Start the server process a local cluster's workers are forked from, now (Linux only).

    The server imports the task modules (:data:`WORKER_PRELOAD`, about 0.8 s of CPU) once, and
    every worker is forked from it instead of importing everything again. A command given
    ``--cluster local`` calls this first, so that the server imports on another core while the
    command imports and reads its inputs. It does nothing off Linux or when the server is
    already running. The server starts with one thread per worker in its environment (the
    engine's OpenMP reads it once, at load) and ends with this process.
    """
    if not sys.platform.startswith("linux"):
        return
    from multiprocessing import forkserver

    modules = [m for m in WORKER_PRELOAD if importlib.util.find_spec(m.split(".")[0]) is not None]
    multiprocessing.get_context("forkserver").set_forkserver_preload(modules)
    with _thread_environment(1):
        forkserver.ensure_running()


def _worker_start_method() -> str:
    """'forkserver' on Linux (:func:`start_worker_server`), else Dask's default 'spawn' (every
    worker imports afresh)."""
    if not sys.platform.startswith("linux"):
        return "spawn"
    start_worker_server()
    import distributed.utils as dask_utils

    dask_utils._forkserver_preload_set = True  # the server runs: distributed's own list (pandas and more) is not needed
    return "forkserver"


LOCAL_CLUSTER_CONFIG = {
    "distributed.worker.memory.monitor-interval": "2s",
    "distributed.admin.system-monitor.interval": "2s",
    "distributed.admin.tick.interval": "1s",
    "distributed.worker.profile.enabled": False,
}
"""Dask settings of a local cluster (the defaults: 0.1-0.5 s, 0.5 s, 20 ms and a statistical
profiler sampling every worker's stack every 10 ms, all for a dashboard it does not start).
Measured on our 2-core VM with 2 idle workers: 2.7 s of CPU per 20 s with Dask's defaults
(driver 1.2 s, each worker 0.8 s), 0.3 s with these."""


def _local_cluster(workers: int) -> Any:
    """A LocalCluster of ``workers`` single-threaded worker processes, started lean.

    The parent shares the cores with the workers, so the cluster's own bookkeeping is kept small:
    no dashboard, :data:`LOCAL_CLUSTER_CONFIG` (which the nannies pass on to their workers), and
    on Linux the workers forked from a server process that imported the task modules once
    (:func:`start_worker_server`).
    """
    import dask
    from distributed import LocalCluster

    config = {**LOCAL_CLUSTER_CONFIG, "distributed.worker.multiprocessing-method": _worker_start_method()}
    with dask.config.set(config), _thread_environment(1):  # spawned workers read the thread variables
        return LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None)


def _map_dask(func, items, args, workers, address, bar, window) -> Iterator[Any]:
    from distributed import Client
    from distributed import as_completed as dask_as_completed

    cluster = None
    if address == "local":
        cluster = _local_cluster(workers)
        client = Client(cluster)
    else:
        client = Client(address)
    try:
        size = window or default_window(len(client.scheduler_info().get("workers", {})) or workers)
        source = iter(items)
        done = dask_as_completed([client.submit(func, item, *args, pure=False)
                                  for item in itertools.islice(source, size)])
        for fut in done:
            result = fut.result()
            fut.release()
            for item in itertools.islice(source, 1):
                done.add(client.submit(func, item, *args, pure=False))
            yield result
            bar.update(1)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
