"""One candidate's redox states: the work a compute worker does.

Conformer ensemble (RDKit) -> GFN-xTB + ALPB optimisation of the lowest K conformers in the
discharged state -> the next redox state optimised from each of those geometries -> vertical
single points -> lowest adiabatic energies. Every state is stored in the SQLite store as soon as
it is done (finished conformers of a state in progress as checkpoints); a rerun reads it back
instead of computing it again. The table row is :mod:`redoxfront.compute.rows`; the driver that
runs many candidates is :mod:`redoxfront.compute.step`.
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field, replace
from typing import Any, Callable

import numpy as np
from rdkit import Chem

from redoxfront.campaign import ComputeSettings
from redoxfront.candidates.conformers import generate_conformers
from redoxfront.candidates.structures import Candidate, RedoxState, redox_states
from redoxfront.compute.store import Store
from redoxfront.engine.optimizer import optimize_geometry
from redoxfront.engine.records import (
    POSITION_DECIMALS,
    STATE_DISCHARGED,
    CandidateStates,
    ConformerResult,
    StateResult,
)
from redoxfront.engine.xtb import Engine, EngineResult, make_engine
from redoxfront.errors import DataError, EngineError, InputError


CONFORMER_ENTRY = "conformer_ensemble"
"""Store entry (in the place of a state name) for the RDKit conformer search of a candidate."""


def conformer_key(settings: ComputeSettings) -> str:
    """Store key of a conformer search: conformer settings, seed and RDKit version only, so a
    change of solvent, method or optimiser reuses the ensemble instead of embedding again."""
    import hashlib
    import json

    from rdkit import __version__ as rdkit_version

    # schema 2: heavy atoms embedded first, hydrogens placed (candidates.conformers.embed_heavy_atoms)
    text = json.dumps({"conformers": asdict(settings.conformers), "seed": settings.seed,
                       "rdkit": rdkit_version, "schema": 2}, sort_keys=True)
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


__all__ = ["CONFORMER_ENTRY", "CandidateOutcome", "checkpoint_name", "compute_candidate", "conformer_key",
           "failure_text", "vertical_entry"]
