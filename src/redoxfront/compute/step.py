"""The compute step: candidates to optimised redox states and uncalibrated potentials.

Per candidate: conformer ensemble (RDKit) -> GFN-xTB + ALPB optimisation of the
lowest K conformers in the discharged state -> the next redox state optimised from
each of those geometries -> vertical single points -> lowest adiabatic energies ->
potentials. Every state is stored in the SQLite store as soon as it is done;
a rerun reads it back instead of computing it again.
"""

from __future__ import annotations

import time
import weakref
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any, Callable, Iterable, Iterator

from typing import TYPE_CHECKING

import numpy as np
from rdkit import Chem

from redoxfront import columns as C
from redoxfront.campaign import AqueousSettings, Campaign, ComputeSettings, aqueous_settings
from redoxfront.candidates.conformers import generate_conformers
from redoxfront.candidates.structures import (
    Candidate,
    RedoxState,
    candidate_states,
    redox_states,
)
from redoxfront.compute.aqueous import add_proton_coupling
from redoxfront.compute.executors import map_tasks
from redoxfront.compute.fast_tier import chunked
from redoxfront.compute.geometries import GeometrySpool
from redoxfront.compute.lock import campaign_lock
from redoxfront.compute.store import Store
from redoxfront.descriptors import descriptors_for_candidate
from redoxfront.engine.optimizer import optimize_geometry
from redoxfront.engine.potentials import potential_v, reduction_free_energy_ev
from redoxfront.engine.records import (
    POSITION_DECIMALS,
    STATE_DISCHARGED,
    STATE_OXIDISED,
    STATE_REDUCED,
    CandidateStates,
    ConformerResult,
    StateResult,
)
from redoxfront.engine.xtb import Engine, EngineResult, make_engine
from redoxfront.errors import DataError, EngineError, InputError
from redoxfront.outputs import write_csv
from redoxfront.units import HARTREE_EV, PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC, convert_potential

if TYPE_CHECKING:
    import pandas as pd

CONFORMER_ENTRY = "conformer_ensemble"
"""Store entry (in the place of a state name) for the RDKit conformer search of a candidate."""


def conformer_key(settings: ComputeSettings) -> str:
    """Store key of a conformer search: conformer settings, seed and RDKit version only, so a
    change of solvent, method or optimiser reuses the ensemble instead of embedding again."""
    import hashlib
    import json

    from rdkit import __version__ as rdkit_version

    text = json.dumps({"conformers": asdict(settings.conformers), "seed": settings.seed,
                       "rdkit": rdkit_version, "schema": 1}, sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


@dataclass(frozen=True)
class CandidateOutcome:
    """What one task returns: the states (or a failure) and what it cost."""

    candidate: Candidate
    states: CandidateStates | None
    failure: str | None
    conformers_embedded: int
    new_engine_calls: int
    new_engine_seconds: float
    payloads: dict[str, dict[str, Any]] = field(default_factory=dict)
    """Freshly computed state payloads (and the conformer ensemble under
    :data:`CONFORMER_ENTRY`), for the caller to store (Dask path)."""
    task_seconds: float = 0.0
    """Wall time of this task in its worker, s."""
    conformer_seconds: float = 0.0
    """Of that, the RDKit conformer search (embedding, MMFF94, pruning), s."""
    row: dict[str, Any] = field(default_factory=dict)
    """The candidate's row of the descriptor table (filled by :func:`candidate_task`)."""


def checkpoint_name(state: str, conformer: int) -> str:
    """Store name of one finished conformer of a state still in progress."""
    return f"{state}:conformer:{conformer}"


@dataclass(frozen=True)
class _Checkpoints:
    """Finished conformers of a state still in progress, kept in the store until the state is
    whole, so a run killed in the middle of a state loses at most the conformer it was on."""

    store: Store | None
    smiles: str
    state: str
    """The state's store name (:attr:`RedoxState.key`)."""
    key: str

    def _name(self, i: int) -> str:
        return checkpoint_name(self.state, i)

    def get(self, i: int) -> ConformerResult | None:
        payload = self.store.get(self.smiles, self._name(i), self.key) if self.store else None
        return None if payload is None else ConformerResult.from_json(payload)

    def put(self, i: int, conf: ConformerResult) -> None:
        if self.store is not None:
            self.store.put(self.smiles, self._name(i), self.key, conf.to_json())

    def clear(self, n: int) -> None:
        for i in range(n if self.store is not None else 0):
            self.store.delete(self.smiles, self._name(i), self.key)


def _optimise_state(
    engine: Engine,
    numbers: np.ndarray,
    starts: list[np.ndarray],
    state: RedoxState,
    neighbours: list[RedoxState],
    settings: ComputeSettings,
    known_points: list[tuple[RedoxState, np.ndarray, EngineResult]] | None = None,
    checkpoints: _Checkpoints | None = None,
) -> tuple[StateResult, list[tuple[RedoxState, np.ndarray, EngineResult]]]:
    """Optimise one redox state from each start geometry; add the vertical energies of ``neighbours``.

    ``known_points``: engine results already computed (state, geometry, result), such as
    the previous state's vertical points; one at a start geometry in this state is used
    as the optimisation's first point instead of computing it again. ``checkpoints``:
    conformers finished by an earlier, interrupted run are read back from there, and each
    new one is written there as soon as it is done. Returns the state and its own
    vertical points (for the next state).
    """
    t0 = time.perf_counter()
    s0 = engine.stats.seconds
    confs = []
    verticals = []
    for i, start in enumerate(starts):
        done = checkpoints.get(i) if checkpoints is not None else None
        if done is not None:
            confs.append(done)
            continue
        spin = settings.spin_polarized and state.uhf > 0
        initial = next((r for st, xyz, r in known_points or ()
                        if st == state and np.array_equal(xyz, start)), None)
        opt = optimize_geometry(engine, numbers, start, state.charge, state.uhf, settings.optimizer,
                                spin_polarized=spin, initial=initial)
        xyz = opt.positions_angstrom.round(POSITION_DECIMALS)  # the geometry as stored
        vertical_eh = {}
        for other in neighbours:
            vert = engine.compute(numbers, xyz, other.charge, other.uhf,
                                  spin_polarized=settings.spin_polarized and other.uhf > 0)
            verticals.append((other, xyz, vert))
            vertical_eh[other.name] = vert.energy_eh
        r = opt.result
        spin_density = r.spin_populations
        if state.uhf > 0 and spin_density is None:  # spin density always from a spin-polarised point
            spin_density = engine.compute(numbers, xyz, state.charge, state.uhf,
                                          spin_polarized=True).spin_populations
        confs.append(ConformerResult(
            positions_angstrom=xyz,
            energy_eh=r.energy_eh,
            charges=r.charges,
            homo_eh=r.homo_eh,
            lumo_eh=r.lumo_eh,
            dipole_au=r.dipole_au,
            gradient_calls=opt.gradient_calls,
            converged=opt.converged,
            source_conformer=i,
            vertical_energies_eh=vertical_eh,
            spin_density=spin_density,
        ))
        if checkpoints is not None:
            checkpoints.put(i, confs[-1])
    return StateResult(
        state=state.name, charge=state.charge, uhf=state.uhf, conformers=tuple(confs),
        wall_time_s=time.perf_counter() - t0, engine_time_s=engine.stats.seconds - s0,
    ), verticals


def _conformer_starts(
    candidate: Candidate,
    mol_h: Chem.Mol,
    settings: ComputeSettings,
    store: Store | None,
    known: dict[str, dict],
    payloads: dict[str, dict[str, Any]],
) -> tuple[list[np.ndarray], int, float]:
    """Start geometries of the discharged state: the stored conformer ensemble, or a new one.

    A new ensemble is written to ``store`` (local runs) and to ``payloads`` (for the caller
    to store). Returns (geometries, conformers embedded, seconds spent embedding). The stored,
    rounded geometries are used either way, so a reused ensemble gives the same result.
    """
    key = conformer_key(settings)
    ensemble = known.get(CONFORMER_ENTRY)
    if ensemble is None and store is not None:
        ensemble = store.get(candidate.main_smiles, CONFORMER_ENTRY, key)
    seconds = 0.0
    if ensemble is None:
        t0 = time.perf_counter()
        found, n_embedded = generate_conformers(mol_h, settings.conformers, settings.seed)
        seconds = time.perf_counter() - t0
        ensemble = {"positions_angstrom": [np.round(x, POSITION_DECIMALS).tolist() for x in found],
                    "conformers_embedded": n_embedded}
        if store is not None:
            ensemble = store.put(candidate.main_smiles, CONFORMER_ENTRY, key, ensemble)
        payloads[CONFORMER_ENTRY] = ensemble
    starts = [np.asarray(x, dtype=float) for x in ensemble["positions_angstrom"]]
    return starts, int(ensemble["conformers_embedded"]), seconds


def vertical_entry(state: RedoxState, other: RedoxState) -> str:
    """Store name of the vertical energies of ``other`` at the conformers of ``state``, kept
    apart when they were computed after the state itself (for a row of another role)."""
    return f"{state.key}:vertical:{other.key}"


def failure_text(state: RedoxState | str, payload: dict[str, Any]) -> str:
    """What a stored failure says, in this candidate's words (the store holds only the reason);
    ``state``: the state, or the part it plays for this candidate (discharged, charged, ...)."""
    return f"{state if isinstance(state, str) else state.name} state: {payload['failed']}"


def _stored_payload(sr: StateResult, plan: list[RedoxState]) -> dict[str, Any]:
    """A state as stored: named by what it is, its vertical energies by what their states are."""
    key_of = {s.name: s.key for s in plan}
    payload = sr.to_json()
    payload["state"] = key_of[sr.state]
    for conf in payload["conformers"]:
        conf["vertical_energies_eh"] = {key_of[n]: e for n, e in conf["vertical_energies_eh"].items()}
    return payload


def _plan_state(payload: dict[str, Any], state: RedoxState, plan: list[RedoxState], smiles: str) -> StateResult:
    """A stored state in this candidate's words: the part it plays, vertical energies of its
    neighbours by their parts. Refuses a payload that is not the state asked for."""
    if (int(payload.get("charge", 0)), int(payload.get("uhf", -1))) != (state.charge, state.uhf) \
            or payload.get("state") != state.key:
        raise DataError(
            f"store entry {state.key} of {smiles} holds charge {payload.get('charge')}, "
            f"{payload.get('uhf')} unpaired electrons (state {payload.get('state')!r}); the store "
            "is damaged: move it away to compute afresh")
    name_of = {s.key: s.name for s in plan}
    sr = StateResult.from_json(payload)
    confs = tuple(replace(c, vertical_energies_eh={name_of[k]: e for k, e in c.vertical_energies_eh.items()
                                                   if k in name_of}) for c in sr.conformers)
    return replace(sr, state=state.name, conformers=confs)


def _complete_verticals(
    engine: Engine,
    numbers: np.ndarray,
    sr: StateResult,
    state: RedoxState,
    neighbours: list[RedoxState],
    settings: ComputeSettings,
    lookup: Callable[[str], dict | None],
    keep: Callable[[str, dict], dict],
) -> tuple[StateResult, list[tuple[RedoxState, np.ndarray, EngineResult]]]:
    """Add the vertical energies of neighbours a stored state was computed without.

    A state stored for a row of another role (the neutral molecule of an anolyte, read by a
    catholyte row) lacks the energies of this row's neighbour at its geometries. They are
    read from their own store entry (:func:`vertical_entry`) or computed as single points at
    the stored geometries, exactly as the state's own optimisation would have. Returns the
    state and the new points (they start the neighbour's optimisation).
    """
    points = []
    confs = list(sr.conformers)
    for other in neighbours:
        if all(other.name in c.vertical_energies_eh for c in confs):
            continue
        entry = vertical_entry(state, other)
        found = lookup(entry)
        if found is None:
            energies = []
            for c in confs:
                res = engine.compute(numbers, c.positions_angstrom, other.charge, other.uhf,
                                     spin_polarized=settings.spin_polarized and other.uhf > 0)
                points.append((other, c.positions_angstrom, res))
                energies.append(res.energy_eh)
            found = keep(entry, {"energies_eh": energies})
        confs = [replace(c, vertical_energies_eh={**c.vertical_energies_eh, other.name: float(e)})
                 for c, e in zip(confs, found["energies_eh"])]
    return replace(sr, conformers=tuple(confs)), points


def compute_candidate(
    candidate: Candidate, settings: ComputeSettings, store_path: str | None, stored: dict[str, dict] | None = None
) -> CandidateOutcome:
    """Compute (or read back) every redox state of one candidate.

    ``store_path``: write each state to this store as soon as it is done (local runs).
    ``stored``: payloads already known for this candidate (read by the caller), by store name.
    States are stored under what they are (:attr:`RedoxState.key`), so rows of the same
    molecule in different roles share the states they have in common and no other.
    """
    t_start = time.perf_counter()
    conformer_s = 0.0
    key_hash = settings.result_hash()
    store = Store(store_path) if store_path else None
    known = dict(stored or {})
    engine = make_engine(settings.engine, settings.method, settings.solvent)
    payloads: dict[str, dict[str, Any]] = {}
    embedded = 0
    smiles = candidate.main_smiles
    mol_h = Chem.AddHs(Chem.MolFromSmiles(smiles))
    numbers = np.array([a.GetAtomicNum() for a in mol_h.GetAtoms()])
    plan = redox_states(mol_h, candidate.role, candidate.n_electrons)
    i0 = next(i for i, s in enumerate(plan) if s.name == STATE_DISCHARGED)
    results: dict[str, StateResult] = {}
    points: list = []  # vertical points computed so far: a neighbour's optimisation starts there
    failure = None

    def lookup(name: str) -> dict | None:
        found = known.get(name)
        return store.get(smiles, name, key_hash) if found is None and store is not None else found

    def keep(name: str, payload: dict) -> dict:
        if store is not None:
            payload = store.put(smiles, name, key_hash, payload)
        payloads[name] = payload
        return payload

    try:
        # the discharged state first, then outwards along the chain, each from its neighbour
        # nearer the discharged state
        for k in sorted(range(len(plan)), key=lambda i: (abs(i - i0), -i)):
            state = plan[k]
            neighbours = [plan[j] for j in (k + 1, k - 1) if 0 <= j < len(plan)]
            payload = lookup(state.key)
            if payload is None:
                try:
                    if k == i0:
                        starts, embedded, conformer_s = _conformer_starts(
                            candidate, mol_h, settings, store, known, payloads)
                    else:
                        parent = plan[k + 1 if k < i0 else k - 1]
                        starts = [c.positions_angstrom for c in results[parent.name].conformers]
                    checkpoints = _Checkpoints(store, smiles, state.key, key_hash)
                    sr, new_points = _optimise_state(engine, numbers, starts, state, neighbours, settings,
                                                     points, checkpoints)
                    points += new_points
                    payload = _stored_payload(sr, plan)
                    payload["conformers_embedded"] = embedded
                except (EngineError, InputError) as exc:
                    payload = {"failed": str(getattr(exc, "reason", exc))}
                payload = keep(state.key, payload)
                if store is not None:  # the state is whole (or failed) now
                    _Checkpoints(store, smiles, state.key, key_hash).clear(settings.conformers.refine_lowest)
            if "failed" in payload:
                failure = failure_text(state, payload)
                break
            if k == i0:
                embedded = int(payload.get("conformers_embedded", 0))
            sr = _plan_state(payload, state, plan, smiles)
            try:
                sr, new_points = _complete_verticals(engine, numbers, sr, state, neighbours, settings,
                                                     lookup, keep)
            except (EngineError, InputError) as exc:
                failure = f"{state.name} state: vertical energies: {getattr(exc, 'reason', exc)}"
                break
            points += new_points
            results[state.name] = sr
    finally:
        if store is not None:
            store.close()
    states = None if failure else CandidateStates(candidate.id, smiles, {s.name: results[s.name] for s in plan})
    return CandidateOutcome(candidate, states, failure, embedded, engine.stats.calls,
                            engine.stats.seconds, payloads, task_seconds=time.perf_counter() - t_start,
                            conformer_seconds=conformer_s)


def candidate_row(outcome: CandidateOutcome, settings: ComputeSettings) -> dict[str, Any]:
    """One row of the descriptor table: identity, status, energies, potentials, cost."""
    cand = outcome.candidate
    ref = settings.reference
    row: dict[str, Any] = {
        C.ID: cand.id,
        C.SMILES: cand.smiles,
        C.CANONICAL_SMILES: cand.main_smiles,
        "counterions": ".".join(cand.counterions),
        "counterion_note": cand.counterion_note,
        C.ROLE: cand.role,
        C.N_ELECTRONS: cand.n_electrons,
        C.MOLAR_MASS: round(cand.molar_mass_g_per_mol, 3),
        "heavy_atoms": cand.heavy_atoms,
    }
    if outcome.states is None:
        row[C.STATUS] = f"failed: {outcome.failure}"
        return row
    states = list(outcome.states.states.values())
    if cand.role == "bipolar":
        return _bipolar_row(row, outcome, settings)
    first, last = states[0], states[-1]
    steps = []
    for prev, nxt in zip(states[:-1], states[1:]):
        dg = reduction_free_energy_ev(prev.lowest.energy_eh, nxt.lowest.energy_eh, cand.role)
        steps.append(potential_v(dg, shift_ev=settings.ipea_shift_ev, absolute_she=settings.absolute_she,
                                 reference=ref, user_reference_v_vs_fc=settings.user_reference_v_vs_fc))
    row[C.STATUS] = "ok"
    row[C.potential_uncalibrated(ref)] = float(np.mean(steps))
    vs_fc = [convert_potential(e, ref, "fc", settings.user_reference_v_vs_fc) for e in steps]
    worst = max(vs_fc, key=abs)
    if abs(worst) > PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC:  # kept in the table, left out of every later step
        row[C.STATUS] = (f"implausible: computed potential {worst:+.2f} V vs Fc+/Fc is beyond "
                         f"+-{PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC:.0f} V, outside any electrolyte window; "
                         "check the charge, counterions and role of this row")
    if len(steps) == 2:
        row[C.potential_uncalibrated(ref, 1)] = steps[0]
        row[C.potential_uncalibrated(ref, 2)] = steps[1]
        row[C.STEP_SEPARATION] = (steps[1] - steps[0]) * (1 if cand.role == "catholyte" else -1)
    row["charge_discharged"] = first.charge
    row["charge_charged"] = last.charge
    row["multiplicity_discharged"] = first.multiplicity
    row["multiplicity_charged"] = last.multiplicity
    row["adiabatic_change_on_charging_ev"] = (last.lowest.energy_eh - first.lowest.energy_eh) * HARTREE_EV
    low = first.lowest
    row["vertical_change_on_charging_ev"] = (low.vertical_energies_eh[states[1].state] - low.energy_eh) * HARTREE_EV
    for name, st in (("discharged", first), ("charged", last)):
        c = st.lowest
        row[f"homo_{name}_ev"] = c.homo_eh * HARTREE_EV
        row[f"lumo_{name}_ev"] = c.lumo_eh * HARTREE_EV
        row[f"gap_{name}_ev"] = (c.lumo_eh - c.homo_eh) * HARTREE_EV
    return _cost_columns(row, outcome, first)


def _cost_columns(row: dict[str, Any], outcome: CandidateOutcome, first: StateResult) -> dict[str, Any]:
    states = list(outcome.states.states.values())  # type: ignore[union-attr]
    row["conformers_embedded"] = outcome.conformers_embedded
    row["conformers_refined"] = len(first.conformers)
    row["gradient_calls"] = sum(c.gradient_calls for s in states for c in s.conformers)
    row["optimisations_converged"] = all(c.converged for s in states for c in s.conformers)
    row["wall_time_s"] = round(sum(s.wall_time_s for s in states), 3)
    row["engine_time_s"] = round(sum(s.engine_time_s for s in states), 3)
    row["from_store"] = outcome.new_engine_calls == 0
    return row


def _bipolar_row(row: dict[str, Any], outcome: CandidateOutcome, settings: ComputeSettings) -> dict[str, Any]:
    """The row of a bipolar candidate: both couples from the discharged state.

    E(red) of A + e- -> A.- and E(ox) of A.+ + e- -> A, each as for an anolyte or a catholyte
    row of the same molecule, and the symmetric-cell voltage E(ox) - E(red) (uncalibrated;
    the empirical shift and the reference cancel in it). The one-role potential column stays empty.
    """
    ref = settings.reference
    st = outcome.states.states  # type: ignore[union-attr]
    neutral = st[STATE_DISCHARGED]
    e0 = neutral.lowest.energy_eh
    pot = {}
    for process, form, role in (("reduction", STATE_REDUCED, "anolyte"), ("oxidation", STATE_OXIDISED, "catholyte")):
        dg = reduction_free_energy_ev(e0, st[form].lowest.energy_eh, role)
        pot[process] = potential_v(dg, shift_ev=settings.ipea_shift_ev, absolute_she=settings.absolute_she,
                                   reference=ref, user_reference_v_vs_fc=settings.user_reference_v_vs_fc)
        row[C.process_potential(process, "uncalibrated", ref)] = pot[process]
    row[C.STATUS] = "ok"
    worst = max((convert_potential(e, ref, "fc", settings.user_reference_v_vs_fc) for e in pot.values()), key=abs)
    if abs(worst) > PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC:  # the same rule as a one-role row
        row[C.STATUS] = (f"implausible: computed potential {worst:+.2f} V vs Fc+/Fc is beyond "
                         f"+-{PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC:.0f} V, outside any electrolyte window; "
                         "check the charge, counterions and role of this row")
    row[C.potential_uncalibrated(ref)] = float("nan")
    row[C.SYMMETRIC_GAP_UNCALIBRATED] = pot["oxidation"] - pot["reduction"]
    for name in (STATE_DISCHARGED, STATE_REDUCED, STATE_OXIDISED):
        row[f"charge_{name}"] = st[name].charge
        row[f"multiplicity_{name}"] = st[name].multiplicity
    low = neutral.lowest
    for process, form in (("reduction", STATE_REDUCED), ("oxidation", STATE_OXIDISED)):
        row[f"adiabatic_change_on_{process}_ev"] = (st[form].lowest.energy_eh - e0) * HARTREE_EV
        row[f"vertical_change_on_{process}_ev"] = (low.vertical_energies_eh[form] - low.energy_eh) * HARTREE_EV
    for name in (STATE_DISCHARGED, STATE_REDUCED, STATE_OXIDISED):
        c = st[name].lowest
        row[f"homo_{name}_ev"] = c.homo_eh * HARTREE_EV
        row[f"lumo_{name}_ev"] = c.lumo_eh * HARTREE_EV
        row[f"gap_{name}_ev"] = (c.lumo_eh - c.homo_eh) * HARTREE_EV
    return _cost_columns(row, outcome, neutral)


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


__all__ = [
    "CONFORMER_ENTRY", "CandidateOutcome", "ComputeReport", "checkpoint_name", "failure_text",
    "vertical_entry", "conformer_key", "candidate_row", "compute_campaign", "compute_candidate",
    "compute_candidates", "candidate_task", "cluster_items", "iter_compute",
]
