"""The SQLite store: every computed redox state, keyed by molecule, state and settings.

Keys are (canonical main-fragment SMILES, state, settings hash). The state is named by what
it is, never by the part it plays: total charge and unpaired electrons
(:func:`redoxfront.engine.records.state_key`, e.g. ``charge=-1;unpaired=1``, with room for a
protonation form), so the same molecule as an anolyte and as a catholyte shares its neutral
state and nothing else. Stores written before this rule (schema 1, states named
``discharged``/``intermediate``/``charged`` relative to a role) are migrated when opened:
each optimised state is renamed from the charge and spin it holds, its vertical energies
(named relative to the role that computed them) are dropped and recomputed when needed,
stored failures and unfinished conformers are dropped. A store of a newer schema is refused.
A candidate's RDKit
conformer ensemble is stored the same way under the name ``conformer_ensemble`` and a key
of the conformer settings alone (:func:`redoxfront.compute.candidate.conformer_key`). The hash
covers every setting that changes energies or geometries
(:meth:`~redoxfront.campaign.ComputeSettings.result_hash`), so a changed setting
misses the cache and an unchanged one recomputes nothing. WAL journal mode lets
several processes read while one writes; each write is its own short transaction,
so a killed run loses at most the conformer it was optimising: finished conformers of a
state in progress are kept as ``<state>:conformer:<i>`` entries until the state is whole.
A second table, ``rosters``, keeps the parsed candidate list of the newest candidates files
(:mod:`redoxfront.compute.roster`) so ``status`` need not parse a large file again; it was added
without a schema change (a store without it gains it when opened).
"""

from __future__ import annotations

import json
import sqlite3
import time
from pathlib import Path
from typing import Any

from redoxfront.engine.records import state_key
from redoxfront.errors import RedoxfrontError

SCHEMA_VERSION = 2
"""Schema of the store (SQLite ``user_version``): 2 = states named by charge and spin."""
_ROLE_NAMES = ("discharged", "intermediate", "charged")
"""State names of schema 1, relative to the role of the row that computed them."""

_SCHEMA = """
CREATE TABLE IF NOT EXISTS states (
    smiles TEXT NOT NULL,
    state TEXT NOT NULL,
    settings_hash TEXT NOT NULL,
    payload TEXT NOT NULL,
    created_unix REAL NOT NULL,
    PRIMARY KEY (smiles, state, settings_hash)
)
"""
_ROSTER_SCHEMA = """
CREATE TABLE IF NOT EXISTS rosters (
    key TEXT PRIMARY KEY,
    payload TEXT NOT NULL,
    created_unix REAL NOT NULL
)
"""
ROSTERS_KEPT = 8
"""Parsed candidate lists kept in a store (the newest; see :mod:`redoxfront.compute.roster`)."""


class Store:
    """A small key-value store of JSON payloads in one SQLite file."""

    def __init__(self, path: str | Path, timeout_s: float = 120.0) -> None:
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        deadline = time.monotonic() + timeout_s
        con: sqlite3.Connection | None = None
        while True:
            try:
                con = sqlite3.connect(self.path, timeout=timeout_s, isolation_level=None)
                con.execute("PRAGMA journal_mode=WAL")
                con.execute("PRAGMA synchronous=NORMAL")
                con.execute(_SCHEMA)
                con.execute(_ROSTER_SCHEMA)  # an added table: stores without it simply gain it
                self._con = con
                self.migrated = self._migrate()
                break
            except sqlite3.OperationalError as exc:
                # another process is creating the file or switching it to WAL right now:
                # SQLite may answer 'locked' without waiting, so wait here and try again
                if ("locked" in str(exc) or "busy" in str(exc)) and time.monotonic() < deadline:
                    if con is not None:
                        con.close()
                    time.sleep(0.05)
                    continue
                raise RedoxfrontError(f"cannot open store {self.path}: {exc}") from exc
            except sqlite3.DatabaseError as exc:
                raise RedoxfrontError(
                    f"cannot open store {self.path}: {exc}; move the file away to start afresh") from exc

    def _migrate(self) -> int:
        """Bring a schema-1 store to schema 2 in one transaction; returns the states renamed."""
        con = self._con
        version = con.execute("PRAGMA user_version").fetchone()[0]
        if version == SCHEMA_VERSION:
            return 0
        if version > SCHEMA_VERSION:
            raise RedoxfrontError(
                f"store {self.path} has schema {version}, newer than this redoxfront reads "
                f"({SCHEMA_VERSION}); use the newer redoxfront or move the file away to start afresh")
        renamed = 0
        con.execute("BEGIN IMMEDIATE")  # one migrating process; the others wait, then see version 2
        try:
            if con.execute("PRAGMA user_version").fetchone()[0] == 0:
                marks = ",".join("?" * len(_ROLE_NAMES))
                rows = con.execute(
                    f"SELECT smiles, state, settings_hash, payload, created_unix FROM states "
                    f"WHERE state IN ({marks}) OR state LIKE '%:conformer:%'", _ROLE_NAMES).fetchall()
                for smiles, state, key, text, created in rows:
                    con.execute("DELETE FROM states WHERE smiles=? AND state=? AND settings_hash=?",
                                (smiles, state, key))
                    if state not in _ROLE_NAMES:  # a conformer of an unfinished state: name unknown
                        continue
                    payload = json.loads(text)
                    if "failed" in payload or "charge" not in payload or "uhf" not in payload:
                        continue  # a failure names no charge: computed again when needed
                    new = state_key(payload["charge"], payload["uhf"])
                    payload["state"] = new
                    for conf in payload.get("conformers", []):
                        conf["vertical_energies_eh"] = {}  # named by a role: recomputed when needed
                    renamed += con.execute("INSERT OR IGNORE INTO states VALUES (?, ?, ?, ?, ?)",
                                           (smiles, new, key, json.dumps(payload), created)).rowcount
            con.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
            con.execute("COMMIT")
        except BaseException:
            con.execute("ROLLBACK")
            raise
        return renamed

    def get(self, smiles: str, state: str, settings_hash: str) -> dict[str, Any] | None:
        """The stored payload, or None."""
        row = self._con.execute(
            "SELECT payload FROM states WHERE smiles=? AND state=? AND settings_hash=?",
            (smiles, state, settings_hash),
        ).fetchone()
        return None if row is None else json.loads(row[0])

    def put(self, smiles: str, state: str, settings_hash: str, payload: dict[str, Any]) -> dict[str, Any]:
        """Store a payload and return the stored one.

        If another process stored the same key first, its record is kept and returned
        (first writer wins), so every reader reports the same numbers.
        """
        self._con.execute(
            "INSERT OR IGNORE INTO states VALUES (?, ?, ?, ?, ?)",
            (smiles, state, settings_hash, json.dumps(payload), time.time()),
        )
        stored = self.get(smiles, state, settings_hash)
        return payload if stored is None else stored

    def put_many(self, rows: list[tuple[str, str, str, dict[str, Any]]]) -> int:
        """Store many (smiles, entry, settings hash, payload) rows in one transaction (first
        writer wins, as in :meth:`put`); returns the rows written."""
        if not rows:
            return 0
        now = time.time()
        self._con.execute("BEGIN IMMEDIATE")
        try:
            n = sum(self._con.execute("INSERT OR IGNORE INTO states VALUES (?, ?, ?, ?, ?)",
                                      (s, e, k, json.dumps(p), now)).rowcount for s, e, k, p in rows)
            self._con.execute("COMMIT")
        except BaseException:
            self._con.execute("ROLLBACK")
            raise
        return n

    def get_prefixed(self, smiles: list[str], prefix: str, settings_hash: str) -> dict[str, dict[str, dict[str, Any]]]:
        """Every entry whose name starts with ``prefix`` for these molecules: smiles -> name -> payload."""
        out: dict[str, dict[str, dict[str, Any]]] = {}
        wanted = list(dict.fromkeys(smiles))
        for i in range(0, len(wanted), 500):  # SQLite's bound-parameter limit
            part = wanted[i:i + 500]
            marks = ",".join("?" * len(part))
            for s, name, text in self._con.execute(
                    f"SELECT smiles, state, payload FROM states WHERE settings_hash=? AND smiles IN ({marks}) "
                    "AND substr(state, 1, ?)=?", (settings_hash, *part, len(prefix), prefix)):
                out.setdefault(s, {})[name] = json.loads(text)
        return out

    def put_roster(self, key: str, payload: Any) -> None:
        """Keep a parsed candidate list under ``key`` (the newest :data:`ROSTERS_KEPT` are kept)."""
        self._con.execute("BEGIN IMMEDIATE")
        try:
            self._con.execute("INSERT OR REPLACE INTO rosters VALUES (?, ?, ?)", (key, json.dumps(payload), time.time()))
            self._con.execute("DELETE FROM rosters WHERE key NOT IN (SELECT key FROM rosters "
                              "ORDER BY created_unix DESC LIMIT ?)", (ROSTERS_KEPT,))
            self._con.execute("COMMIT")
        except BaseException:
            self._con.execute("ROLLBACK")
            raise

    def get_roster(self, key: str) -> Any | None:
        """The parsed candidate list kept under ``key``, or None."""
        row = self._con.execute("SELECT payload FROM rosters WHERE key=?", (key,)).fetchone()
        return None if row is None else json.loads(row[0])

    def entries_of(self, smiles: list[str], settings_hash: str, *,
                   failures: bool = False) -> list[tuple[str, str, str | None]]:
        """(smiles, entry name, stored failure or None) of every entry of these molecules under one
        settings hash; the failure is read only with ``failures`` (it parses the payloads)."""
        out: list[tuple[str, str, str | None]] = []
        wanted = list(dict.fromkeys(smiles))
        failed = "json_extract(payload, '$.failed')" if failures else "NULL"
        for i in range(0, len(wanted), 500):  # SQLite's bound-parameter limit
            part = wanted[i:i + 500]
            marks = ",".join("?" * len(part))
            query = (f"SELECT smiles, state, {{}} FROM states WHERE settings_hash=? AND smiles IN ({marks}) "
                     "AND state NOT LIKE '%:vertical:%'")
            try:
                out += self._con.execute(query.format(failed), (settings_hash, *part)).fetchall()
            except sqlite3.OperationalError:  # an SQLite built without its JSON functions
                for s, name, text in self._con.execute(query.format("payload"), (settings_hash, *part)):
                    out.append((s, name, json.loads(text).get("failed") if failures else None))
        return out

    def state_status(self, smiles: str, state: str, settings_hash: str) -> tuple[bool, str | None]:
        """(stored?, failure reason or None) without reading the whole payload."""
        try:
            row = self._con.execute(
                "SELECT json_extract(payload, '$.failed') FROM states WHERE smiles=? AND state=? AND settings_hash=?",
                (smiles, state, settings_hash),
            ).fetchone()
        except sqlite3.OperationalError:  # an SQLite built without its JSON functions
            payload = self.get(smiles, state, settings_hash)
            return (False, None) if payload is None else (True, payload.get("failed"))
        return (False, None) if row is None else (True, row[0])

    def delete(self, smiles: str, state: str, settings_hash: str) -> None:
        """Remove one entry (no error if it is not there)."""
        self._con.execute("DELETE FROM states WHERE smiles=? AND state=? AND settings_hash=?",
                          (smiles, state, settings_hash))

    def count(self, settings_hash: str | None = None) -> int:
        """Number of stored states (for one settings hash, if given)."""
        if settings_hash is None:
            return self._con.execute("SELECT COUNT(*) FROM states").fetchone()[0]
        return self._con.execute(
            "SELECT COUNT(*) FROM states WHERE settings_hash=?", (settings_hash,)
        ).fetchone()[0]

    def close(self) -> None:
        self._con.close()

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
