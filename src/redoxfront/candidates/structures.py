"""Candidates: reading, validation and redox-state assignment.

The SMILES of a candidate is its discharged state. Counterions written as separate
fragments are split off (kept for the molar mass); the charge carrier is the largest fragment
that is not a common salt ion, and a row whose carrier is ambiguous is rejected (see
:func:`carrier_fragment`). The charged state has n electrons fewer (catholyte,
oxidised when charged) or more (anolyte, reduced when charged); its spin is the
lowest one the electron count allows (singlet or doublet). A bipolar candidate has
both: a reduced state (one electron more) and an oxidised state (one electron fewer).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator

from rdkit import Chem, RDLogger
from rdkit.Chem import rdMolDescriptors

from redoxfront.campaign import ROLES, ComputeSettings
from redoxfront.candidates.files import SDF_SUFFIXES, csv_rows, sdf_rows
from redoxfront.engine.records import (
    STATE_CHARGED,
    STATE_DISCHARGED,
    STATE_INTERMEDIATE,
    STATE_OXIDISED,
    STATE_REDUCED,
    state_key,
)
from redoxfront.engine.xtb import SUPPORTED_ELEMENTS_MAX_Z
from redoxfront.errors import InputError

RDLogger.DisableLog("rdApp.*")

KNOWN_COLUMNS = ("id", "smiles", "role", "n_electrons", "counterion")


@dataclass(frozen=True)
class Candidate:
    """One validated candidate molecule (discharged state)."""

    id: str
    smiles: str
    """SMILES as given (may hold counterion fragments)."""
    main_smiles: str
    """Canonical SMILES of the redox-active fragment; the store key and atom order."""
    counterions: tuple[str, ...]
    role: str
    n_electrons: int
    molar_mass_g_per_mol: float
    """Molar mass of the whole discharged salt or molecule, counterions included."""
    heavy_atoms: int
    row: int
    extra: dict[str, Any] = field(default_factory=dict)
    """User columns, passed through unchanged."""
    counterion_note: str = ""
    """What was done to balance a charged input (empty when it was neutral as given)."""


@dataclass(frozen=True)
class RedoxState:
    """Charge and unpaired electrons of one redox state.

    ``name`` is the part the state plays for this candidate (discharged, charged, ...);
    ``key`` is what the state is (charge, unpaired electrons, protonation form), the
    name it is stored under, shared by every row of the same molecule that needs it.
    """

    name: str
    charge: int
    uhf: int
    protonation: str = ""
    """Protonation form; empty for the non-aqueous couples (room for proton-coupled ones)."""

    @property
    def key(self) -> str:
        """The store's name of this state (:func:`redoxfront.engine.records.state_key`)."""
        return state_key(self.charge, self.uhf, self.protonation)


def _clean(value: Any) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    return str(value).strip()


COMMON_COUNTERIONS: frozenset[str] = frozenset(
    Chem.MolToSmiles(Chem.MolFromSmiles(s)) for s in (
        "[F-]", "[Cl-]", "[Br-]", "[I-]", "[OH-]", "F[B-](F)(F)F", "F[P-](F)(F)(F)(F)F", "[O-]Cl(=O)(=O)=O",
        "[O-][N+](=O)[O-]", "O=S(=O)([O-])O", "O=S(=O)([O-])[O-]", "CC(=O)[O-]", "O=S(=O)([O-])C(F)(F)F",
        "O=S(=O)(C(F)(F)F)[N-]S(=O)(=O)C(F)(F)F", "O=S(=O)(F)[N-]S(=O)(=O)F",
        "[Li+]", "[Na+]", "[K+]", "[Rb+]", "[Cs+]", "[Mg+2]", "[Ca+2]", "[Sr+2]", "[Ba+2]", "[NH4+]",
        "C[N+](C)(C)C", "CC[N+](CC)(CC)CC", "CCC[N+](CCC)(CCC)CCC", "CCCC[N+](CCCC)(CCCC)CCCC",
    ))
"""Supporting-electrolyte and salt ions (canonical SMILES) that are never the charge carrier:
halides, hydroxide, BF4-, PF6-, ClO4-, NO3-, HSO4-, SO4(2-), acetate, triflate, TFSI-, FSI-,
alkali and alkaline-earth cations, ammonium and the tetra-n-alkylammonium ions (C1 to C4)."""

SALT_METALS: frozenset[int] = frozenset({3, 11, 19, 37, 55, 4, 12, 20, 38, 56})
"""Alkali and alkaline-earth metals: the only metals a counterion fragment may hold."""


def carrier_fragment(mol: Chem.Mol) -> tuple[Chem.Mol, list[Chem.Mol]]:
    """Split a (possibly ionic) molecule into its charge carrier and its counterions.

    The rule: the carrier is the largest fragment (heavy atoms) that is not a common salt ion
    (:data:`COMMON_COUNTERIONS`); every other fragment is a counterion and must be charged,
    smaller than the carrier and free of metals other than the alkali and alkaline-earth
    metals. Anything else is ambiguous and raises ValueError: two fragments tie for the
    carrier, a metal-bearing or neutral fragment besides it (a metal complex written as
    ions, such as a metallocene, or a solvent molecule), or only salt ions.
    """
    frags = sorted(Chem.GetMolFrags(mol, asMols=True), key=lambda m: (-m.GetNumHeavyAtoms(), Chem.MolToSmiles(m)))
    if len(frags) == 1:
        return frags[0], []
    rest = [f for f in frags if Chem.MolToSmiles(f) not in COMMON_COUNTERIONS]
    if not rest:
        raise ValueError("every fragment is a common salt ion; which one is the charge carrier cannot be told; "
                         "give the redox-active molecule as one fragment")
    carrier, others = rest[0], rest[1:]
    name = Chem.MolToSmiles(carrier)
    for f in others:
        metals = sorted({a.GetSymbol() for a in f.GetAtoms()
                         if _is_metal(a.GetAtomicNum()) and a.GetAtomicNum() not in SALT_METALS})
        if metals:
            raise ValueError(
                f"ambiguous ionic SMILES: fragment '{Chem.MolToSmiles(f)}' holds {', '.join(metals)} besides "
                f"'{name}'; a metal complex (a metallocene, say) must be written as one fragment with its "
                "metal-ligand bonds, not as separate ions")
    for f in others:
        if f.GetNumHeavyAtoms() == carrier.GetNumHeavyAtoms():
            raise ValueError(
                f"ambiguous ionic SMILES: fragments '{name}' and '{Chem.MolToSmiles(f)}' are equally large, so "
                "which one is the charge carrier cannot be told; give the carrier alone and its counterions "
                "in the counterion column")
        if Chem.GetFormalCharge(f) == 0:
            raise ValueError(
                f"fragment '{Chem.MolToSmiles(f)}' is neutral, so not a counterion of '{name}' (a solvent or a "
                "second molecule?); give one molecule per row")
    counterions = [f for f in frags if f is not carrier]
    return carrier, counterions


def _is_metal(z: int) -> bool:
    """Metals by atomic number (alkali, alkaline earth, transition, lanthanides/actinides, post-transition)."""
    nonmetals = {1, 2, 5, 6, 7, 8, 9, 10, 14, 15, 16, 17, 18, 32, 33, 34, 35, 36, 51, 52, 53, 54, 85, 86}
    return z not in nonmetals


def parse_candidate(
    raw: dict[str, Any], row: int, settings: ComputeSettings, source: str | None = None
) -> Candidate:
    """Validate one input row; raise InputError naming row, field and reason."""
    cid = _clean(raw.get("id"))
    smiles = _clean(raw.get("smiles"))
    if not cid and not smiles:
        raise InputError("empty row", row=row, source=source)
    if not cid:
        raise InputError("missing id; give every candidate a unique id", row=row, field="id", source=source)
    label = f"{row} (id {cid})"
    if not smiles:
        raise InputError("missing SMILES", row=label, field="smiles", source=source)
    mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        raise InputError(
            f"cannot parse SMILES '{smiles}'; check brackets, ring closures and valences",
            row=label, field="smiles", source=source,
        )
    counter = _clean(raw.get("counterion"))
    if counter:
        cmol = Chem.MolFromSmiles(counter)
        if cmol is None:
            raise InputError(f"cannot parse counterion SMILES '{counter}'", row=label, field="counterion", source=source)
        mol = Chem.CombineMols(mol, cmol)
    bad = sorted({a.GetSymbol() for a in mol.GetAtoms() if a.GetAtomicNum() > SUPPORTED_ELEMENTS_MAX_Z or a.GetAtomicNum() == 0})
    if bad:
        raise InputError(
            f"element(s) {', '.join(bad)} outside the GFN-xTB parametrisation (H to Rn)",
            row=label, field="smiles", source=source,
        )
    mol, counterion_note = _balance_charge(mol, settings.counterion, label, source)
    try:
        main, counterions = carrier_fragment(mol)
    except ValueError as exc:
        raise InputError(str(exc), row=label, field="smiles", source=source) from None
    heavy = main.GetNumHeavyAtoms()
    if heavy > settings.max_heavy_atoms:
        raise InputError(
            f"{heavy} heavy atoms, more than the limit of {settings.max_heavy_atoms} (raise compute.max_heavy_atoms)",
            row=label, field="smiles", source=source,
        )
    role = _clean(raw.get("role")) or settings.role
    if role not in ROLES:
        raise InputError(f"role '{role}' not allowed; allowed: {', '.join(ROLES)}", row=label, field="role", source=source)
    n_text = _clean(raw.get("n_electrons"))
    try:
        n = int(float(n_text)) if n_text else settings.n_electrons
    except ValueError:
        n = -1
    if n not in (1, 2):
        raise InputError(f"n_electrons '{n_text}' not allowed; allowed: 1, 2", row=label, field="n_electrons", source=source)
    if role == "bipolar" and n != 1:
        raise InputError("a bipolar candidate moves one electron each way (reduced and oxidised); "
                         "n_electrons must be 1", row=label, field="n_electrons", source=source)
    extra = {k: v for k, v in raw.items() if k not in KNOWN_COLUMNS and k is not None}
    return Candidate(
        id=cid,
        smiles=smiles,
        main_smiles=Chem.MolToSmiles(main),
        counterions=tuple(Chem.MolToSmiles(f) for f in counterions),
        role=role,
        n_electrons=n,
        molar_mass_g_per_mol=float(rdMolDescriptors._CalcMolWt(mol)),  # what Descriptors.MolWt calls; 1 s less to import
        heavy_atoms=heavy,
        row=row,
        extra=extra,
        counterion_note=counterion_note,
    )


def _balance_charge(mol: Chem.Mol, counterion: str, label: str, source: str | None) -> tuple[Chem.Mol, str]:
    """Make a charged input neutral with the campaign's counterion, the rule of the library
    builder (:func:`redoxfront.candidates.library.balancing_counterions`): returns the salt and
    a note saying what was added; without a counterion setting the row is rejected."""
    from redoxfront.candidates.library import balancing_counterions

    net = Chem.GetFormalCharge(mol)
    if net == 0:
        return mol, ""
    if not counterion:
        raise InputError(
            f"net charge {net:+d}: the salt is not balanced, so its molar mass and mAh/g would be "
            "wrong; write the counterions into the SMILES or the 'counterion' column, or set "
            "[compute] counterion (e.g. \"[Cl-]\") to balance such rows",
            row=label, field="smiles", source=source,
        )
    ion = Chem.MolFromSmiles(counterion)
    if ion is None or Chem.GetFormalCharge(ion) == 0:
        raise InputError(f"[compute] counterion '{counterion}' must be a valid SMILES of a charged ion",
                         row=label, field="smiles", source=source)
    try:
        ions = balancing_counterions(net, counterion, Chem.GetFormalCharge(ion))
    except ValueError as exc:
        raise InputError(f"{exc}; write the counterions into the SMILES or the 'counterion' column",
                         row=label, field="smiles", source=source) from exc
    added = ions.count(".") + 1
    salt = Chem.CombineMols(mol, Chem.MolFromSmiles(ions))
    return salt, f"net charge {net:+d} balanced with {added} x {counterion} ([compute] counterion)"


def read_candidates(
    path: str | Path, settings: ComputeSettings
) -> tuple[list[Candidate], list[InputError]]:
    """Read candidates from CSV/TSV or SDF; return the good ones and one error per bad row.

    A bad row never stops the batch. Duplicate ids: the first occurrence is kept. A file that
    cannot be a candidates file raises one InputError naming it (see :mod:`.files`).
    """
    problems: list[InputError] = []
    good = list(iter_candidates(path, settings, problems))
    return good, problems


def iter_candidates(
    path: str | Path, settings: ComputeSettings, problems: list[InputError] | None = None,
    only_ids: set[str] | None = None,
) -> Iterator[Candidate]:
    """The good candidates of a file one at a time, in file order (what :func:`read_candidates`
    returns, without holding them all); each bad row is appended to ``problems``.

    ``only_ids``: parse only the rows with these ids (the others are skipped unread, so their
    problems are not reported: the caller read the whole file before).
    """
    p = Path(path)
    rows = sdf_rows(p) if p.suffix.lower() in SDF_SUFFIXES else csv_rows(p, KNOWN_COLUMNS)
    problems = [] if problems is None else problems
    seen: dict[str, int] = {}
    for row, raw in rows:
        if isinstance(raw, InputError):  # the row could not even be split into fields
            if only_ids is None:
                problems.append(raw)
            continue
        if only_ids is not None and _clean(raw.get("id")) not in only_ids:
            continue
        try:
            cand = parse_candidate(raw, row, settings, source=p.name)
        except InputError as exc:
            problems.append(exc)
            continue
        if cand.id in seen:
            problems.append(InputError(
                f"duplicate id '{cand.id}' (first seen in row {seen[cand.id]}); ids must be unique",
                row=row, field="id", source=p.name,
            ))
            continue
        seen[cand.id] = row
        yield cand


def redox_states(mol_h: Chem.Mol, role: str, n_electrons: int) -> list[RedoxState]:
    """The redox states of a candidate in chain order (charge and unpaired electrons).

    Catholyte: discharged, (intermediate,) charged = discharged - n e- (oxidised).
    Anolyte: charged = discharged + n e-. Bipolar (n = 1): reduced (discharged + e-),
    discharged, oxidised (discharged - e-).
    """
    q0 = Chem.GetFormalCharge(mol_h)
    electrons0 = sum(a.GetAtomicNum() for a in mol_h.GetAtoms()) - q0
    if role == "bipolar":
        return [RedoxState(name=name, charge=q0 + dq, uhf=(electrons0 - dq) % 2)
                for name, dq in ((STATE_REDUCED, -1), (STATE_DISCHARGED, 0), (STATE_OXIDISED, 1))]
    step = 1 if role == "catholyte" else -1  # charge change per electron moved
    names = [STATE_DISCHARGED] + ([STATE_INTERMEDIATE] if n_electrons == 2 else []) + [STATE_CHARGED]
    states = []
    for k, name in enumerate(names):
        q = q0 + step * k
        electrons = electrons0 - step * k
        states.append(RedoxState(name=name, charge=q, uhf=electrons % 2))
    return states


def candidate_states(candidate: Candidate) -> list[RedoxState]:
    """The redox states of a candidate, discharged first (see :func:`redox_states`)."""
    return redox_states(Chem.AddHs(Chem.MolFromSmiles(candidate.main_smiles)), candidate.role,
                        candidate.n_electrons)
