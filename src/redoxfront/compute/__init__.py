"""The compute step: every candidate's states through the engine, kept in the store.

Takes the candidates and the campaign's [compute] settings; gives stored states
(SQLite, resumable), ``results/descriptors.csv`` with raw potentials and descriptors,
``results/geometries.sdf``, and the status of a campaign's work.
"""

from redoxfront.compute.status import compute_status
from redoxfront.compute.step import compute_campaign, compute_candidates
from redoxfront.compute.store import Store

__all__ = ["Store", "compute_campaign", "compute_candidates", "compute_status"]
