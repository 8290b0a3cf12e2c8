"""The parsed candidate list of a candidates file, kept in the store for ``status``.

Reading a candidates file validates every row with RDKit (about 0.45 ms a row on the
benchmark machine: 45 s for 100,000 rows). ``redoxfront status`` needs of each candidate
only its id, its carrier's canonical SMILES and the store names of its redox states, so
whoever parses the whole file (the compute step, the funnel, ``status`` itself) keeps that
list in the store, keyed by the file's SHA-256, the settings that change parsing and the
RDKit version. ``status`` then reads it back in well under a second instead of parsing the
file again; a changed file, setting or RDKit misses the key and is parsed afresh.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable

from redoxfront.campaign import ComputeSettings
from redoxfront.candidates.structures import Candidate, candidate_states
from redoxfront.engine.records import STATE_DISCHARGED
from redoxfront.errors import InputError

ROSTER_SCHEMA = 1
"""Layout of a kept list; a new layout misses the old key and parses afresh."""


@dataclass(frozen=True)
class RosterEntry:
    """What ``status`` needs of one candidate."""

    id: str
    smiles: str
    """Canonical SMILES of the charge carrier (the store key)."""
    states: tuple[str, ...]
    """Store names of its redox states (chain order)."""
    names: tuple[str, ...]
    """The part each plays for this candidate (discharged, charged, ...), same order."""
    discharged: str
    """Store name of its discharged state (computed first)."""


@dataclass(frozen=True)
class Roster:
    """The good candidates of a file (file order) and its rejected rows."""

    entries: list[RosterEntry]
    problems: list[InputError]


def roster_key(path: str | Path, settings: ComputeSettings) -> str:
    """Key of a file's parsed list: its bytes, the parsing settings, the RDKit version."""
    from rdkit import __version__ as rdkit_version

    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    parse = {"file": digest.hexdigest(), "name": Path(path).name, "counterion": settings.counterion,
             "max_heavy_atoms": settings.max_heavy_atoms, "role": settings.role,
             "n_electrons": settings.n_electrons, "rdkit": rdkit_version, "schema": ROSTER_SCHEMA}
    return hashlib.sha256(json.dumps(parse, sort_keys=True).encode()).hexdigest()[:24]


def roster_entry(candidate: Candidate) -> RosterEntry:
    """A candidate's entry (parses its carrier once more for the redox states)."""
    plan = candidate_states(candidate)
    first = next(s for s in plan if s.name == STATE_DISCHARGED)
    return RosterEntry(candidate.id, candidate.main_smiles, tuple(s.key for s in plan), tuple(s.name for s in plan),
                       first.key)


def save_roster(store_path: str | Path, key: str, entries: Iterable[RosterEntry],
                problems: Iterable[InputError]) -> None:
    """Keep a parsed list in the store."""
    from redoxfront.compute.store import Store

    payload = {"entries": [[e.id, e.smiles, list(e.states), list(e.names), e.discharged]
                           for e in entries],
               "problems": [[p.reason, p.row, p.field, p.source] for p in problems]}
    with Store(store_path) as store:
        store.put_roster(key, payload)


def load_roster(store_path: str | Path, key: str) -> Roster | None:
    """The parsed list kept under ``key``, or None."""
    from redoxfront.compute.store import Store

    if not Path(store_path).exists():
        return None
    with Store(store_path) as store:
        payload = store.get_roster(key)
    if payload is None:
        return None
    return Roster([RosterEntry(i, s, tuple(k), tuple(n), d) for i, s, k, n, d in payload["entries"]],
                  [InputError(r, row=row, field=f, source=src) for r, row, f, src in payload["problems"]])


__all__ = ["Roster", "RosterEntry", "load_roster", "roster_entry", "roster_key", "save_roster"]
