"""Named sites of a candidate (an atom or a bond) from SMARTS or atom-map numbers.

A campaign names its sites in the ``[sites]`` section, one table per site::

    [sites.ring_methoxy]          # a bond from a ring carbon to a methoxy oxygen
    smarts = "c-[OX2][CH3]"
    atoms = [1, 2]                # 1-based positions in the SMARTS: attachment, first atom

    [sites.para_carbon]           # one atom
    smarts = "[cH]"
    atoms = [1]

    [sites.mapped]                # atom-map numbers written in the candidate SMILES
    map_numbers = [1, 2]

One position makes an atom site; two make a bond site (attachment atom on the parent
side, then the first atom of the substituent). Matches that are symmetry-equivalent
(same canonical atom ranks) count as one; a candidate with no match gets a per-row
reason and empty values for that site, never an error that stops the batch. When a
SMARTS matches several places that are not equivalent (two different methoxy groups of
an unsymmetrical ring), ``several_places`` decides: ``"refuse"`` (the default: empty
values and a reason); ``"min"`` / ``"max"``: ONE place per site, the least (most) buried
one by the Boltzmann-weighted percent buried volume of the ensemble, and every descriptor
of the site (buried volume, surface, Sterimol, clearance, charges, spin) is taken at that
same place, with a note naming its atoms; ``"mean"``: every descriptor is computed at each
place and averaged, per conformer. The least buried place is the least protected one,
usually the one that matters for decomposition.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any, Mapping

from rdkit import Chem

from redoxfront.campaign import choice, section_from_mapping
from redoxfront.errors import SettingsError

_NAME = re.compile(r"^[a-z][a-z0-9_]*$")
SEVERAL_PLACES: tuple[str, ...] = ("refuse", "min", "max", "mean")


@dataclass(frozen=True)
class SiteSpec:
    """One named site: a SMARTS with the positions that form it, or atom-map numbers."""

    smarts: str | None = None
    atoms: tuple[int, ...] = (1,)
    """1-based positions in the SMARTS: one (atom site) or two (bond: attachment, first)."""
    map_numbers: tuple[int, ...] | None = None
    """Atom-map numbers in the candidate SMILES instead of a SMARTS (one or two)."""
    several_places: str = field(default="refuse", metadata=choice(*SEVERAL_PLACES))
    """Non-equivalent matches: refuse, or report the min / max / mean over them."""
    name: str = ""


@dataclass(frozen=True)
class SitesSettings:
    """The campaign's ``[sites]`` section: named sites in file order."""

    sites: tuple[SiteSpec, ...] = ()

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.sites)


def sites_from_mapping(mapping: Mapping[str, Any] | None) -> SitesSettings:
    """Validate the ``[sites]`` table (one sub-table per site) into :class:`SitesSettings`.

    Raises SettingsError naming ``[sites.<name>]`` and the key for any bad entry.
    """
    out = []
    for name, table in dict(mapping or {}).items():
        where = f"sites.{name}"
        if not _NAME.match(name):
            raise SettingsError(
                f"[{where}] site names become column names: use lower-case letters, "
                "digits and '_' and start with a letter"
            )
        if not isinstance(table, Mapping):
            raise SettingsError(f"[{where}] expected a table with 'smarts' or 'map_numbers'")
        if "name" in table:
            raise SettingsError(f"[{where}] unknown key 'name'; the table name is the site name")
        spec = section_from_mapping(SiteSpec, table, where)
        positions = spec.map_numbers if spec.map_numbers is not None else spec.atoms
        if (spec.smarts is None) == (spec.map_numbers is None):
            raise SettingsError(f"[{where}] give exactly one of 'smarts' or 'map_numbers'")
        if len(positions) not in (1, 2) or len(set(positions)) != len(positions):
            raise SettingsError(
                f"[{where}] give one position (atom site) or two different ones (bond site), "
                f"got {list(positions)}"
            )
        if spec.smarts is not None:
            patt = Chem.MolFromSmarts(spec.smarts)
            if patt is None:
                raise SettingsError(f"[{where}] smarts = {spec.smarts!r} is not valid SMARTS")
            bad = [p for p in positions if not 1 <= p <= patt.GetNumAtoms()]
            if bad:
                raise SettingsError(
                    f"[{where}] atoms = {list(positions)}: positions must be between 1 and "
                    f"{patt.GetNumAtoms()} (the atoms of the SMARTS, 1-based)"
                )
        elif any(p < 1 for p in positions):
            raise SettingsError(f"[{where}] map_numbers must be positive")
        out.append(SiteSpec(spec.smarts, tuple(spec.atoms), spec.map_numbers, spec.several_places, name))
    return SitesSettings(sites=tuple(out))


@dataclass(frozen=True)
class SiteMatch:
    """Where a site landed in one molecule: atom indices (0-based, RDKit order)."""

    name: str
    atoms: tuple[int, ...] = field(default=())
    reason: str | None = None
    """Why the site has no atoms (no match, ambiguous match), else None."""
    places: tuple[tuple[int, ...], ...] = ()
    """Every non-equivalent placement (``atoms`` is the first); one unless the site's
    ``several_places`` allows more."""
    summary: str = "refuse"
    """How values over several places are summarised (min, max, mean)."""

    @property
    def is_bond(self) -> bool:
        return len(self.atoms) == 2

    @property
    def found(self) -> bool:
        return self.reason is None


def match_site(mol: Chem.Mol, spec: SiteSpec) -> SiteMatch:
    """Find ``spec`` in ``mol`` (with explicit hydrogens); never raises for a chemistry miss."""
    if spec.map_numbers is not None:
        by_map: dict[int, list[int]] = {}
        for atom in mol.GetAtoms():
            if atom.GetAtomMapNum():
                by_map.setdefault(atom.GetAtomMapNum(), []).append(atom.GetIdx())
        picked = []
        for num in spec.map_numbers:
            hits = by_map.get(num, [])
            if len(hits) != 1:
                what = "no atom" if not hits else f"{len(hits)} atoms"
                return SiteMatch(spec.name, reason=f"site {spec.name}: {what} with map number {num}")
            picked.append(hits[0])
        atoms = tuple(picked)
        if len(atoms) == 2 and mol.GetBondBetweenAtoms(*atoms) is None:
            return SiteMatch(spec.name, reason=f"site {spec.name}: mapped atoms are not bonded")
        return SiteMatch(spec.name, atoms, places=(atoms,))
    patt = Chem.MolFromSmarts(spec.smarts)
    matches = mol.GetSubstructMatches(patt, uniquify=False, maxMatches=10000)
    if not matches:
        return SiteMatch(spec.name, reason=f"site {spec.name}: SMARTS {spec.smarts} does not match")
    ranks = list(Chem.CanonicalRankAtoms(mol, breakTies=False))
    picks: dict[tuple[int, ...], tuple[int, ...]] = {}
    for m in matches:
        atoms = tuple(m[p - 1] for p in spec.atoms)
        key = tuple(ranks[a] for a in atoms)
        picks[key] = min(picks.get(key, atoms), atoms)
    places = tuple(sorted(picks.values()))
    if len(places) > 1 and spec.several_places == "refuse":
        return SiteMatch(
            spec.name,
            reason=f"site {spec.name}: SMARTS {spec.smarts} matches {len(places)} non-equivalent "
            "places; make the SMARTS more specific, use atom-map numbers, or set several_places "
            "to min, max or mean",
        )
    return SiteMatch(spec.name, places[0], places=places, summary=spec.several_places)


def match_sites(mol: Chem.Mol, settings: SitesSettings) -> dict[str, SiteMatch]:
    """Match every site of ``settings`` in ``mol``; keyed by site name, in file order."""
    return {spec.name: match_site(mol, spec) for spec in settings.sites}
