"""The compute step: many candidates to ``results/descriptors.csv`` and ``geometries.sdf``.

The driver: reads the candidates, hands them to the workers largest first (local pool or Dask,
:mod:`redoxfront.compute.executors`), each worker computes one candidate's redox states
(:mod:`redoxfront.compute.candidate`), its table row (:mod:`redoxfront.compute.rows`), the
potentials at the pH of an aqueous campaign and its descriptors; the driver stores what cluster
workers return, spools geometries to disk as they arrive and writes the tables.
"""

from __future__ import annotations

import time
import weakref
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Iterable, Iterator

from rdkit import Chem

from redoxfront import columns as C
from redoxfront.campaign import AqueousSettings, Campaign, ComputeSettings, aqueous_settings
from redoxfront.candidates.structures import Candidate, candidate_states
from redoxfront.compute.aqueous import add_proton_coupling
from redoxfront.compute.candidate import (
    CONFORMER_ENTRY,
    CandidateOutcome,
    compute_candidate,
    conformer_key,
    vertical_entry,
)
from redoxfront.compute.executors import map_tasks
from redoxfront.compute.fast_tier import chunked
from redoxfront.compute.geometries import GeometrySpool
from redoxfront.compute.lock import campaign_lock
from redoxfront.compute.rows import candidate_row
from redoxfront.compute.store import Store
from redoxfront.descriptors import descriptors_for_candidate
from redoxfront.engine.xtb import make_engine
from redoxfront.errors import InputError
from redoxfront.csv_tables import write_csv

if TYPE_CHECKING:
    import pandas as pd

@dataclass(frozen=True)
class ComputeReport:
    """Result of a compute run: the table, the rejected rows and the cost of this run.

    ``outcomes`` are slim: in input order, each with its candidate, failure and costs, but
    without its states or row (the states went to ``geometries.sdf`` as they arrived, the rows
    are ``table``), so a large run does not hold every candidate's conformers.
    """

    table: "pd.DataFrame"
    problems: list[InputError]
    outcomes: list[CandidateOutcome]
    new_engine_calls: int
    new_engine_seconds: float
    wall_time_s: float
    states_held_peak: int = 0
    """Most candidates' states the driver held at once (at most the tasks in flight)."""


DRIVER_CHUNK = 64
"""Candidates whose stored states the driver looks up at a time for a cluster run."""


def iter_compute(
    candidates: list[Candidate],
    settings: ComputeSettings,
    store_path: str | Path,
    *,
    workers: int | None = None,
    dask_address: str | None = None,
    progress: bool = True,
    sections: dict[str, Any] | None = None,
    describe: bool = True,
    aqueous: AqueousSettings | None = None,
    chunk_size: int = DRIVER_CHUNK,
) -> Iterator[CandidateOutcome]:
    """Compute every candidate and its descriptor row; yield each outcome as it finishes.

    Largest candidates first (the pool's tail is then short jobs). Local workers read and write
    the store themselves. Cluster workers may not see this file system: the driver looks up the
    states already stored ``chunk_size`` candidates at a time, just before it sends them (never
    the whole store up front), and stores what comes back. At most
    :func:`~redoxfront.compute.executors.default_window` tasks are in flight, so the driver holds
    only their results; what the caller keeps of each outcome is up to it.
    Candidates whose states are all stored go to the workers too: their descriptors are
    recomputed in parallel (after a change of sites, say), with no engine call.
    """
    sections = (sections or {}) if describe else None
    store_path = str(store_path)
    workers = settings.workers if workers is None else workers
    local = dask_address is None
    Store(store_path).close()  # creates the file and schema before workers open it
    if not candidates:
        return
    ordered = sorted(candidates, key=_expected_cost, reverse=True)
    task_args = (settings, store_path if local else None, sections, aqueous)
    opened: list[Store] = []

    def store() -> Store:
        # opened when the first cluster chunk is looked up (no SQLite handle across a fork)
        if not opened:
            opened.append(Store(store_path))
        return opened[0]

    items = ((c, None) for c in ordered) if local else cluster_items(ordered, store, settings, chunk_size)
    key_hash = settings.result_hash()
    try:
        for out in map_tasks(_run_job, items, args=task_args, workers=workers,
                             threads_per_worker=settings.threads_per_worker, dask_address=dask_address,
                             progress=progress, desc="redox states", total=len(ordered)):
            if not local:  # local workers wrote their states already
                for state, payload in out.payloads.items():
                    key = conformer_key(settings) if state == CONFORMER_ENTRY else key_hash
                    store().put(out.candidate.main_smiles, state, key, payload)
            yield replace(out, payloads={})  # stored: keep memory flat
    finally:
        for s in opened:
            s.close()


def cluster_items(candidates: Iterable[Candidate], store: Callable[[], Store], settings: ComputeSettings,
                  chunk_size: int = DRIVER_CHUNK) -> Iterator[tuple[Candidate, dict[str, dict]]]:
    """(candidate, its stored payloads) for a cluster run, looked up ``chunk_size`` candidates at
    a time as the tasks are drawn (lazily: never the whole store up front). ``store`` opens the
    store on first use."""
    for chunk in chunked(candidates, chunk_size):
        found = [_stored_states(store(), c, settings) for c in chunk]
        yield from zip(chunk, found)


def compute_candidates(
    candidates: list[Candidate],
    settings: ComputeSettings,
    store_path: str | Path,
    *,
    workers: int | None = None,
    dask_address: str | None = None,
    progress: bool = True,
    sections: dict[str, Any] | None = None,
    describe: bool = True,
    aqueous: AqueousSettings | None = None,
) -> tuple[list[CandidateOutcome], float]:
    """Compute every candidate and its descriptor row (local pool or Dask), in input order.

    Returns every outcome whole (states included): for a few candidates (tests, benchmarks);
    a campaign run goes through :func:`iter_compute` and keeps only the rows.
    ``sections``: the campaign's raw ``sites`` and ``descriptors`` tables;
    ``describe=False`` leaves the descriptors out (potentials only, for a first pass);
    ``aqueous``: potentials at the pH of an aqueous campaign (:mod:`redoxfront.compute.aqueous`).
    """
    t0 = time.perf_counter()
    outcomes = {o.candidate.id: o for o in iter_compute(
        candidates, settings, store_path, workers=workers, dask_address=dask_address, progress=progress,
        sections=sections, describe=describe, aqueous=aqueous)}
    return [outcomes[c.id] for c in candidates], time.perf_counter() - t0


def _stored_states(store: Store, candidate: Candidate, settings: ComputeSettings) -> dict[str, dict]:
    """The candidate's payloads already in the store, by store name: its redox states, the
    vertical energies kept apart for them, and its conformer ensemble under :data:`CONFORMER_ENTRY`."""
    key_hash = settings.result_hash()
    plan = candidate_states(candidate)
    names = [s.key for s in plan] + [vertical_entry(a, b) for a in plan for b in plan if a != b]
    found = {n: p for n in names if (p := store.get(candidate.main_smiles, n, key_hash)) is not None}
    ensemble = store.get(candidate.main_smiles, CONFORMER_ENTRY, conformer_key(settings))
    if ensemble is not None:
        found[CONFORMER_ENTRY] = ensemble
    return found


def candidate_task(
    candidate: Candidate,
    settings: ComputeSettings,
    store_path: str | None,
    stored: dict[str, dict] | None,
    sections: dict[str, Any] | None,
    aqueous: AqueousSettings | None = None,
) -> CandidateOutcome:
    """Compute one candidate and its descriptor row (runs in a worker).

    ``sections``: the campaign's raw ``sites`` and ``descriptors`` tables, or None for
    no descriptors (potentials only). ``aqueous``: the campaign's ``[aqueous]`` settings (the
    row's potentials are then those at its pH, :mod:`redoxfront.compute.aqueous`).
    """
    t0 = time.perf_counter()
    out = compute_candidate(candidate, settings, store_path, stored)
    row = candidate_row(out, settings)
    payloads = dict(out.payloads)
    if out.states is not None and aqueous is not None:
        row = _aqueous_row(row, out, settings, aqueous, store_path, stored, payloads)
    if out.states is not None and sections is not None:
        mol_h = Chem.AddHs(Chem.MolFromSmiles(candidate.main_smiles))
        row.update(descriptors_for_candidate(mol_h, out.states, sections.get("sites"),
                                             sections.get("descriptors")))
    row.update({k: v for k, v in candidate.extra.items() if k not in row or aqueous is None})  # user columns
    # a local worker stored its payloads already: do not ship them back (memory, IPC)
    payloads = {} if store_path else payloads
    return replace(out, row=row, payloads=payloads, task_seconds=time.perf_counter() - t0)


def _aqueous_row(row: dict[str, Any], out: CandidateOutcome, settings: ComputeSettings, aqueous: AqueousSettings,
                 store_path: str | None, stored: dict[str, dict] | None,
                 payloads: dict[str, dict[str, Any]]) -> dict[str, Any]:
    """Protonation forms, pKa values and potentials at the campaign pH (store-backed)."""
    key_hash = settings.result_hash()
    cand = out.candidate
    store = Store(store_path) if store_path else None
    engine = make_engine(settings.engine, settings.method, settings.solvent)

    def lookup(smiles: str, name: str) -> dict | None:
        if smiles == cand.main_smiles and stored and name in stored:
            return stored[name]
        return store.get(smiles, name, key_hash) if store is not None else None

    def keep(smiles: str, name: str, payload: dict) -> dict:
        if store is not None:
            payload = store.put(smiles, name, key_hash, payload)
        if smiles == cand.main_smiles:
            payloads[name] = payload
        return payload

    steps = [row[c] for c in (C.potential_uncalibrated(settings.reference, 1),
                              C.potential_uncalibrated(settings.reference, 2)) if c in row]
    try:
        return add_proton_coupling(row, cand, out.states, steps, settings, aqueous, engine, lookup, keep)
    finally:
        if store is not None:
            store.close()


def _expected_cost(candidate: Candidate) -> int:
    """Rough relative cost of a candidate, for scheduling: its atoms, hydrogens included.

    On the benchmark set the atom count ranks the measured task times better
    (Spearman 0.78) than heavy atoms plus rotatable bonds did (0.52); most of the
    rest is the number of optimisation steps, which is not known in advance.
    """
    return Chem.AddHs(Chem.MolFromSmiles(candidate.main_smiles)).GetNumAtoms()


def _run_job(job: tuple[Candidate, dict | None], settings: ComputeSettings, store_path: str | None,
             sections: dict[str, Any] | None, aqueous: AqueousSettings | None = None) -> CandidateOutcome:
    return candidate_task(job[0], settings, store_path, job[1], sections, aqueous)


class _LiveCounter:
    """Counts objects alive at once (a weak reference each), to check the driver's memory."""

    def __init__(self) -> None:
        self.alive = self.peak = 0

    def track(self, obj: object) -> None:
        self.alive += 1
        self.peak = max(self.peak, self.alive)
        weakref.finalize(obj, self._gone)

    def _gone(self) -> None:
        self.alive -= 1


def compute_campaign(
    campaign: Campaign,
    *,
    candidates_path: str | Path | None = None,
    out_path: str | Path | None = None,
    workers: int | None = None,
    dask_address: str | None = None,
    progress: bool = True,
    describe: bool = True,
    only_ids: set[str] | None = None,
    problems: list[InputError] | None = None,
) -> ComputeReport:
    """Read the campaign's candidates, compute them, write ``results/descriptors.csv``.

    ``only_ids``: compute only these candidates (the funnel's selection); the table then holds
    just them (the full tier of a funnel run), the other rows are not parsed, and ``problems``
    are the rejected rows the caller found when it read the whole file.

    Also writes ``results/geometries.sdf``: the lowest conformer of every redox state.

    Bad rows are written to ``results/input_problems.csv`` with row, field and reason;
    they never stop the batch. ``describe=False``: potentials only, no descriptors.
    One compute run per campaign at a time: a second one stops with
    :class:`~redoxfront.compute.lock.CampaignBusyError` naming the process holding it.
    """
    with campaign_lock(campaign.folder):
        return _compute_campaign(campaign, candidates_path, out_path, workers, dask_address, progress, describe,
                                 only_ids, problems)


def _compute_campaign(campaign: Campaign, candidates_path: str | Path | None, out_path: str | Path | None,
                      workers: int | None, dask_address: str | None, progress: bool,
                      describe: bool, only_ids: set[str] | None = None,
                      known_problems: list[InputError] | None = None) -> ComputeReport:
    from redoxfront.candidates.structures import iter_candidates
    from redoxfront.compute.roster import make_roster, roster_entry, roster_key, save_roster

    settings = campaign.compute
    path = Path(candidates_path) if candidates_path else campaign.path(campaign.inputs.candidates, "[inputs] candidates")
    problems: list[InputError] = [] if only_ids is None else list(known_problems or [])
    candidates = list(iter_candidates(path, settings, problems, only_ids=only_ids))
    if only_ids is None:  # the whole file parsed: keep its list for `status`
        key = roster_key(path, settings)
        save_roster(campaign.store_path, key, make_roster((roster_entry(c) for c in candidates), problems))
    sections = {"sites": campaign.section("sites"), "descriptors": campaign.section("descriptors")}
    out = Path(out_path) if out_path else campaign.results_dir / "descriptors.csv"
    out.parent.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    rows: dict[str, dict[str, Any]] = {}
    slim: dict[str, CandidateOutcome] = {}
    live = _LiveCounter()  # how many candidates' states are alive in this process at once
    with GeometrySpool(out.parent / "geometries.sdf") as spool:
        for o in iter_compute(candidates, settings, campaign.store_path, workers=workers,
                              dask_address=dask_address, progress=progress, sections=sections,
                              describe=describe, aqueous=aqueous_settings(campaign)):
            if o.states is not None:
                live.track(o.states)
                spool.add(o.states)  # to disk: the driver keeps no conformers
            rows[o.candidate.id] = o.row
            slim[o.candidate.id] = replace(o, states=None, row={})
            del o
        wall = time.perf_counter() - t0
        import pandas as pd  # here: the commands that only read the store need not load it

        table = pd.DataFrame([rows.pop(c.id) for c in candidates])
        write_csv(table, out)
        problems_table = pd.DataFrame(
            [{"file": p.source, "row": p.row, "field": p.field, "reason": p.reason} for p in problems],
            columns=["file", "row", "field", "reason"],
        )
        write_csv(problems_table, out.parent / "input_problems.csv")
        spool.write(c.id for c in candidates)
    outcomes = [slim[c.id] for c in candidates]
    return ComputeReport(
        table=table,
        problems=problems,
        outcomes=outcomes,
        new_engine_calls=sum(o.new_engine_calls for o in outcomes),
        new_engine_seconds=sum(o.new_engine_seconds for o in outcomes),
        wall_time_s=wall,
        states_held_peak=live.peak,
    )


__all__ = ["ComputeReport", "candidate_task", "cluster_items", "compute_campaign", "compute_candidates",
           "iter_compute"]
