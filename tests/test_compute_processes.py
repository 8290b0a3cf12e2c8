"""Processes of the compute step: workers end with their parent, one run per campaign,
and a run killed many times resumes to the same numbers as one that never stopped."""

from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from redoxfront.cli import main
from redoxfront.compute.lock import campaign_lock

EXE = str(Path(sys.executable).with_name("redoxfront"))


def _campaign(folder: Path, smiles: list[str], workers: int = 2, refine: int = 1, generate: int = 2) -> Path:
    (folder / "inputs").mkdir(parents=True, exist_ok=True)
    rows = "\n".join(f"m{i},{s}" for i, s in enumerate(smiles))
    (folder / "inputs" / "candidates.csv").write_text(f"id,smiles\n{rows}\n")
    (folder / "campaign.toml").write_text(
        f"[compute]\nrole = 'catholyte'\nworkers = {workers}\n"
        f"[compute.conformers]\nn_generate = {generate}\nrefine_lowest = {refine}\n"
    )
    return folder


def _children(pid: int) -> list[int]:
    """Live processes whose parent is ``pid`` (read from /proc)."""
    kids = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            stat = Path(f"/proc/{entry}/stat").read_text()
        except OSError:
            continue
        fields = stat[stat.rindex(")") + 2:].split()
        if int(fields[1]) == pid and fields[0] != "Z":
            kids.append(int(entry))
    return kids


def _alive(pid: int) -> bool:
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return False
    return stat[stat.rindex(")") + 2:].split()[0] != "Z"  # a zombie has exited


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def _kill_and_watch(proc: subprocess.Popen, pids: list[int], limit_s: float) -> tuple[float, list[int]]:
    """Kill ``proc`` with SIGKILL, wait up to ``limit_s`` for ``pids`` to end; return the seconds
    waited and the pids still alive (killed here, so a failing check leaves nothing running)."""
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    t0 = time.time()
    while time.time() - t0 < limit_s and any(_alive(p) for p in pids):
        time.sleep(0.05)
    exit_s = time.time() - t0
    left = [p for p in pids if _alive(p)]
    for p in left:
        os.kill(p, signal.SIGKILL)
    return exit_s, left


def test_pool_workers_exit_when_the_main_process_is_killed(tmp_path: Path) -> None:
    # enough work that both workers are busy when the main process is killed
    folder = _campaign(tmp_path, ["CCCCOc1ccc(OCCCC)cc1C(C)(C)C", "CCCOc1ccc(OCCC)c(C)c1C",
                                  "COc1ccc(OC)c2ccccc12", "CCOc1cc(C)c(OCC)cc1C"] * 2, refine=2, generate=4)
    proc = subprocess.Popen([EXE, "compute", str(folder), "--quiet"], stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    workers: list[int] = []
    deadline = time.time() + 60
    while time.time() < deadline and len(workers) < 2 and proc.poll() is None:
        workers = _children(proc.pid)
        time.sleep(0.1)
    assert len(workers) == 2, "the pool did not start two workers"
    time.sleep(1.5)  # let them get into their work
    exit_s, left = _kill_and_watch(proc, workers, 10)
    # common practice, no source: an orphaned worker must not outlive its parent
    assert not left, f"{len(left)} worker(s) still running 10 s after the main process was killed"
    assert exit_s < 2.0  # the kernel's parent-death signal, or at worst the 0.5 s check


def test_a_second_compute_on_the_same_campaign_stops_with_a_clear_message(tmp_path: Path) -> None:
    folder = _campaign(tmp_path, ["C"], workers=1)
    with campaign_lock(folder):  # another run holds the campaign
        r = CliRunner().invoke(main, ["compute", str(folder), "--quiet"])
    assert r.exit_code == 2, r.output
    line = r.output.strip()
    assert "\n" not in line and "another compute run (pid" in line and str(folder) in line, line  # pid written
    assert not (folder / "results" / "descriptors.csv").exists()  # it did none of the work
    with campaign_lock(folder):  # released when the first run ended: it can be taken again
        pass


def _stored(folder: Path) -> int:
    """Entries in the campaign's store (read-only look; 0 before the store exists)."""
    import sqlite3

    path = folder / "cache.sqlite"
    if not path.exists():
        return 0
    try:
        con = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=5)
        try:
            return int(con.execute("SELECT COUNT(*) FROM states").fetchone()[0])
        finally:
            con.close()
    except sqlite3.Error:
        return 0


TIMING_COLUMNS = ["wall_time_s", "engine_time_s", "from_store"]
"""How long this run took and whether it found the work stored: the only columns allowed to
differ between a resumed run and an uninterrupted one."""


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="kills process groups")
def test_a_run_killed_ten_times_resumes_to_the_uninterrupted_numbers(tmp_path: Path) -> None:
    smiles = ["CCCCOc1ccc(OCCCC)cc1C(C)(C)C", "CCCOc1ccc(OCCC)c(C)c1C", "COc1ccc(OC)c2ccccc12",
              "CCOc1cc(C)c(OCC)cc1C", "CCCOc1ccc(OC)cc1CC", "COc1cc(OC)c(CCC)cc1C"]
    whole = _campaign(tmp_path / "whole", smiles, refine=2, generate=4)
    subprocess.run([EXE, "compute", str(whole), "--quiet"], check=True, stdout=subprocess.DEVNULL)
    killed = _campaign(tmp_path / "killed", smiles, refine=2, generate=4)
    rng = random.Random(13)
    kills = 0
    while kills < 10:
        before = _stored(killed)
        proc = subprocess.Popen([EXE, "compute", str(killed), "--quiet"], stdout=subprocess.DEVNULL,
                                stderr=subprocess.DEVNULL, start_new_session=True)
        deadline = time.time() + 120
        while proc.poll() is None and _stored(killed) <= before and time.time() < deadline:
            time.sleep(0.02)  # this run is computing once it has stored something new
        time.sleep(rng.uniform(0.0, 0.6))  # then a random moment: embedding, optimising, writing
        if proc.poll() is not None:
            break  # finished before this kill: the work is done
        os.killpg(proc.pid, signal.SIGKILL)  # the main process and its workers, as in a crash
        proc.wait()
        kills += 1
    assert kills == 10, f"the run finished after {kills} kills; give it more work"
    done = subprocess.run([EXE, "compute", str(killed), "--quiet"], check=True, capture_output=True, text=True)
    assert "6 candidates computed, 0 failed" in done.stdout
    a = pd.read_csv(whole / "results" / "descriptors.csv").drop(columns=TIMING_COLUMNS)
    b = pd.read_csv(killed / "results" / "descriptors.csv").drop(columns=TIMING_COLUMNS)
    assert a.shape == b.shape and a.shape[1] > 40
    # common practice, no source: a result must not depend on where a run was stopped.
    # Tolerance: exact; every number is computed from the same inputs in the same order.
    pd.testing.assert_frame_equal(a, b, check_exact=True)


def _descendants(pid: int) -> list[int]:
    """Live processes below ``pid`` (children, their children, ...)."""
    out, todo = [], [pid]
    while todo:
        kids = _children(todo.pop())
        out += kids
        todo += kids
    return out


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_local_dask_workers_exit_when_the_main_process_is_killed(tmp_path: Path) -> None:
    pytest.importorskip("distributed")
    folder = _campaign(tmp_path, ["CCCCOc1ccc(OCCCC)cc1C(C)(C)C", "CCCOc1ccc(OCCC)c(C)c1C",
                                  "COc1ccc(OC)c2ccccc12", "CCOc1cc(C)c(OCC)cc1C"] * 2, refine=2, generate=4)
    proc = subprocess.Popen([EXE, "compute", str(folder), "--quiet", "--cluster", "local"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    below: list[int] = []
    deadline = time.time() + 60
    while time.time() < deadline and proc.poll() is None and len(below) < 3:  # server + 2 workers
        below = _descendants(proc.pid)
        time.sleep(0.1)
    time.sleep(2.0)  # let the workers get their tasks
    below = _descendants(proc.pid)
    assert proc.poll() is None and len(below) >= 3, "the cluster's workers did not start"
    exit_s, left = _kill_and_watch(proc, below, 15)
    # common practice, no source: an orphaned worker must not outlive the run that started it
    assert not left, f"{len(left)} process(es) of the local cluster still running 15 s after the main process was killed"
    assert exit_s < 3.0  # the worker's 0.5 s check of its parent
