"""Protonation forms of a candidate for proton-coupled couples in water.

An anolyte written in its oxidised (discharged) form, such as a quinone or an azine
(phenazine, alloxazine), takes up protons when it is reduced: Q + 2 e- + 2 H+ -> QH2.
The sites are found by SMARTS on the oxidised form (*acceptor sites*: ring carbonyl O,
two-connected ring N); each becomes, in the reduced form, one of the acid sites chemists
name — phenol/enol O-H (from a quinone C=O), N-H of a reduced N-heterocycle (from an azine
N), or a carboxylic acid O-H — and the site's family picks the reference acid of its pKa
estimate (:mod:`redoxfront.engine.pka`). The SMARTS of the acid sites are matched on the
reduced form built here, so the family a site is given is the one its structure shows.

Which acceptor atoms take the protons: every set of n sites (n = electrons of the couple)
is tried; the reduced form of each is given a Lewis structure by RDKit
(``rdDetermineBonds.DetermineBondOrders``) and the set whose structure carries the fewest
formal charges wins (1,5 for an alloxazine, 5,10 for a phenazine, the two quinone oxygens),
ties going to the order of the patterns. The patterns can be replaced or switched off per
site in the campaign (``[aqueous.sites]``).

A form is named by the heavy atoms (indices in the canonical SMILES of the candidate) that
carry an added proton, ``+H@3,10``; that name is the protonation field of the store key.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Mapping

from rdkit import Chem
from rdkit.Chem import AllChem, rdDetermineBonds

from redoxfront.engine.pka import CARBOXYLIC_ACID, PHENOL_OH, REDUCED_N_HETEROCYCLE_NH
from redoxfront.errors import SettingsError

ACCEPTOR_SITES: dict[str, str] = {
    "azine ring N": "[#7X2;R]",
    "ring carbonyl O": "[OX1]=[#6;R]",
}
"""Sites of the oxidised form that take a proton on reduction (name -> SMARTS), in priority order."""

ACID_SITES: dict[str, tuple[str, str]] = {
    "carboxylic acid": ("[OX2H1][CX3]=[OX1]", CARBOXYLIC_ACID),
    "phenol/enol O-H": ("[OX2H1][#6X3]", PHENOL_OH),
    "N-H of reduced N-heterocycle": ("[#7X3H1;R]", REDUCED_N_HETEROCYCLE_NH),
}
"""Acid sites of the reduced form (name -> (SMARTS, reference family)), matched in this order."""

MAX_SITE_SETS = 60
"""At most this many sets of acceptor sites are tried per candidate."""


@dataclass(frozen=True)
class ProtonSiteInfo:
    """One proton site: heavy-atom index (canonical SMILES order), element, its name in the
    reduced form (``phenol/enol O-H``) and the reference family of its pKa estimate."""

    atom: int
    element: str
    name: str
    family: str

    @property
    def label(self) -> str:
        return f"{self.element}{self.atom} ({self.name})"


@dataclass(frozen=True)
class ProtonationForm:
    """One protonation form of the reduced state: sites holding an added proton, total charge,
    unpaired electrons, store name and the SMILES of its Lewis structure (for the report)."""

    sites: tuple[int, ...]
    charge: int
    uhf: int
    smiles: str

    @property
    def label(self) -> str:
        """Protonation field of the store key: ``+H@3,10``; '' for the anchor form."""
        return "+H@" + ",".join(str(a) for a in self.sites) if self.sites else ""


@dataclass(frozen=True)
class ProtonLadder:
    """The reduced form with 0..k added protons (anchor first) and the sites in adding order."""

    sites: tuple[ProtonSiteInfo, ...]
    forms: tuple[ProtonationForm, ...]


def site_patterns(overrides: Mapping[str, str] | None = None) -> dict[str, str]:
    """Acceptor patterns after the campaign's ``[aqueous.sites]``: a name maps to a SMARTS
    (replacing or adding that site) or to 'off' (dropping it)."""
    patterns = dict(ACCEPTOR_SITES)
    for name, smarts in (overrides or {}).items():
        text = str(smarts).strip()
        if text.lower() == "off":
            patterns.pop(name, None)
            continue
        if Chem.MolFromSmarts(text) is None:
            raise SettingsError(f"[aqueous.sites] {name} = '{text}' is not a valid SMARTS pattern")
        patterns[name] = text
    return patterns


def _bare(mol_h: Chem.Mol, sites: tuple[int, ...]) -> Chem.RWMol:
    rw = Chem.RWMol(mol_h)
    for a in sites:
        h = rw.AddAtom(Chem.Atom(1))
        rw.AddBond(a, h, Chem.BondType.SINGLE)
    return rw


def form_molecule(parent_smiles: str, sites: tuple[int, ...], charge: int) -> tuple[Chem.Mol, int]:
    """The form with protons added at ``sites`` (hydrogens explicit, parent atoms first in the
    canonical order, added H last) with a Lewis structure for total ``charge``, and the number
    of atoms carrying a formal charge in it (fewer is a more plausible site set).

    RDKit assigns bond orders from the connectivity (DetermineBondOrders); where it finds none,
    the parent's bonds are kept with the sites written as cations ([OH+]=, [nH+]).
    """
    parent = Chem.AddHs(Chem.MolFromSmiles(parent_smiles))
    rw = _bare(parent, sites)
    for b in rw.GetBonds():
        b.SetBondType(Chem.BondType.SINGLE)
        b.SetIsAromatic(False)
    for a in rw.GetAtoms():
        a.SetFormalCharge(0)
        a.SetIsAromatic(False)
        a.SetNoImplicit(True)
        a.SetNumExplicitHs(0)
    mol = rw.GetMol()
    try:
        AllChem.Compute2DCoords(mol)
        rdDetermineBonds.DetermineBondOrders(mol, charge=int(charge), allowChargedFragments=True)
        Chem.SanitizeMol(mol)
        if Chem.GetFormalCharge(mol) != charge:
            raise ValueError("charge not matched")
        mol.RemoveAllConformers()
        return mol, sum(1 for a in mol.GetAtoms() if a.GetFormalCharge() != 0)
    except Exception:  # no Lewis structure for this set: the cation form of the parent
        rw = _bare(parent, sites)
        for a in sites:
            atom = rw.GetAtomWithIdx(a)
            atom.SetFormalCharge(atom.GetFormalCharge() + 1)
            atom.SetNoImplicit(True)
        mol = rw.GetMol()
        Chem.SanitizeMol(mol)
        return mol, 99


def _acid_site(mol: Chem.Mol, atom: int) -> tuple[str, str]:
    """(name, family) of the acid site at ``atom`` of a reduced form, from :data:`ACID_SITES`."""
    for name, (smarts, family) in ACID_SITES.items():
        if any(atom in m for m in mol.GetSubstructMatches(Chem.MolFromSmarts(smarts))):
            return name, family
    element = mol.GetAtomWithIdx(atom).GetSymbol()
    return (("O-H (no listed family; phenol reference)", PHENOL_OH) if element == "O"
            else ("N-H (no listed family; reduced N-heterocycle reference)", REDUCED_N_HETEROCYCLE_NH))


def acceptor_atoms(parent_smiles: str, patterns: Mapping[str, str]) -> list[int]:
    """Heavy atoms of the oxidised form matched by the acceptor patterns, in pattern order."""
    mol = Chem.MolFromSmiles(parent_smiles)
    found: list[int] = []
    for smarts in patterns.values():
        for match in mol.GetSubstructMatches(Chem.MolFromSmarts(smarts)):
            if match[0] not in found:
                found.append(match[0])
    return found


def reduced_ladder(parent_smiles: str, n_electrons: int, reduced_charge: int,
                   patterns: Mapping[str, str] | None = None) -> ProtonLadder:
    """Protonation forms of the reduced state of an anolyte written in its oxidised form.

    ``reduced_charge``: total charge of the reduced anchor form (oxidised charge - n). At most
    one proton per electron is added. No acceptor site: a ladder of the anchor alone.
    """
    patterns = ACCEPTOR_SITES if patterns is None else patterns
    atoms = acceptor_atoms(parent_smiles, patterns)
    k = min(n_electrons, len(atoms))
    parent = Chem.AddHs(Chem.MolFromSmiles(parent_smiles))
    electrons0 = sum(a.GetAtomicNum() for a in parent.GetAtoms()) - reduced_charge
    anchor = ProtonationForm((), reduced_charge, electrons0 % 2, parent_smiles)  # charge says the rest
    if k == 0:
        return ProtonLadder((), (anchor,))
    best: tuple[int, int, tuple[int, ...], Chem.Mol] | None = None
    for order, combo in enumerate(itertools.islice(itertools.combinations(atoms, k), MAX_SITE_SETS)):
        if electrons0 % 2:  # odd electron count (a proton brings none): no closed-shell structure to judge
            mol, charged = form_molecule(parent_smiles, combo, reduced_charge + k)
            best = (0, order, combo, mol)
            break
        mol, charged = form_molecule(parent_smiles, combo, reduced_charge + k)
        if best is None or (charged, order) < best[:2]:
            best = (charged, order, combo, mol)
    assert best is not None
    _, _, combo, full = best
    infos = []
    for a in combo:
        name, family = _acid_site(full, a)
        infos.append(ProtonSiteInfo(a, full.GetAtomWithIdx(a).GetSymbol(), name, family))
    forms = [anchor]
    for j in range(1, k + 1):
        sites = tuple(sorted(combo[:j]))
        mol = full if j == k else form_molecule(parent_smiles, sites, reduced_charge + j)[0]
        forms.append(ProtonationForm(sites, reduced_charge + j, electrons0 % 2, _smiles(mol)))
    return ProtonLadder(tuple(infos), tuple(forms))


def _smiles(mol: Chem.Mol) -> str:
    return Chem.MolToSmiles(Chem.RemoveHs(mol, sanitize=False))


def deprotonated_molecule(acid_smiles: str, site_atom: int) -> tuple[Chem.Mol, Chem.Mol]:
    """(acid with hydrogens, its conjugate base) of a reference acid: the proton on heavy atom
    ``site_atom`` (index in ``acid_smiles``) removed and the atom given a -1 formal charge.
    Hydrogens explicit, heavy atoms first in the SMILES' order."""
    acid = Chem.AddHs(Chem.MolFromSmiles(acid_smiles))
    rw = Chem.RWMol(acid)
    h = next(n.GetIdx() for n in rw.GetAtomWithIdx(site_atom).GetNeighbors() if n.GetAtomicNum() == 1)
    rw.RemoveAtom(h)
    atom = rw.GetAtomWithIdx(site_atom)
    atom.SetFormalCharge(atom.GetFormalCharge() - 1)
    atom.SetNoImplicit(True)
    base = rw.GetMol()
    Chem.SanitizeMol(base)
    return acid, base
