"""Candidates: reading, validation and redox-state assignment.

The SMILES of a candidate is its discharged state. Counterions written as separate
fragments are split off (kept for the molar mass); the largest fragment is the
redox-active molecule. The charged state has n electrons fewer (catholyte,
oxidised when charged) or more (anolyte, reduced when charged); its spin is the
lowest one the electron count allows (singlet or doublet).
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable

from rdkit import Chem, RDLogger
from rdkit.Chem import Descriptors

from redoxfront.campaign import ROLES, ComputeSettings
from redoxfront.engine.records import (
    STATE_CHARGED,
    STATE_DISCHARGED,
    STATE_INTERMEDIATE,
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
    frags = sorted(Chem.GetMolFrags(mol, asMols=True), key=lambda m: (-m.GetNumHeavyAtoms(), Chem.MolToSmiles(m)))
    main = frags[0]
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
    extra = {k: v for k, v in raw.items() if k not in KNOWN_COLUMNS and k is not None}
    return Candidate(
        id=cid,
        smiles=smiles,
        main_smiles=Chem.MolToSmiles(main),
        counterions=tuple(Chem.MolToSmiles(f) for f in frags[1:]),
        role=role,
        n_electrons=n,
        molar_mass_g_per_mol=float(Descriptors.MolWt(mol)),
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


def _rows_from_csv(path: Path) -> Iterable[tuple[int, dict[str, Any]]]:
    with path.open(newline="", encoding="utf-8-sig") as fh:
        sample = fh.read(4096)
        fh.seek(0)
        dialect = csv.Sniffer().sniff(sample, delimiters=",;\t") if sample else csv.excel
        reader = csv.DictReader(fh, dialect=dialect)
        if reader.fieldnames is None or not {"id", "smiles"} <= {f.strip().lower() for f in reader.fieldnames}:
            raise InputError(
                f"needs columns 'id' and 'smiles'; found: {', '.join(reader.fieldnames or [])}",
                source=str(path),
            )
        for i, raw in enumerate(reader, start=2):  # line 1 is the header
            yield i, {(k or "").strip().lower() if (k or "").strip().lower() in KNOWN_COLUMNS else k: v for k, v in raw.items()}


def _rows_from_sdf(path: Path) -> Iterable[tuple[int, dict[str, Any]]]:
    supplier = Chem.SDMolSupplier(str(path), removeHs=False, sanitize=True)
    for i, mol in enumerate(supplier, start=1):
        if mol is None:
            yield i, {"id": f"record{i}", "smiles": "<unreadable SDF record>"}
            continue
        props = mol.GetPropsAsDict()
        cid = props.pop("id", None) or (mol.GetProp("_Name") if mol.HasProp("_Name") else "") or f"record{i}"
        row = {"id": str(cid), "smiles": Chem.MolToSmiles(Chem.RemoveHs(mol))}
        row.update({k: v for k, v in props.items() if k != "smiles"})
        yield i, row


def read_candidates(
    path: str | Path, settings: ComputeSettings
) -> tuple[list[Candidate], list[InputError]]:
    """Read candidates from CSV/TSV or SDF; return the good ones and one error per bad row.

    A bad row never stops the batch. Duplicate ids: the first occurrence is kept.
    """
    p = Path(path)
    if not p.exists():
        raise InputError("file not found", source=str(p))
    rows = _rows_from_sdf(p) if p.suffix.lower() in (".sdf", ".sd", ".mol") else _rows_from_csv(p)
    good: list[Candidate] = []
    problems: list[InputError] = []
    seen: dict[str, int] = {}
    for row, raw in rows:
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
        good.append(cand)
    return good, problems


def redox_states(mol_h: Chem.Mol, role: str, n_electrons: int) -> list[RedoxState]:
    """Discharged, (intermediate,) charged states: charge and unpaired electrons.

    Catholyte: charged = discharged - n e- (oxidised). Anolyte: charged = discharged + n e-.
    """
    q0 = Chem.GetFormalCharge(mol_h)
    electrons0 = sum(a.GetAtomicNum() for a in mol_h.GetAtoms()) - q0
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
