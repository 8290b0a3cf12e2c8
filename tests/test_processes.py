"""Work in forked children (figures and tables at the end of the ranking step) and the
process-wide memory tuning of the command line."""

from __future__ import annotations

import subprocess
from functools import partial
import sys
from pathlib import Path

import pytest

from redoxfront.errors import DataError
from redoxfront.processes import can_fork, start_forked


@pytest.mark.skipif(not can_fork(), reason="needs fork")
def test_forked_jobs_run_in_other_processes_and_wait_returns_when_all_are_done(tmp_path: Path) -> None:
    import os

    def write(name: str):
        return lambda: (tmp_path / name).write_text(str(os.getpid()))

    wait = start_forked([[write("a"), write("b")], [write("c")]], "writing three files")
    wait()
    pids = {name: int((tmp_path / name).read_text()) for name in "abc"}
    assert os.getpid() not in pids.values()  # none ran here
    assert pids["a"] == pids["b"] != pids["c"]  # one child per group, jobs in order within it


@pytest.mark.skipif(not can_fork(), reason="needs fork")
def test_a_failing_job_gives_one_line_naming_the_work_and_the_reason(tmp_path: Path) -> None:
    def fail() -> None:
        raise ValueError("no room left on the device\nsecond line")

    wait = start_forked([[fail], [lambda: (tmp_path / "ok").write_text("x")]], "drawing front.svg")
    with pytest.raises(DataError, match=r"^drawing front\.svg failed: ValueError: no room left on the device$"):
        wait()
    assert (tmp_path / "ok").read_text() == "x"  # the other child finished its work


FAULTS_AFTER_REUSE = """
import resource, sys
import numpy as np
if sys.argv[1] == "keep":
    from redoxfront.processes import keep_freed_memory
    assert keep_freed_memory()
a = np.ones(16_000_000); del a  # 128 MB touched, then freed
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
b = np.ones(16_000_000)  # the same size again
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc's malloc")
def test_freed_memory_is_reused_without_new_page_faults() -> None:
    # mallopt(3), glibc manual: by default a 128 MB block gets its own mapping and is unmapped
    # on free, so using the size again faults in every page (32,000 of 4 KiB, or 64 of 2 MiB with
    # huge pages); kept in the heap, it is reused without faults.
    def faults(mode: str) -> int:
        out = subprocess.run([sys.executable, "-c", FAULTS_AFTER_REUSE, mode], check=True,
                             capture_output=True, text=True)
        return int(out.stdout.strip())

    assert faults("default") >= 60
    assert faults("keep") < 30


@pytest.mark.skipif(not can_fork(), reason="needs fork")
def test_a_prepared_child_imports_first_then_runs_its_jobs_with_further_groups_in_their_own_children(
        tmp_path: Path) -> None:
    import os

    from redoxfront.processes import PreparedChild

    def note(name: str):
        return partial(_write_pid_and_modules, tmp_path / name)

    with PreparedChild(("json", "colorsys")) as child:
        wait = child.start([[note("a"), note("b")], [note("c")]], "writing notes")
        wait()
    seen = {name: (tmp_path / name).read_text().split() for name in "abc"}
    assert os.getpid() not in {int(v[0]) for v in seen.values()}
    assert seen["a"][0] == seen["b"][0] != seen["c"][0]  # the second group ran in a child of its own
    assert all(v[1] == "True" for v in seen.values())  # colorsys was imported before the jobs came


def _write_pid_and_modules(path: Path) -> None:
    import os
    import sys

    path.write_text(f"{os.getpid()} {'colorsys' in sys.modules}")


@pytest.mark.skipif(not can_fork(), reason="needs fork")
def test_a_prepared_child_reports_a_failed_job_in_one_line_and_ends_when_not_needed() -> None:
    from redoxfront.processes import PreparedChild

    with PreparedChild(()) as child:
        wait = child.start([[partial(_fail, "the figure folder is read-only")]], "drawing the figures")
        with pytest.raises(DataError, match=r"^drawing the figures failed: PermissionError: the figure folder is read-only$"):
            wait()
    unused = PreparedChild(())
    process = unused._process
    unused.close()  # no jobs: it ends
    assert process is not None and not process.is_alive() and process.exitcode == 0


def _fail(text: str) -> None:
    raise PermissionError(text)


ABANDONED = """
import os, sys
from redoxfront.processes import PreparedChild
child = PreparedChild(())
print(child._process.pid, flush=True)
os._exit(0)  # the parent dies without closing it
"""


@pytest.mark.skipif(not can_fork(), reason="needs fork")
def test_a_prepared_child_ends_when_its_parent_dies_without_a_word() -> None:
    import os
    import time

    out = subprocess.run([sys.executable, "-c", ABANDONED], capture_output=True, text=True, timeout=60, check=True)
    pid = int(out.stdout.split()[0])
    deadline = time.monotonic() + 5
    while time.monotonic() < deadline:
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return
        time.sleep(0.05)
    os.kill(pid, 9)
    raise AssertionError("the prepared child outlived its parent by 5 s")
