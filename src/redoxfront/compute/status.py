"""How far the compute step of a campaign has come, read from its store (``redoxfront status``).

Nothing is computed: every candidate of the campaign is looked up in the store under the
current settings and counted as done, failed (with the stored reason), partly done (some
redox states or conformers stored: an interrupted run) or pending. Safe to run while a
compute run is still writing (the store is in WAL mode).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from redoxfront.campaign import Campaign
from redoxfront.candidates.structures import candidate_states, read_candidates
from redoxfront.compute.step import checkpoint_name, failure_text
from redoxfront.compute.store import Store
from redoxfront.engine.records import STATE_DISCHARGED
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


def compute_status(campaign: Campaign, *, candidates_path: str | Path | None = None) -> ComputeStatus:
    """Count done, failed, partly done and pending candidates under the current settings."""
    settings = campaign.compute
    path = Path(candidates_path) if candidates_path else campaign.path(campaign.inputs.candidates, "[inputs] candidates")
    candidates, problems = read_candidates(path, settings)
    status = ComputeStatus([], {}, [], [], problems)
    if not campaign.store_path.exists():
        status.pending.extend(c.id for c in candidates)
        return status
    key_hash = settings.result_hash()
    with Store(campaign.store_path) as store:
        for c in candidates:
            plan = candidate_states(c)
            found = [store.state_status(c.main_smiles, s.key, key_hash) for s in plan]
            failure = next((failure_text(s, {"failed": reason})
                            for s, (_, reason) in zip(plan, found) if reason), None)
            stored = sum(f[0] for f in found)
            # a first state interrupted between conformers also counts as partly done (the first
            # state computed is the discharged one, in the middle of a bipolar row's chain)
            first = next(s for s in plan if s.name == STATE_DISCHARGED)
            stored += store.state_status(c.main_smiles, checkpoint_name(first.key, 0), key_hash)[0]
            if failure:
                status.failed[c.id] = failure
            elif stored == len(plan):
                status.done.append(c.id)
            elif stored:
                status.partial.append(c.id)
            else:
                status.pending.append(c.id)
    return status


__all__ = ["ComputeStatus", "compute_status"]
