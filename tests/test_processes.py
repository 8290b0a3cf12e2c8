"""Work in forked children (figures and tables at the end of the ranking step) and the
process-wide memory tuning of the command line."""

from __future__ import annotations

import subprocess
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
