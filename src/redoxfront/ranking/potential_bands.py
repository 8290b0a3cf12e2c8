"""Default 95 % bands of uncalibrated potentials, per couple type, derived from published
measurements.

An uncalibrated potential (raw GFN2-xTB/ALPB, constant shift and absolute SHE only) is
reported as computed; its interval comes from the errors the same workflow makes on the
published reference set (``../shared/reference-potentials/published_potentials.csv``: 137
one-electron couples, each row naming its source: the ROP313 benchmark, Neugebauer et al.,
J. Phys. Chem. A 2020, 124, 7166; nitroxides compiled by Beaujean, J. Mol. Liq. 2024, 414,
126207). ``benchmarks/reference_set_errors.py`` computed every row once with the real
engine (4 conformers embedded, the lowest refined) and wrote
``benchmarks/reference_set_errors.csv``; error = computed - published on the absolute scale, V.

The band of a couple type is the 2.5 % and 97.5 % quantiles of those errors: the true value
lies in [raw - q97.5, raw - q2.5] for 95 % of the set. The bands are asymmetric because the
errors are (oxidations have a long tail of computed-too-high heteroaromatics).

Second electron of a two-electron couple: the reference set holds no second steps. Implicit
solvent without ion pairing overestimates the separation of the two steps of a dianion or
dication: computed ~1.5 V for anthraquinone and 1.9 V for 1,4-benzoquinone (this workflow,
see docs/compute.md) against roughly 0.7 V measured in aprotic solvents (from memory, no
source checked here). A computed second step therefore lies too far from the first by up to
:data:`SECOND_STEP_OVERESTIMATE_V` (the larger of the two cases). The band of a second step is widened by that amount
towards the first step; the potential of a two-electron carrier (the mean of its two steps)
by half of it, and such rows are flagged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

COUPLE_TYPES: tuple[str, ...] = ("reduction", "oxidation")


@dataclass(frozen=True)
class ErrorBand:
    """Errors (computed - published, V) of one couple type on the reference set."""

    couple_type: str
    n: int
    mean_v: float
    sd_v: float
    mae_v: float
    q025_v: float
    q975_v: float
    min_v: float
    max_v: float

    def interval(self, raw_v: np.ndarray | float) -> tuple[np.ndarray, np.ndarray]:
        """95 % interval of the true potential given the raw one: [raw - q97.5, raw - q2.5], V."""
        raw = np.asarray(raw_v, dtype=float)
        return raw - self.q975_v, raw - self.q025_v


# benchmarks/reference_set_errors.csv (2026-12-02, tblite GFN2-xTB, ALPB per row's solvent):
# reduction: 31 acetonitrile + 2 DMF rows (ROP313); oxidation: 85 acetonitrile (ROP313 and
# nitroxides) + 19 water (nitroxides). Recomputed from the CSV by tests/test_ranking_potential_bands.py.
REFERENCE_SET_BANDS: dict[str, ErrorBand] = {
    "reduction": ErrorBand("reduction", 33, mean_v=-0.146, sd_v=0.239, mae_v=0.245,
                           q025_v=-0.443, q975_v=0.367, min_v=-0.479, max_v=0.438),
    "oxidation": ErrorBand("oxidation", 104, mean_v=-0.068, sd_v=0.381, mae_v=0.308,
                           q025_v=-0.608, q975_v=0.774, min_v=-1.038, max_v=1.394),
}
"""Error statistics per couple type, V (see the module docstring for how they were made)."""

REDUCTION_SET_SCOPE = (
    "The reduction band comes from 33 published reductions whose ring systems are benzene (30 of "
    "them), naphthalene, anthracene and one quinodimethane (aromatic ketones, aldehydes, nitro "
    "compounds, nitriles, imines): it holds no quinone, viologen or N-heteroaromatic ring, so for "
    "such anolytes it is not validated and may be too narrow (2,1,3-benzothiadiazole here: computed "
    "about 0.9 V more negative than the value remembered from the literature, -1.55 V vs Fc+/Fc, from "
    "memory). Calibrate against measured potentials of the family.")
"""What the reduction band was measured on, in words for the report (the counts are recomputed
from ``benchmarks/reference_set_errors.csv`` by tests/test_ranking_potential_bands.py)."""

SECOND_STEP_OVERESTIMATE_V: float = 1.2
"""How much further from the first step implicit solvent puts a second step, V (1,4-benzoquinone:
computed 1.9 V separation against ~0.7 V measured; anthraquinone 1.5 V against ~0.7 V; from memory)."""

SECOND_STEP_FLAG = ("two-electron: the second step is computed without ion pairing and its "
                    "separation from the first is overestimated; interval widened")


def couple_type(role: str) -> str:
    """A catholyte is oxidised on charging, an anolyte reduced."""
    return "oxidation" if role == "catholyte" else "reduction"


def uncalibrated_interval(raw_v: np.ndarray, role: np.ndarray, n_electrons: np.ndarray,
                          half_width_v: float | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Low and high ends of the 95 % interval of uncalibrated potentials, V, and a flag per row.

    ``half_width_v`` (the ``[cell] uncalibrated_uncertainty_v`` setting) replaces the derived
    bands by a symmetric one when given. Two-electron rows (their potential is the mean of the
    two steps) are widened by half of :data:`SECOND_STEP_OVERESTIMATE_V` towards the first
    step: lower for a catholyte (its second oxidation is computed too high), higher for an anolyte.
    """
    raw = np.asarray(raw_v, dtype=float)
    role = np.asarray(role, dtype=object)
    n_e = np.asarray(n_electrons, dtype=float)
    lo = np.full(raw.shape, np.nan)
    hi = np.full(raw.shape, np.nan)
    cath = role.astype(str) == "catholyte"
    for kind in COUPLE_TYPES:
        rows = cath if kind == couple_type("catholyte") else ~cath
        if half_width_v is not None:
            lo[rows], hi[rows] = raw[rows] - half_width_v, raw[rows] + half_width_v
        else:
            lo[rows], hi[rows] = REFERENCE_SET_BANDS[kind].interval(raw[rows])
    two = n_e == 2
    widen = 0.5 * SECOND_STEP_OVERESTIMATE_V
    lo = np.where(two & cath, lo - widen, lo)
    hi = np.where(two & ~cath, hi + widen, hi)
    flags = np.where(two, SECOND_STEP_FLAG, "")
    return lo, hi, flags
