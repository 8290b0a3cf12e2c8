"""Where tasks run: in this process, a local process pool, or a Dask cluster.

One function, :func:`map_tasks`, yields results as tasks finish, with a tqdm
progress bar. Workers x threads per worker is kept at or below the cores of this
machine for the local pool; on Dask the cluster's own worker settings apply
(distributed sets OMP_NUM_THREADS=1 in its worker processes by default).
"""

from __future__ import annotations

import multiprocessing
import os
import sys
import threading
import time
import warnings
from concurrent.futures import ProcessPoolExecutor, as_completed
from typing import Any, Callable, Iterator, Sequence

from tqdm.auto import tqdm

from redoxfront.campaign import THREAD_VARIABLES


PARENT_CHECK_S = 0.5
"""How often a pool worker checks that the process that started it is still alive, s."""


def _exit_with_parent(parent_pid: int, kernel_signal: bool) -> None:
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
        _exit_with_parent(parent_pid, kernel_signal)


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


def map_tasks(
    func: Callable[..., Any],
    items: Sequence[Any],
    *,
    args: tuple[Any, ...] = (),
    workers: int = 1,
    threads_per_worker: int = 1,
    dask_address: str | None = None,
    progress: bool = True,
    desc: str = "tasks",
) -> Iterator[Any]:
    """Yield ``func(item, *args)`` for every item, in completion order.

    ``dask_address``: a scheduler address ('tcp://host:8786'), or 'local' for a
    LocalCluster on this machine; None uses the local process pool (or this
    process when ``workers == 1``).
    """
    bar = tqdm(total=len(items), desc=desc, disable=not progress, unit="mol")
    try:
        if dask_address is not None:
            yield from _map_dask(func, items, args, workers, dask_address, bar)
            return
        workers = plan_workers(workers, threads_per_worker)
        if workers == 1 or len(items) <= 1:
            if "tblite" not in sys.modules:  # OpenMP reads its thread count once, at load
                for var in THREAD_VARIABLES:
                    os.environ.setdefault(var, str(threads_per_worker))
            for item in items:
                yield func(item, *args)
                bar.update(1)
            return
        ctx = multiprocessing.get_context(_start_method(threads_per_worker))
        saved = {v: os.environ.get(v) for v in THREAD_VARIABLES}
        _init_worker(threads_per_worker)  # spawned children inherit these at start
        try:
            watch = (threads_per_worker, os.getpid(), threading.current_thread() is threading.main_thread())
            with ProcessPoolExecutor(workers, mp_context=ctx, initializer=_init_worker,
                                     initargs=watch) as pool:
                futures = [pool.submit(func, item, *args) for item in items]
                for fut in as_completed(futures):
                    yield fut.result()
                    bar.update(1)
        finally:
            for var, value in saved.items():
                if value is None:
                    os.environ.pop(var, None)
                else:
                    os.environ[var] = value
    finally:
        bar.close()


def _map_dask(func, items, args, workers, address, bar) -> Iterator[Any]:
    from distributed import Client, LocalCluster
    from distributed import as_completed as dask_as_completed

    cluster = None
    if address == "local":
        cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                               dashboard_address=None)
        client = Client(cluster)
    else:
        client = Client(address)
    try:
        futures = [client.submit(func, item, *args, pure=False) for item in items]
        for fut in dask_as_completed(futures):
            yield fut.result()
            bar.update(1)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
