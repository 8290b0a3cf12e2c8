"""Work done by forked child processes while this process goes on (the writing of large
tables and the drawing of a second figure at the end of the ranking step).

A child forked from this process sees its memory as it is at the fork (tables, settings,
imported modules): nothing is pickled or imported again. Each child runs its jobs, then
sends one line back: empty when they all succeeded, else the first line of the error.
Where fork is not available (Windows, macOS spawn defaults), or inside a daemonic worker
that may not have children, the jobs run here at once and ``wait`` has nothing to do.
"""

from __future__ import annotations

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
        problems = []
        for child, receive in children:
            try:
                problems.append(receive.recv())
            except EOFError:
                problems.append("the process ended without a word")
            finally:
                receive.close()
                child.join()
            if child.exitcode != 0 and not problems[-1]:
                problems[-1] = f"exit code {child.exitcode}"
        problem = next((p for p in problems if p), "")
        if problem:
            raise DataError(f"{what} failed: {problem}")

    return wait


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
