"""How far the compute step of a campaign has come, read from its store (``redoxfront status``).

Nothing is computed: every candidate of the campaign is looked up in the store under the
current settings and counted as done, failed (with the stored reason), partly done (some
redox states or conformers stored: an interrupted run) or pending. Safe to run while a
compute run is still writing (the store is in WAL mode). Candidates with a stored fast-tier
point (a funnel run) are counted too.

The parsed candidate list comes from the store when the file is unchanged
(:mod:`redoxfront.compute.roster`), and the store is read a chunk of molecules per query, so
``status`` on 100,000 candidates takes seconds, not the minute a fresh parse takes.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator

from redoxfront.campaign import Campaign
from redoxfront.candidates.structures import iter_candidates
from redoxfront.compute.fast_tier import chunked
from redoxfront.compute.roster import Roster, load_roster, make_roster, roster_entry, roster_key, save_roster
from redoxfront.compute.candidate import checkpoint_name, failure_text
from redoxfront.compute.store import Store
from redoxfront.errors import InputError


@dataclass(frozen=True)
class ComputeStatus:
    """How far the compute step of a campaign has come, read from its store."""

    done: list[str]
    failed: dict[str, str]
    """Candidate id -> the stored failure reason."""
    partial: list[str]
    """Some redox states stored, not all (an interrupted run)."""
    pending: list[str]
    rejected: list[InputError]
    fast_tier: list[str] = field(default_factory=list)
    """Candidates whose fast-tier point is stored (a funnel run; docs/funnel.md)."""


STATUS_CHUNK = 2000
"""Molecules looked up per pass over the store."""


def campaign_roster(campaign: Campaign, path: Path, *, progress: bool = False) -> Roster:
    """The parsed candidate list of ``path``: from the store when the file, the parsing settings
    and RDKit are unchanged, else parsed now (and kept for the next call, when the campaign has a
    store). Parsing takes about half a millisecond a row (a minute at 100,000), so it shows a
    progress bar when ``progress``."""
    settings = campaign.compute
    key = roster_key(path, settings)
    found = load_roster(campaign.store_path, key)
    if found is not None:
        return found
    from tqdm.auto import tqdm

    from redoxfront.candidates.files import count_rows

    problems: list[InputError] = []
    with tqdm(total=count_rows(path) if progress else None, desc="reading candidates", unit="row",
              disable=not progress) as bar:

        def entries() -> Iterator[Any]:
            seen = 0  # rejected rows count as read too
            for c in iter_candidates(path, settings, problems):
                bar.update(1 + len(problems) - seen)
                seen = len(problems)
                yield roster_entry(c)
            bar.update(len(problems) - seen)

        roster = make_roster(entries(), problems)
    if campaign.store_path.exists():
        save_roster(campaign.store_path, key, roster)
    return roster


def compute_status(campaign: Campaign, *, candidates_path: str | Path | None = None,
                   progress: bool = False) -> ComputeStatus:
    """Count done, failed, partly done and pending candidates under the current settings, and
    those with a stored fast-tier point. ``progress``: a progress bar while the candidates file
    is parsed (when the store keeps no parsed list of it).

    The store is read in chunks of molecules (one query per 500), never a query per state."""
    from redoxfront.compute.fast_tier import FAST_ENTRY_PREFIX, fast_tier_hash

    settings = campaign.compute
    path = Path(candidates_path) if candidates_path else campaign.path(campaign.inputs.candidates, "[inputs] candidates")
    roster = campaign_roster(campaign, Path(path), progress=progress)
    status = ComputeStatus([], {}, [], [], roster.problems)
    if not campaign.store_path.exists():
        status.pending.extend(roster.ids)
        return status
    key_hash = settings.result_hash()
    fast_hash = fast_tier_hash(settings)
    firsts = [checkpoint_name(p.discharged, 0) for p in roster.plans]
    with Store(campaign.store_path) as store:
        for start in range(0, len(roster.ids), STATUS_CHUNK):
            smiles = roster.smiles[start:start + STATUS_CHUNK]
            entries: dict[str, dict[str, str | None]] = {}
            for s, name, failed in store.entries_of(smiles, key_hash, failures=True):
                entries.setdefault(s, {})[name] = failed
            fast = {s for s, name, _ in store.entries_of(smiles, fast_hash) if name.startswith(FAST_ENTRY_PREFIX)}
            for cid, s, k in zip(roster.ids[start:start + STATUS_CHUNK], smiles,
                                 roster.plan_of[start:start + STATUS_CHUNK]):
                if s in fast:
                    status.fast_tier.append(cid)
                found = entries.get(s)
                if not found:
                    status.pending.append(cid)
                    continue
                plan = roster.plans[k]
                failure = next((failure_text(name, {"failed": found[key]}) for key, name in zip(plan.states, plan.names)
                                if found.get(key)), None)
                stored = sum(key in found for key in plan.states)
                # a first state interrupted between conformers also counts as partly done (the
                # first state computed is the discharged one, in the middle of a bipolar chain)
                stored += firsts[k] in found
                if failure:
                    status.failed[cid] = failure
                elif stored == len(plan.states):
                    status.done.append(cid)
                elif stored:
                    status.partial.append(cid)
                else:
                    status.pending.append(cid)
    return status


__all__ = ["ComputeStatus", "campaign_roster", "compute_status"]
