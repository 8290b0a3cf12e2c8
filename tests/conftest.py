"""Shared test set-up: one OpenMP thread per process (the engine oversubscribes otherwise)."""

import os

from redoxfront.campaign import (
    THREAD_VARIABLES,  # imports no numpy: set before it loads
)

for _var in THREAD_VARIABLES:
    os.environ.setdefault(_var, "1")
os.environ.setdefault("MPLBACKEND", "Agg")
