"""This process and the processes it forks.

**Forked work** (:func:`start_forked`): the writing of large tables and the drawing of a
second figure at the end of the ranking step. A child forked from this process sees its
memory as it is at the fork (tables, settings, imported modules): nothing is pickled or
imported again. Each child runs its jobs, then sends one line back: empty when they all
succeeded, else the first line of the error. Where fork is not available (Windows, macOS
spawn defaults), or inside a daemonic worker that may not have children, the jobs run here
at once and ``wait`` has nothing to do.

**Freed memory kept for reuse** (:func:`keep_freed_memory`). The ranking of a large library
allocates and frees arrays of tens of MB many times (one per block of Monte Carlo draws, per
block of scored picks). glibc's malloc serves each such array by a fresh ``mmap`` and returns
it on ``free``, so every block touches new pages and takes one page fault per page: measured
on this project's 2-core VM, the next-experiment step of 100,000 candidates took about 27,000
page faults and 1 s of system time that way, and about 1,400 faults and 0.5 s when freed
memory stays in the heap (``benchmarks/rank_command_bench.py`` measures the whole command).
Peak memory is unchanged: what is kept is what the command has already used and will use
again. The tuning is glibc's own, documented in mallopt(3): ``M_MMAP_THRESHOLD`` (requests
this large or larger get their own mapping), ``M_TRIM_THRESHOLD`` (free memory at the top of
the heap above this is given back) and ``M_ARENA_MAX`` (one heap shared by every thread, so
the worker threads of the Monte Carlo reuse each other's blocks); pyarrow, which formats the
CSV tables, is told to allocate through the same heap. Writing the 100,000-row ranking.csv
took 0.37-0.67 s of system time with pyarrow's own pool and 0.05 s this way. Elsewhere
(macOS, musl) nothing changes.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import os
import sys
from typing import Any, Callable, Sequence

from redoxfront.errors import DataError

Job = Callable[[], Any]


def can_fork() -> bool:
    """True where this process may fork workers of its own."""
    import multiprocessing

    return "fork" in multiprocessing.get_all_start_methods() and not multiprocessing.current_process().daemon


def start_forked(groups: Sequence[Sequence[Job]], what: str) -> Callable[[], None]:
    """Run each group of jobs in its own forked child, in order within a group; return
    ``wait``, which joins every child and raises one :class:`DataError` naming ``what`` and
    the first reason if any job failed. Without fork the jobs run here before this returns
    (their errors are raised as they are)."""
    groups = [list(g) for g in groups if g]
    if not can_fork():
        for group in groups:
            for job in group:
                job()
        return lambda: None
    import multiprocessing

    ctx = multiprocessing.get_context("fork")
    children = []
    for k, group in enumerate(groups):
        receive, send = ctx.Pipe(duplex=False)
        child = ctx.Process(target=_child, args=(group, send), name=f"redoxfront-{k}")
        child.start()
        send.close()
        children.append((child, receive))

    def wait() -> None:
        problem = next((p for p in [_reply(receive, child) for child, receive in children] if p), "")
        if problem:
            raise DataError(f"{what} failed: {problem}")

    return wait


def _reply(conn: Any, process: Any) -> str:
    """A child's one line ('' when its jobs succeeded), once it has ended; the connection closed."""
    try:
        problem = conn.recv()
    except EOFError:
        problem = "the process ended without a word"
    finally:
        conn.close()
        process.join()
    if process.exitcode != 0 and not problem:
        problem = f"exit code {process.exitcode}"
    return problem


class PreparedChild:
    """A child process forked now, which imports ``modules`` while this process goes on, then
    waits for the one batch of jobs :meth:`start` sends it.

    For work whose slow start (importing matplotlib takes about 1 s) can run on an idle core
    while this process reads and computes: the ranking command forks one before it reads its
    tables, and hands it the figures once the ranking is known. The jobs are pickled to the
    child (module-level functions travel by name; tables as data). If this process ends or
    :meth:`close` is called before any jobs come, the child ends too. Where fork is not
    available the jobs run here, in :meth:`start`.
    """

    def __init__(self, modules: Sequence[str]) -> None:
        self._conn = None
        self._process = None
        if not can_fork():
            return
        import multiprocessing

        ctx = multiprocessing.get_context("fork")
        self._conn, child_end = ctx.Pipe()
        self._process = ctx.Process(target=_prepared, args=(tuple(modules), child_end, self._conn),
                                    name="redoxfront-prepared")
        self._process.start()
        child_end.close()

    def start(self, groups: Sequence[Sequence[Job]], what: str) -> Callable[[], None]:
        """Hand the child its jobs: the first group it runs itself, each further group in a
        child of its own (:func:`start_forked`); return ``wait`` as :func:`start_forked` does."""
        if self._conn is None:
            return start_forked(groups, what)
        conn, self._conn = self._conn, None
        try:
            conn.send([list(g) for g in groups])
        except (BrokenPipeError, EOFError, OSError) as exc:
            raise DataError(f"{what} failed: the prepared process is gone ({type(exc).__name__})") from exc
        process = self._process

        def wait() -> None:
            problem = _reply(conn, process)
            if problem:
                raise DataError(f"{what} failed: {problem}")

        return wait

    def close(self) -> None:
        """End the child if it got no jobs (nothing to do once :meth:`start` has run)."""
        if self._conn is not None:
            self._conn.close()
            self._conn = None
            self._process.join()

    def __enter__(self) -> "PreparedChild":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _prepared(modules: tuple[str, ...], conn: Any, parent_end: Any) -> None:
    """Body of a :class:`PreparedChild`: import, wait for jobs (none: end), run, report."""
    import importlib

    parent_end.close()  # only the parent's end stays open in the parent: its exit reads as EOF here
    try:
        for name in modules:
            importlib.import_module(name)
        try:
            groups = conn.recv()
        except EOFError:
            return
        try:
            wait = start_forked(groups[1:], "")
            for job in groups[0] if groups else ():
                job()
            wait()
            conn.send("")
        except DataError as exc:  # a grandchild's one line (what: ''), or a job's own
            conn.send(str(exc).removeprefix(" failed: ").splitlines()[0])
        except BaseException as exc:  # noqa: BLE001 - the parent turns it into one DataError line
            conn.send(f"{type(exc).__name__}: {exc}".splitlines()[0] if str(exc) else type(exc).__name__)
    finally:
        conn.close()


def _child(jobs: list[Job], send: Any) -> None:
    """Body of a child: run the jobs, then report '' or the one-line reason."""
    try:
        for job in jobs:
            job()
        send.send("")
    except BaseException as exc:  # noqa: BLE001 - the parent turns it into one DataError line
        send.send(f"{type(exc).__name__}: {exc}".splitlines()[0] if str(exc) else type(exc).__name__)
    finally:
        send.close()

M_TRIM_THRESHOLD = -1
M_MMAP_THRESHOLD = -3
M_ARENA_MAX = -8
"""mallopt(3) parameter numbers of glibc (malloc.h)."""

MMAP_THRESHOLD_BYTES = 512 * 2**20
"""Only requests of 512 MiB or more get their own mapping (glibc's default is 128 KiB, rising
to at most 32 MiB as blocks are freed)."""
TRIM_THRESHOLD_BYTES = 1024 * 2**20
"""Free memory at the top of the heap is given back only above 1 GiB."""
ARROW_POOL_VARIABLE = "ARROW_DEFAULT_MEMORY_POOL"
"""pyarrow's setting of its memory pool; 'system' is the C library's malloc."""


def keep_freed_memory() -> bool:
    """Tune glibc's malloc as the module docstring says; True when it took effect.

    Call it once, early, in a process that allocates large temporary arrays repeatedly (the
    command line does, for every command). Returns False, changing nothing, where the C
    library is not glibc.
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        mallopt = libc.mallopt
        libc.gnu_get_libc_version  # only glibc has it  # noqa: B018
    except (OSError, AttributeError):
        return False
    # pyarrow (the CSV writer) allocates through the same heap, not its own (mimalloc gives
    # pages back as it frees them); read by pyarrow when it first allocates
    os.environ.setdefault(ARROW_POOL_VARIABLE, "system")
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    done = [mallopt(M_MMAP_THRESHOLD, MMAP_THRESHOLD_BYTES), mallopt(M_TRIM_THRESHOLD, TRIM_THRESHOLD_BYTES),
            mallopt(M_ARENA_MAX, 1)]
    return all(r == 1 for r in done)
