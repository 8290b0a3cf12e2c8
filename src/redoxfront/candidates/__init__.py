"""Candidates and their redox states.

Takes a candidates file (CSV, TSV, SDF) or a scaffold x substituents library; gives
validated :class:`Candidate` records, their redox states (charge, unpaired electrons)
and RDKit conformer ensembles to start the engine from.
"""

from redoxfront.candidates.conformers import generate_conformers
from redoxfront.candidates.library import library_for_campaign
from redoxfront.candidates.structures import (
           Candidate,
           RedoxState,
           candidate_states,
           read_candidates,
)

__all__ = ["Candidate", "RedoxState", "candidate_states", "generate_conformers", "library_for_campaign",
           "read_candidates"]
