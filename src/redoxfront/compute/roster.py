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

ROSTER_SCHEMA = 2
"""Layout of a kept list; a new layout misses the old key and parses afresh."""


@dataclass(frozen=True)
class Plan:
    """The redox states of a candidate as the store names them, and the part each plays."""

    states: tuple[str, ...]
    """Store names of its redox states (chain order)."""
    names: tuple[str, ...]
    """The part each plays for this candidate (discharged, charged, ...), same order."""
    discharged: str
    """Store name of its discharged state (computed first)."""


@dataclass(frozen=True)
class RosterEntry:
    """What ``status`` needs of one candidate."""

    id: str
    smiles: str
    """Canonical SMILES of the charge carrier (the store key)."""
    plan: Plan


@dataclass(frozen=True)
class Roster:
    """The good candidates of a file (file order), column by column, and its rejected rows.

    Candidates share a few plans (a library of neutral catholytes has one), so each candidate
    holds the index of its plan in ``plans``.
    """

    ids: list[str]
    smiles: list[str]
    plan_of: list[int]
    plans: list[Plan]
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
    return RosterEntry(candidate.id, candidate.main_smiles,
                       Plan(tuple(s.key for s in plan), tuple(s.name for s in plan), first.key))


class RosterBuilder:
    """Gathers the list one candidate at a time (a driver streaming a file keeps only this)."""

    def __init__(self) -> None:
        self._index: dict[Plan, int] = {}
        self.ids: list[str] = []
        self.smiles: list[str] = []
        self.plan_of: list[int] = []

    def add(self, entry: RosterEntry) -> None:
        self.ids.append(entry.id)
        self.smiles.append(entry.smiles)
        self.plan_of.append(self._index.setdefault(entry.plan, len(self._index)))

    def roster(self, problems: Iterable[InputError]) -> Roster:
        return Roster(self.ids, self.smiles, self.plan_of, list(self._index), list(problems))


def make_roster(entries: Iterable[RosterEntry], problems: Iterable[InputError]) -> Roster:
    """The column-wise list of ``entries``."""
    builder = RosterBuilder()
    for e in entries:
        builder.add(e)
    return builder.roster(problems)


def save_roster(store_path: str | Path, key: str, roster: Roster) -> None:
    """Keep a parsed list in the store."""
    from redoxfront.compute.store import Store

    payload = {"ids": roster.ids, "smiles": roster.smiles, "plan_of": roster.plan_of,
               "plans": [[list(p.states), list(p.names), p.discharged] for p in roster.plans],
               "problems": [[p.reason, p.row, p.field, p.source] for p in roster.problems]}
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
    return Roster(payload["ids"], payload["smiles"], payload["plan_of"],
                  [Plan(tuple(k), tuple(n), d) for k, n, d in payload["plans"]],
                  [InputError(r, row=row, field=f, source=src) for r, row, f, src in payload["problems"]])


__all__ = ["Plan", "Roster", "RosterBuilder", "RosterEntry", "load_roster", "make_roster", "roster_entry", "roster_key", "save_roster"]
