"""Streaming: the driver draws its work lazily, keeps a bounded window in flight, holds no
candidate's conformers beyond the tasks in flight, looks up stored results a chunk at a time,
and `status` reads the kept candidate list instead of parsing the file again."""

from __future__ import annotations

import gc
import operator
import os
import sqlite3
import sys
from pathlib import Path

import pytest

from redoxfront.campaign import ComputeSettings, ConformerSettings, load_campaign
from redoxfront.candidates.structures import parse_candidate, read_candidates
from redoxfront.compute.executors import (LOCAL_CLUSTER_CONFIG, _local_cluster, default_window, map_tasks,
                                          start_worker_server)
from redoxfront.compute.fast_tier import FastJob, chunk_sizes, chunked, run_fast_tier
from redoxfront.compute.roster import load_roster, roster_key
from redoxfront.compute.status import compute_status
from redoxfront.compute.step import cluster_items, compute_campaign, compute_candidates
from redoxfront.compute.store import Store
from redoxfront.engine.records import CandidateStates

FAST = ConformerSettings(n_generate=2, refine_lowest=1)
SMALL = ["COc1ccccc1", "Cc1ccc(C)cc1", "COc1ccc(C)cc1", "Oc1ccccc1"]


def _campaign(folder: Path, rows: list[str]) -> Path:
    (folder / "inputs").mkdir(parents=True, exist_ok=True)
    (folder / "inputs" / "candidates.csv").write_text("id,smiles\n" + "\n".join(rows) + "\n")
    (folder / "campaign.toml").write_text(
        "[compute]\nrole = 'catholyte'\nworkers = 1\n[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n")
    return folder


class Counted:
    """An iterable that counts how many items were drawn from it."""

    def __init__(self, items: list) -> None:
        self.items, self.drawn = items, 0

    def __iter__(self):
        for item in self.items:
            self.drawn += 1
            yield item


@pytest.mark.parametrize("where", ["pool", "dask"])
def test_map_tasks_keeps_a_bounded_window_in_flight(where):
    if where == "dask":
        pytest.importorskip("distributed")
    items = Counted(list(range(40)))
    out, ahead = [], []
    for result in map_tasks(operator.neg, items, workers=2, progress=False, total=40,
                            dask_address="local" if where == "dask" else None):
        out.append(result)
        ahead.append(items.drawn - len(out))  # drawn but not yet returned
    # common practice, no source: every task once, and never more in flight than the window
    assert sorted(out) == sorted(-i for i in range(40))
    assert max(ahead) <= default_window(2) and items.drawn == 40


def test_chunks_shrink_towards_the_end_and_cover_every_item_once():
    sizes = chunk_sizes(1080, 16, 2)
    # guided self-scheduling (Polychronopoulos & Kuck, IEEE Trans. Comput. 1987, from memory):
    # full chunks first, then chunks shrinking with the work left, so no worker is left with a
    # whole chunk while the others wait at the end
    assert sum(sizes) == 1080 and sizes == sorted(sizes, reverse=True)
    assert sizes[:60] == [16] * 60 and sizes[-1] <= 2
    items = list(range(1080))
    chunks = list(chunked(items, sizes))
    assert [len(c) for c in chunks] == sizes and [x for c in chunks for x in c] == items
    assert chunk_sizes(0, 16, 2) == [] and sum(chunk_sizes(5, 64, 8)) == 5
    assert list(chunked(range(5), 2)) == [[0, 1], [2, 3], [4]]  # a fixed size, as before
    # a total counted too low (a candidates file whose rows were miscounted) must not lose items
    assert list(chunked(range(9), [3, 2])) == [[0, 1, 2], [3, 4], [5, 6], [7, 8]]
    assert list(chunked(range(2), [])) == [[0], [1]]


@pytest.mark.skipif(sys.platform != "linux", reason="workers are forked from a server process on Linux only")
def test_a_local_cluster_forks_its_workers_from_the_early_server_and_runs_lean():
    pytest.importorskip("distributed")
    import dask
    from distributed import Client
    from multiprocessing import forkserver

    start_worker_server()  # what `compute --cluster local` does first
    server = forkserver._forkserver._forkserver_pid
    cluster = _local_cluster(1)
    try:
        with Client(cluster) as client:
            seen = client.run(lambda: (os.getppid(), dask.config.get("distributed.worker.profile.enabled"),
                                       dask.config.get("distributed.admin.tick.interval")))
    finally:
        cluster.close()
    # the worker is a child of the server started first (not of a second one), and it runs with
    # the lean settings, not Dask's own defaults (profiling on, a 20 ms tick; distributed's
    # distributed.yaml, common practice to read there)
    assert list(seen.values()) == [(server, False, LOCAL_CLUSTER_CONFIG["distributed.admin.tick.interval"])]


def test_fast_tier_draws_its_jobs_a_chunk_at_a_time(tmp_path):
    settings = ComputeSettings(conformers=FAST)
    jobs = Counted([FastJob(f"m{i}", s, "catholyte", 1) for i, s in enumerate(SMALL)])
    drawn_at_first = None
    results = []
    for r in run_fast_tier(jobs, settings, str(tmp_path / "s.sqlite"), chunk_size=2, points="discharged"):
        drawn_at_first = jobs.drawn if drawn_at_first is None else drawn_at_first
        results.append(r)
    assert drawn_at_first == 2  # only the first chunk had been read when its results came
    assert [r.id for r in results] == ["m0", "m1", "m2", "m3"] and all(r.row["fast_tier_status"] == "ok" for r in results)
    # -HOMO of anisole's discharged state lies in the range of aromatic ethers' ionisation (~8 eV
    # measured in the gas phase; GFN2-xTB orbital energies sit lower; from memory), so a loose window
    assert 5.0 < results[0].row["fast_tier_orbital_proxy_ev"] < 15.0


def test_cluster_lookups_are_made_a_chunk_at_a_time(tmp_path):
    settings = ComputeSettings(conformers=FAST)
    cands = [parse_candidate({"id": f"m{i}", "smiles": s}, i + 2, settings) for i, s in enumerate(SMALL[:3])]
    compute_candidates(cands, settings, tmp_path / "s.sqlite", workers=1, progress=False, describe=False)
    queries: list[str] = []
    with Store(tmp_path / "s.sqlite") as store:
        store._con.set_trace_callback(lambda q: queries.append(q) if q.startswith("SELECT") else None)
        items = cluster_items(cands, lambda: store, settings, chunk_size=2)
        first = next(items)
        after_first = len(queries)
        rest = list(items)
    per_candidate = len(queries) / 3
    # common practice, no source: the first task's chunk (2 candidates) was looked up, not all 3
    assert after_first == 2 * per_candidate and per_candidate > 0
    assert [c.id for c, _ in [first, *rest]] == ["m0", "m1", "m2"]
    assert all("conformer_ensemble" in found and len(found) >= 3 for _, found in [first, *rest])


def test_the_driver_holds_only_the_states_in_flight(tmp_path):
    camp = load_campaign(_campaign(tmp_path, [f"m{i},{s}" for i, s in enumerate(SMALL)]))
    report = compute_campaign(camp, progress=False, describe=False)
    assert list(report.table["status"]) == ["ok"] * 4
    # at most the outcome being handled and the one the task loop still names (4 would mean all kept)
    assert 1 <= report.states_held_peak <= 2
    gc.collect()
    assert not [o for o in gc.get_objects() if isinstance(o, CandidateStates)]
    assert all(o.states is None and o.failure is None for o in report.outcomes)
    from rdkit import Chem

    ids = [m.GetProp("id") for m in Chem.SDMolSupplier(str(tmp_path / "results" / "geometries.sdf"), removeHs=False)]
    assert ids == ["m0", "m0", "m1", "m1", "m2", "m2", "m3", "m3"]  # input order, both states each


def test_status_reads_the_kept_candidate_list_and_parses_a_changed_file(tmp_path):
    rows = ["m0,COc1ccccc1", "bad,C1CC", "m1,Cc1ccc(C)cc1"]
    camp = load_campaign(_campaign(tmp_path, rows))
    path = tmp_path / "inputs" / "candidates.csv"
    compute_campaign(camp, progress=False, describe=False)
    kept = load_roster(camp.store_path, roster_key(path, camp.compute))
    assert kept is not None and kept.ids == ["m0", "m1"] and len(kept.plans) == 1  # both neutral catholytes
    _, parsed_problems = read_candidates(path, camp.compute)
    st = compute_status(camp)
    assert st.done == ["m0", "m1"] and not st.pending and not st.failed
    assert [(p.row, p.field, p.reason) for p in st.rejected] == [(p.row, p.field, p.reason) for p in parsed_problems]
    assert "cannot parse SMILES 'C1CC'" in st.rejected[0].reason  # unclosed ring (SMILES syntax)
    # a changed file misses the kept list: parsed again, the new row pending
    path.write_text(path.read_text() + "m2,Oc1ccccc1\n")
    st = compute_status(load_campaign(tmp_path))
    assert st.done == ["m0", "m1"] and st.pending == ["m2"]
    assert load_roster(camp.store_path, roster_key(path, camp.compute)) is not None  # kept for the next call
    with sqlite3.connect(camp.store_path) as con:
        assert con.execute("SELECT COUNT(*) FROM rosters").fetchone()[0] == 2


def test_status_shows_a_progress_bar_while_it_parses_the_file(tmp_path):
    from click.testing import CliRunner

    from redoxfront.cli import main

    _campaign(tmp_path, ["m0,COc1ccccc1", "bad,C1CC", "m1,Cc1ccc(C)cc1", "bad2,C1CC"])
    shown = CliRunner().invoke(main, ["status", str(tmp_path)])
    assert shown.exit_code == 0, shown.output
    # common practice, no source: a long step shows its progress; every row counts, rejected ones too
    assert "reading candidates" in shown.stderr and "4/4" in shown.stderr
    assert "2 candidates: 0 done, 0 failed, 0 partly done, 2 pending; 2 input rows rejected" in shown.stdout
    quiet = CliRunner().invoke(main, ["status", str(tmp_path), "--quiet"])
    assert quiet.exit_code == 0 and "reading candidates" not in quiet.stderr
