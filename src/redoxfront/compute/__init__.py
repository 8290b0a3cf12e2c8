"""The compute step: every candidate's states through the engine, kept in the store.

Takes the candidates and the campaign's [compute] settings; gives stored states
(SQLite, resumable), ``results/descriptors.csv`` with raw potentials and descriptors,
``results/geometries.sdf``, and the status of a campaign's work.
"""

from typing import Any

_EXPORTS = {"compute_status": "redoxfront.compute.status", "compute_campaign": "redoxfront.compute.step",
            "compute_candidates": "redoxfront.compute.step", "Store": "redoxfront.compute.store"}


def __getattr__(name: str) -> Any:
    """Exports loaded on first use, so importing one module of the step (the store, the fast
    tier) does not load all of them (PEP 562)."""
    if name in _EXPORTS:
        import importlib

        return getattr(importlib.import_module(_EXPORTS[name]), name)
    raise AttributeError(f"module 'redoxfront.compute' has no attribute {name!r}")


__all__ = ["Store", "compute_campaign", "compute_candidates", "compute_status"]
