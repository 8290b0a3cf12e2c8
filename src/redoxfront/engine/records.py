"""Records that cross module borders: conformers and redox states of one candidate.

Positions are in Angstrom, energies in Hartree (Eh) as the engine returns them;
atom order is the RDKit order of the molecule with explicit hydrogens built from
the candidate's main-fragment SMILES (``Chem.AddHs(Chem.MolFromSmiles(smiles))``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

STATE_DISCHARGED = "discharged"
STATE_INTERMEDIATE = "intermediate"
STATE_CHARGED = "charged"
STATE_REDUCED = "reduced"
"""Bipolar candidates: the discharged molecule plus one electron (the negative tank's charged form)."""
STATE_OXIDISED = "oxidised"
"""Bipolar candidates: the discharged molecule minus one electron (the positive tank's charged form)."""
POSITION_DECIMALS = 6
"""Stored geometries are rounded to 1e-6 Angstrom (far below any geometric effect)."""


def state_key(charge: int, unpaired: int, protonation: str = "") -> str:
    """The store's name of a redox state: what the state is, never the role it plays.

    Total charge and unpaired electrons (multiplicity - 1) of the molecule whose canonical
    SMILES is the other half of the key, e.g. ``charge=+1;unpaired=1`` for a radical
    cation of a neutral molecule. ``protonation`` is left empty by the non-aqueous couples;
    a protonation form (for proton-coupled couples) will be appended as
    ``;protonation=<form>``, so the keys of today's states stay as they are. A state
    named this way means the same thing to an anolyte, a catholyte and a bipolar row.
    """
    key = f"charge={int(charge):+d};unpaired={int(unpaired)}"
    return f"{key};protonation={protonation}" if protonation else key


@dataclass(frozen=True)
class ConformerResult:
    """One optimised conformer of one redox state.

    Attributes
    ----------
    positions_angstrom : (n_atoms, 3) Cartesian coordinates, Angstrom.
    energy_eh : total energy incl. implicit solvation, Eh.
    charges : atomic partial charges (tblite Mulliken-type), e.
    orbital_energies_eh, occupations : per orbital, Eh and electrons (summed over spin).
    homo_eh, lumo_eh : frontier orbital energies, Eh.
    dipole_au : dipole vector, e*bohr.
    gradient_calls : engine gradient evaluations spent optimising it.
    converged : optimiser reached its criteria.
    vertical_energies_eh : energies of the neighbouring redox states at this geometry
        (their charge and spin), Eh, keyed by state name: the next state, and the previous
        one when there is one; used for vertical energies and reorganisation energies.
    spin_density : per-atom spin population (alpha - beta), only for open shells when
        spin-polarised calculations are on; otherwise None.
    """

    positions_angstrom: np.ndarray
    energy_eh: float
    charges: np.ndarray
    homo_eh: float
    lumo_eh: float
    dipole_au: np.ndarray
    gradient_calls: int
    converged: bool
    source_conformer: int
    vertical_energies_eh: dict[str, float] = field(default_factory=dict)
    spin_density: np.ndarray | None = None

    def to_json(self) -> dict[str, Any]:
        return {
            "positions_angstrom": np.asarray(self.positions_angstrom).round(POSITION_DECIMALS).tolist(),
            "energy_eh": self.energy_eh,
            "charges": np.asarray(self.charges).round(6).tolist(),
            "homo_eh": self.homo_eh,
            "lumo_eh": self.lumo_eh,
            "dipole_au": np.asarray(self.dipole_au).tolist(),
            "gradient_calls": self.gradient_calls,
            "converged": self.converged,
            "source_conformer": self.source_conformer,
            "vertical_energies_eh": dict(self.vertical_energies_eh),
            "spin_density": None
            if self.spin_density is None
            else np.asarray(self.spin_density).round(6).tolist(),
        }

    @classmethod
    def from_json(cls, d: dict[str, Any]) -> "ConformerResult":
        return cls(
            positions_angstrom=np.asarray(d["positions_angstrom"], dtype=float),
            energy_eh=float(d["energy_eh"]),
            charges=np.asarray(d["charges"], dtype=float),
            homo_eh=float(d["homo_eh"]),
            lumo_eh=float(d["lumo_eh"]),
            dipole_au=np.asarray(d["dipole_au"], dtype=float),
            gradient_calls=int(d["gradient_calls"]),
            converged=bool(d["converged"]),
            source_conformer=int(d["source_conformer"]),
            vertical_energies_eh={k: float(v) for k, v in d.get("vertical_energies_eh", {}).items()},
            spin_density=None
            if d.get("spin_density") is None
            else np.asarray(d["spin_density"], dtype=float),
        )


@dataclass(frozen=True)
class StateResult:
    """All refined conformers of one redox state of one candidate."""

    state: str
    charge: int
    uhf: int
    """Number of unpaired electrons (multiplicity - 1)."""
    conformers: tuple[ConformerResult, ...]
    wall_time_s: float = 0.0
    engine_time_s: float = 0.0

    @property
    def lowest(self) -> ConformerResult:
        return min(self.conformers, key=lambda c: c.energy_eh)

    @property
    def multiplicity(self) -> int:
        return self.uhf + 1

    def to_json(self) -> dict[str, Any]:
        return {
            "state": self.state,
            "charge": self.charge,
            "uhf": self.uhf,
            "conformers": [c.to_json() for c in self.conformers],
            "wall_time_s": self.wall_time_s,
            "engine_time_s": self.engine_time_s,
        }

    @classmethod
    def from_json(cls, d: dict[str, Any]) -> "StateResult":
        return cls(
            state=d["state"],
            charge=int(d["charge"]),
            uhf=int(d["uhf"]),
            conformers=tuple(ConformerResult.from_json(c) for c in d["conformers"]),
            wall_time_s=float(d.get("wall_time_s", 0.0)),
            engine_time_s=float(d.get("engine_time_s", 0.0)),
        )


@dataclass(frozen=True)
class CandidateStates:
    """The computed redox states of one candidate, keyed by state name."""

    candidate_id: str
    smiles: str
    """Main-fragment SMILES of the discharged state (atom order of the records)."""
    states: dict[str, StateResult] = field(default_factory=dict)
