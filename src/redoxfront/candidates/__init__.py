"""Candidates and their redox states.

Takes a candidates file (CSV, TSV, SDF) or a scaffold x substituents library; gives
validated :class:`Candidate` records, their redox states (charge, unpaired electrons)
and RDKit conformer ensembles to start the engine from.
"""

from typing import Any

from redoxfront.candidates.conformers import generate_conformers
from redoxfront.candidates.structures import (
           Candidate,
           RedoxState,
           candidate_states,
           read_candidates,
)



def __getattr__(name: str) -> Any:
    """The library builder (pandas) is loaded on first use only (PEP 562)."""
    if name == "library_for_campaign":
        from redoxfront.candidates.library import library_for_campaign

        return library_for_campaign
    raise AttributeError(f"module 'redoxfront.candidates' has no attribute {name!r}")


__all__ = ["Candidate", "RedoxState", "candidate_states", "generate_conformers", "library_for_campaign",
           "read_candidates"]
