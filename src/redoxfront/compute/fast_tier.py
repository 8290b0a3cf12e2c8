"""The fast tier: a first pass that every candidate of a large library gets.

Per candidate: one force-field geometry (RDKit ETKDGv3 on the heavy atoms, one conformer, MMFF94
with UFF as fallback; :func:`force_field_geometry`) and one or two GFN2-xTB + ALPB single points
at that geometry (tblite, EEQ start guess, accuracy factor 100): the discharged state and the
first state of charging. From them:

* the vertical potential, uncalibrated, V vs the campaign's reference: the adiabatic formula of
  :mod:`redoxfront.engine.potentials` with both energies at the discharged geometry (no
  relaxation of the charged state, no conformer search);
* the frontier orbital energies of the discharged state, eV, and the orbital proxy: -HOMO for a
  catholyte, -LUMO for an anolyte (both rise with the potential).

Which of the two orders candidates like the full tier better was measured (docs/funnel.md): the
orbital proxy did, so the funnel uses it by default and then computes only the discharged single
point (``points="discharged"``), half the engine time. Bipolar rows are not in the fast tier: the
funnel passes them to the full tier as they are.

Results are stored in the campaign's store under the same key rule as the full tier
(canonical SMILES, the state's charge and unpaired electrons) with the entry name prefixed
``fast-tier:`` and a settings hash of its own (:func:`fast_tier_hash`), so the two tiers
never read each other's entries. Workers return records; only the driver writes the store,
one transaction per chunk.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import time
from dataclasses import dataclass
from typing import Any, Iterable, Iterator, Sequence

from redoxfront import columns as C
from redoxfront.campaign import ComputeSettings
from redoxfront.errors import EngineError, InputError

TIER_FAST = "fast"
TIER_FULL = "full"
FAST_ENTRY_PREFIX = "fast-tier:"
"""Store entry of a fast-tier single point: ``fast-tier:<state key>``, all at the one
force-field geometry of the discharged molecule."""

# column names of the fast-tier table: every one says its tier
FAST_STATUS = "fast_tier_status"
FAST_HOMO = "fast_tier_homo_discharged_ev"
FAST_LUMO = "fast_tier_lumo_discharged_ev"
FAST_SECONDS = "fast_tier_wall_time_s"
STRUCTURE_COLUMNS = (C.MOLAR_MASS, C.HEAVY_ATOMS, C.ROTATABLE_BONDS, C.TPSA)
"""The cheap descriptors: from the structure graph, so the same in both tiers (no tier in their names)."""
FAST_GAP = "fast_tier_homo_lumo_gap_ev"
"""LUMO - HOMO of the discharged state at the force-field geometry, eV."""
FAST_ORBITAL_PROXY = "fast_tier_orbital_proxy_ev"
"""-HOMO (catholyte) or -LUMO (anolyte) of the discharged state at the force-field geometry, eV."""
FORCE_FIELD_ITERATIONS = 100
"""Most MMFF94 steps of the fast tier's geometry. Measured against the full tier (docs/funnel.md):
100 steps from a heavy-atom embedding ranked candidates as well as 200 or 1000 steps (most
molecules are not converged at 200 either; the single conformer varies the orbital energies more
than the last steps of the force field do); 60 steps ranked the published catholytes a little
worse (Spearman 0.75 against 0.79)."""
ENGINE_ACCURACY = 100.0
"""tblite accuracy factor of the fast tier's single points (1 is tblite's default; the SCC
convergence thresholds scale with it): frontier orbital energies within 0.015 eV of accuracy 1
on the benchmark library, about a third less engine time."""
ENGINE_GUESS = "eeq"
"""Start guess of the fast tier's single points: EEQ charges (fewer SCC iterations than SAD)."""
POINTS = ("both", "discharged")
"""Single points of the fast tier: both states (vertical potential and orbitals) or the
discharged state only (orbitals, the orbital proxy)."""


def fast_vertical_column(ref: str) -> str:
    """Fast tier: vertical potential at the force-field geometry, uncalibrated, V vs ``ref``."""
    return f"fast_tier_vertical_potential_uncalibrated_v_vs_{ref}"


@dataclass(frozen=True)
class FastJob:
    """What a worker needs of one candidate (small, cheap to send)."""

    id: str
    smiles: str
    """Canonical SMILES of the charge carrier (the candidate's main fragment)."""
    role: str
    n_electrons: int
    molar_mass_g_per_mol: float = float("nan")
    """Of the candidate as given, counterions included (the reader's value), g/mol."""

    @classmethod
    def of(cls, candidate: Any) -> "FastJob":
        """The job of a :class:`~redoxfront.candidates.structures.Candidate`."""
        return cls(candidate.id, candidate.main_smiles, candidate.role, candidate.n_electrons,
                   candidate.molar_mass_g_per_mol)


@dataclass(frozen=True)
class FastResult:
    """One candidate's fast-tier result: its row and the store payloads (by entry name)."""

    id: str
    smiles: str
    row: dict[str, Any]
    payloads: dict[str, dict[str, Any]]
    engine_seconds: float
    wall_seconds: float


def fast_tier_hash(settings: ComputeSettings) -> str:
    """Settings hash of fast-tier entries: solvent, method, engine, seed, RDKit version."""
    from rdkit import __version__ as rdkit_version

    keep = {"tier": TIER_FAST, "solvent": settings.solvent, "method": settings.method,
            "engine": settings.engine, "seed": settings.seed, "rdkit": rdkit_version, "schema": 2,
            "geometry": f"ETKDGv3 heavy atoms + MMFF94 <= {FORCE_FIELD_ITERATIONS} steps",
            "accuracy": ENGINE_ACCURACY, "guess": ENGINE_GUESS}
    return hashlib.sha256(json.dumps(keep, sort_keys=True).encode()).hexdigest()[:16]


def force_field_geometry(mol: Any, seed: int) -> Any:
    """One conformer of ``mol`` (no explicit hydrogens): the molecule with hydrogens and coordinates, Angstrom.

    ETKDGv3 embeds the heavy atoms only (Riniker & Landrum, J. Chem. Inf. Model. 2015, 55,
    2562), the hydrogens are placed on them (:func:`~redoxfront.candidates.conformers.embed_heavy_atoms`,
    as in the full tier's conformer search), then at most
    :data:`FORCE_FIELD_ITERATIONS` steps of MMFF94 (Halgren, J. Comput. Chem. 1996, 17, 490;
    UFF when MMFF lacks types) relax the whole molecule. The hydrogens come in the order
    ``Chem.AddHs`` gives them. Raises InputError when RDKit cannot embed.
    """
    from rdkit import Chem
    from rdkit.Chem import AllChem

    from redoxfront.candidates.conformers import embed_heavy_atoms

    params = AllChem.ETKDGv3()
    params.randomSeed = seed
    params.numThreads = 1
    mol_h = embed_heavy_atoms(Chem.AddHs(mol), 1, params)
    if mol_h.GetNumConformers() == 0:
        raise InputError("RDKit could not embed 3D coordinates", field="smiles")
    if AllChem.MMFFHasAllMoleculeParams(mol_h):
        AllChem.MMFFOptimizeMolecule(mol_h, maxIters=FORCE_FIELD_ITERATIONS)
    elif AllChem.UFFHasAllMoleculeParams(mol_h):
        AllChem.UFFOptimizeMolecule(mol_h, maxIters=FORCE_FIELD_ITERATIONS)
    return mol_h


def _point_payload(energy_eh: float, homo_eh: float, lumo_eh: float, charge: int, uhf: int) -> dict[str, Any]:
    return {"energy_eh": energy_eh, "homo_eh": homo_eh, "lumo_eh": lumo_eh, "charge": charge, "uhf": uhf,
            "geometry": "force field, discharged state"}


def fast_candidate(job: FastJob, settings: ComputeSettings,
                   stored: dict[str, dict[str, Any]] | None = None, points: str = "both") -> FastResult:
    """The fast tier of one candidate: force-field geometry and one or two single points.

    ``points``: 'both' (the vertical potential and the orbitals) or 'discharged' (the orbitals
    only: the vertical potential column is then left empty).

    ``stored``: payloads already in the store for this molecule (by entry name); a candidate
    whose two points are stored costs no engine call. Failures become the row's status.
    """
    import numpy as np
    from rdkit import Chem
    from rdkit.Chem import rdMolDescriptors

    from redoxfront.candidates.structures import redox_states
    from redoxfront.engine.potentials import potential_v, reduction_free_energy_ev
    from redoxfront.engine.xtb import make_engine
    from redoxfront.units import HARTREE_EV

    t0 = time.perf_counter()
    ref = settings.reference
    row: dict[str, Any] = {"id": job.id, "canonical_smiles": job.smiles, "role": job.role}
    payloads: dict[str, dict[str, Any]] = {}
    engine = make_engine(settings.engine, settings.method, settings.solvent, accuracy=ENGINE_ACCURACY,
                         guess=ENGINE_GUESS)
    if job.role == "bipolar":
        row[FAST_STATUS] = "not in the fast tier: bipolar rows go to the full tier"
        return FastResult(job.id, job.smiles, row, payloads, 0.0, time.perf_counter() - t0)
    stored = stored or {}
    try:
        mol = Chem.MolFromSmiles(job.smiles)
        if mol is None:
            raise InputError("RDKit cannot read the SMILES", field="smiles")
        # the cheap descriptors, from the structure graph (the same in both tiers)
        row[C.MOLAR_MASS] = round(job.molar_mass_g_per_mol, 3)
        row[C.HEAVY_ATOMS] = mol.GetNumHeavyAtoms()
        row[C.ROTATABLE_BONDS] = rdMolDescriptors.CalcNumRotatableBonds(mol)
        row[C.TPSA] = round(rdMolDescriptors.CalcTPSA(mol), 2)
        first, second = redox_states(Chem.AddHs(mol), job.role, job.n_electrons)[:2]
        wanted = (first, second) if points == "both" else (first,)
        found_points = {}
        xyz = None
        for st in wanted:
            name = FAST_ENTRY_PREFIX + st.key
            found = stored.get(name)
            if found is None:
                if xyz is None:
                    mol_h = force_field_geometry(mol, settings.seed)
                    numbers = np.array([a.GetAtomicNum() for a in mol_h.GetAtoms()])
                    xyz = mol_h.GetConformer().GetPositions()
                res = engine.compute(numbers, xyz, st.charge, st.uhf,
                                     spin_polarized=settings.spin_polarized and st.uhf > 0)
                found = _point_payload(res.energy_eh, res.homo_eh, res.lumo_eh, st.charge, st.uhf)
                payloads[name] = found
            found_points[st.name] = found
    except (EngineError, InputError) as exc:
        row[FAST_STATUS] = f"failed: {getattr(exc, 'reason', exc)}"
        return FastResult(job.id, job.smiles, row, payloads, engine.stats.seconds, time.perf_counter() - t0)
    row[FAST_STATUS] = "ok"
    row[fast_vertical_column(ref)] = float("nan")
    if second.name in found_points:
        dg = reduction_free_energy_ev(found_points[first.name]["energy_eh"], found_points[second.name]["energy_eh"],
                                      job.role)
        row[fast_vertical_column(ref)] = potential_v(
            dg, shift_ev=settings.ipea_shift_ev, absolute_she=settings.absolute_she, reference=ref,
            user_reference_v_vs_fc=settings.user_reference_v_vs_fc)
    row[FAST_HOMO] = found_points[first.name]["homo_eh"] * HARTREE_EV
    row[FAST_LUMO] = found_points[first.name]["lumo_eh"] * HARTREE_EV
    row[FAST_GAP] = row[FAST_LUMO] - row[FAST_HOMO]
    row[FAST_ORBITAL_PROXY] = -(row[FAST_HOMO] if job.role == "catholyte" else row[FAST_LUMO])
    row[FAST_SECONDS] = round(time.perf_counter() - t0, 4)
    return FastResult(job.id, job.smiles, row, payloads, engine.stats.seconds, time.perf_counter() - t0)


def _fast_chunk(chunk: Sequence[tuple[FastJob, dict | None]], settings: ComputeSettings,
                points: str = "both") -> list[FastResult]:
    """A worker's task: one chunk of candidates (fewer tasks, less inter-process traffic)."""
    return [fast_candidate(job, settings, stored, points) for job, stored in chunk]


def chunked(items: Iterable[Any], size: int | Iterable[int]) -> Iterator[list[Any]]:
    """Consecutive lists of at most ``size`` items; ``size`` may also give each list's length in
    turn (:func:`chunk_sizes`). Items left when those lengths run out (a total counted too low)
    go on in lists of the last length: none is dropped."""
    source = iter(items)
    n = size if isinstance(size, int) else 1
    for n in () if isinstance(size, int) else size:
        chunk = list(itertools.islice(source, n))
        if not chunk:
            return
        yield chunk
    while chunk := list(itertools.islice(source, n)):
        yield chunk


def chunk_sizes(total: int, size: int, workers: int) -> list[int]:
    """Chunk lengths for ``total`` items on ``workers`` workers: ``size`` each until the last
    ``2 x workers x size`` items, then shrinking with what is left (``left / (2 x workers)``, at
    least ``size // 8``), so the workers finish together instead of one running a whole chunk
    while the others wait (guided scheduling: Polychronopoulos & Kuck, IEEE Trans. Comput. 1987,
    C-36, 1425, from memory)."""
    out: list[int] = []
    left, floor, share = total, max(1, size // 8), 2 * max(1, workers)
    while left > 0:
        n = min(left, size, max(floor, -(-left // share)))
        out.append(n)
        left -= n
    return out


def run_fast_tier(
    jobs: Iterable[FastJob],
    settings: ComputeSettings,
    store_path: str | None,
    *,
    workers: int = 1,
    chunk_size: int = 64,
    dask_address: str | None = None,
    progress: bool = False,
    points: str = "both",
    total: int | None = None,
) -> Iterator[FastResult]:
    """Fast tier of every job, yielded chunk by chunk as they finish (completion order).

    ``jobs`` may be a lazy iterable (a generator reading the candidates file): it is drawn one
    chunk at a time as chunks finish. The points already stored are looked up in the driver per
    chunk, just before the chunk is sent, and go with it; new points are written to the store
    by the driver, one transaction per chunk. Memory: the driver holds the chunks in flight
    (:func:`~redoxfront.compute.executors.default_window`) and nothing of the chunks done.
    ``total``: the number of jobs, for the progress bar, when ``jobs`` has no length.
    """
    from redoxfront.compute.executors import map_tasks
    from redoxfront.compute.store import Store

    key = fast_tier_hash(settings)
    if store_path:
        Store(store_path).close()  # creates the file and schema before any worker starts
    opened: list[Store] = []

    def store() -> Store:
        # opened at the first chunk, after the pool has started (no SQLite handle across fork)
        if not opened:
            opened.append(Store(store_path))  # type: ignore[arg-type]
        return opened[0]

    if total is None and hasattr(jobs, "__len__"):
        total = len(jobs)  # type: ignore[arg-type]
    sizes = chunk_size if total is None else chunk_sizes(total, chunk_size, workers)

    def prepared() -> Iterator[list[tuple[FastJob, dict | None]]]:
        for chunk in chunked(jobs, sizes):
            known = store().get_prefixed([j.smiles for j in chunk], FAST_ENTRY_PREFIX, key) if store_path else {}
            yield [(j, known.get(j.smiles)) for j in chunk]

    try:
        for results in map_tasks(_fast_chunk, prepared(), args=(settings, points), workers=workers,
                                 dask_address=dask_address, progress=progress, desc="fast tier",
                                 total=None if isinstance(sizes, int) else len(sizes), unit="chunk"):
            if store_path:
                store().put_many([(r.smiles, name, key, p) for r in results for name, p in r.payloads.items()])
            yield from results
    finally:
        for s in opened:
            s.close()


__all__ = [
    "ENGINE_ACCURACY", "ENGINE_GUESS", "FAST_ENTRY_PREFIX", "FAST_GAP", "FAST_HOMO", "FORCE_FIELD_ITERATIONS", "FAST_ORBITAL_PROXY", "POINTS", "FAST_LUMO", "FAST_SECONDS", "FAST_STATUS", "FastJob", "FastResult", "STRUCTURE_COLUMNS",
    "TIER_FAST", "TIER_FULL", "chunk_sizes", "chunked", "fast_candidate", "fast_tier_hash", "fast_vertical_column",
    "force_field_geometry", "run_fast_tier",
]
