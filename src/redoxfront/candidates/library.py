"""A virtual library: one scaffold with numbered attachment points x substituent lists.

The scaffold is a SMILES with attachment points written as numbered dummy atoms,
``[*:1]``, ``[*:2]``, ...; each site has a list of substituents, each a SMILES with one
dummy atom at the atom that bonds to the scaffold (``[*]C(C)(C)C``), or without one, in
which case its first atom bonds (``OC`` is methoxy). ``H`` leaves the site unsubstituted.
Every combination is joined with RDKit's ``molzip``; combinations that give the same
molecule (symmetric scaffolds) are kept once, under the first combination's id. The
result is a candidates table (``id``, ``smiles`` and one ``substituent_<site>`` column per
site, which travel on as user columns) that ``redoxfront compute`` reads like any other.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Mapping

import pandas as pd
from rdkit import Chem, RDLogger
from tqdm.auto import tqdm

from redoxfront.campaign import Campaign, section_from_mapping
from redoxfront.columns import substituent_column
from redoxfront.errors import SettingsError
from redoxfront.csv_tables import write_csv

HYDROGEN = "H"
"""Substituent text for an unsubstituted site."""


@dataclass(frozen=True)
class LibrarySettings:
    """The ``[library]`` section of a campaign."""

    scaffold: str = ""
    """SMILES with numbered attachment points [*:1], [*:2], ..."""
    substituents: dict[str, Any] = field(default_factory=dict)
    """Per site number (as text, the TOML key), the substituents to try there: a list of
    SMILES, or a table of label = SMILES (the label goes into the ``substituent_<site>``
    column instead of the SMILES)."""
    substituents_file: str = ""
    """A CSV with columns ``site``, ``smiles`` and optionally ``label``: more substituents,
    relative to the campaign folder (read by :func:`library_for_campaign`)."""
    id_prefix: str = "lib"
    output: str = "inputs/library.csv"
    """Where the candidates table is written, relative to the campaign folder."""
    counterion: str = ""
    """SMILES of one counterion (e.g. "F[B-](F)(F)F") for products that carry a net charge:
    as many as balance the charge go into the ``counterion`` column (molar mass)."""


def _parse(smiles: str) -> Chem.Mol | None:
    params = Chem.SmilesParserParams()
    params.removeHs = False  # keeps the H of '[*:1][H]'
    return Chem.MolFromSmiles(smiles, params)


def attachment_points(scaffold: str) -> list[int]:
    """Site numbers of the scaffold's attachment points, sorted; errors name the problem."""
    mol = _parse(scaffold)
    if mol is None:
        raise SettingsError(f"[library] scaffold '{scaffold}' is not a valid SMILES")
    sites = [a.GetAtomMapNum() for a in mol.GetAtoms() if a.GetAtomicNum() == 0]
    if not sites:
        raise SettingsError("[library] scaffold has no attachment points; write them as [*:1], [*:2], ...")
    if 0 in sites:
        raise SettingsError("[library] scaffold: every attachment point needs a number, as in [*:1]")
    if len(set(sites)) != len(sites):
        raise SettingsError("[library] scaffold: an attachment point number is used twice")
    return sorted(sites)


def substituent_fragment(text: str, site: int) -> str:
    """The substituent as a SMILES fragment whose dummy atom carries ``site`` as map number."""
    text = text.strip()
    where = f"[library.substituents] site {site}, '{text}'"
    if text == HYDROGEN:
        return f"[*:{site}][H]"
    mol = _parse(text)
    if mol is None:
        raise SettingsError(f"{where}: not a valid SMILES")
    dummies = [a for a in mol.GetAtoms() if a.GetAtomicNum() == 0]
    if not dummies:
        mol = _parse("*" + text)
        if mol is None:
            raise SettingsError(f"{where}: cannot bond its first atom to the scaffold; mark it with [*]")
        dummies = [a for a in mol.GetAtoms() if a.GetAtomicNum() == 0]
    if len(dummies) != 1:
        raise SettingsError(f"{where}: needs exactly one attachment point [*], found {len(dummies)}")
    dummies[0].SetAtomMapNum(site)
    return Chem.MolToSmiles(mol)


def _counterion_charge(counterion: str) -> int:
    mol = Chem.MolFromSmiles(counterion) if counterion else None
    if counterion and (mol is None or Chem.GetFormalCharge(mol) == 0):
        raise SettingsError(f"[library] counterion '{counterion}' must be a valid SMILES of a charged ion")
    return Chem.GetFormalCharge(mol) if mol is not None else 0


def balancing_counterions(product_charge: int, counterion: str, counterion_charge: int) -> str:
    """The counterions that make a product neutral, as one dotted SMILES ('' if neutral).

    Raises ValueError when the charge cannot be balanced by whole counterions.
    """
    if product_charge == 0:
        return ""
    if not counterion:
        raise ValueError(f"net charge {product_charge:+d} and no [library] counterion to balance it")
    count, rest = divmod(-product_charge, counterion_charge)
    if rest or count <= 0:
        raise ValueError(f"net charge {product_charge:+d} cannot be balanced by the counterion "
                         f"'{counterion}' (charge {counterion_charge:+d})")
    return ".".join([counterion] * count)


def build_library(settings: LibrarySettings, *, progress: bool = False) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Every scaffold x substituent combination, one row per distinct molecule.

    Returns (candidates, problems): candidates has ``id``, ``smiles`` and
    ``substituent_<site>`` columns; problems lists combinations RDKit could not join or
    sanitise (``id``, ``reason``), which are left out while the rest goes on.
    """
    sites = attachment_points(settings.scaffold)
    ion_charge = _counterion_charge(settings.counterion)
    given = {str(k): v for k, v in settings.substituents.items()}
    missing = [s for s in sites if str(s) not in given]
    extra = sorted(set(given) - {str(s) for s in sites})
    if missing:
        raise SettingsError(f"[library.substituents] no list for site {missing[0]}; "
                            f"the scaffold has sites {', '.join(map(str, sites))}")
    if extra:
        raise SettingsError(f"[library.substituents] site {extra[0]} is not an attachment point of the scaffold")
    choices = []
    for s in sites:
        entries = given[str(s)]
        if isinstance(entries, Mapping):
            labelled = [(str(label), str(smiles)) for label, smiles in entries.items()]
        elif isinstance(entries, (list, tuple)):
            labelled = [(str(t).strip(), str(t)) for t in entries]
        else:
            labelled = []
        if not labelled:
            raise SettingsError(f"[library.substituents] site {s}: give a list of substituents, e.g. [\"H\", \"C\"], "
                                "or a table of label = SMILES")
        choices.append([(label, substituent_fragment(smiles, s)) for label, smiles in labelled])
    total = math.prod(len(c) for c in choices)
    width = len(str(total))
    rows, problems, seen = [], [], {}
    RDLogger.DisableLog("rdApp.*")  # molzip warns about H next to dummies; failures are reported below
    try:
        combos = tqdm(itertools.product(*choices), total=total, desc="library", unit="mol",
                      disable=not progress or total < 5000)
        for k, combo in enumerate(combos, start=1):
            cid = f"{settings.id_prefix}-{k:0{width}d}"
            labels = {substituent_column(s): text for s, (text, _) in zip(sites, combo)}
            joined = ".".join([settings.scaffold] + [frag for _, frag in combo])
            mol = _parse(joined)
            try:
                product = Chem.RemoveHs(Chem.molzip(mol))
                Chem.SanitizeMol(product)
                smiles = Chem.MolToSmiles(product)
            except Exception as exc:  # RDKit raises several types for valence and bonding errors
                problems.append({"id": cid, **labels, "reason": f"cannot join: {exc}"})
                continue
            if smiles in seen:
                continue  # the same molecule from a symmetry-equivalent combination
            try:
                ions = balancing_counterions(Chem.GetFormalCharge(product), settings.counterion, ion_charge)
            except ValueError as exc:
                problems.append({"id": cid, **labels, "reason": str(exc)})
                continue
            seen[smiles] = cid
            rows.append({"id": cid, "smiles": smiles, **({"counterion": ions} if settings.counterion else {}),
                         **labels})
    finally:
        RDLogger.EnableLog("rdApp.*")
    return pd.DataFrame(rows), pd.DataFrame(problems, columns=["id", *[substituent_column(s) for s in sites], "reason"])


def _with_file(given: dict[str, Any], path: Path) -> dict[str, dict[str, str]]:
    """The inline substituents plus those of a CSV file (site, smiles, label), as label tables."""
    if not path.exists():
        raise SettingsError(f"[library] substituents_file {path} does not exist")
    table = pd.read_csv(path, dtype=str, keep_default_na=False)
    missing = {"site", "smiles"} - set(table.columns)
    if missing:
        raise SettingsError(f"[library] substituents_file {path.name}: needs columns site and smiles "
                            f"(and optionally label); missing {', '.join(sorted(missing))}")
    out: dict[str, dict[str, str]] = {}
    for site, entries in given.items():
        out[str(site)] = (dict(entries) if isinstance(entries, Mapping)
                          else {str(t).strip(): str(t) for t in entries})
    for i, r in enumerate(table.to_dict("records"), start=2):  # line 1 is the header
        site, smiles = r["site"].strip(), r["smiles"].strip()
        if not site or not smiles:
            raise SettingsError(f"[library] substituents_file {path.name}, line {i}: site and smiles are needed")
        out.setdefault(site, {})[(r.get("label") or "").strip() or smiles] = smiles
    return out


def library_for_campaign(campaign: Campaign, *, progress: bool = True) -> tuple[Path, int, int, pd.DataFrame]:
    """Build the campaign's ``[library]`` and write it; returns (path, combinations, distinct, problems)."""
    settings = section_from_mapping(LibrarySettings, campaign.section("library"), "library")
    if settings.substituents_file:
        settings = replace(settings, substituents=_with_file(settings.substituents,
                                                             campaign.path(settings.substituents_file, "[library] substituents_file")))
    if not settings.scaffold:
        raise SettingsError("[library] scaffold is missing; e.g. scaffold = \"COc1cc([*:1])c(OC)cc1[*:2]\"")
    table, problems = build_library(settings, progress=progress)
    combos = math.prod(len(v) for v in settings.substituents.values())
    out = campaign.output_path(settings.output, "[library] output")
    out.parent.mkdir(parents=True, exist_ok=True)
    write_csv(table, out)
    return out, combos, len(table), problems


__all__ = ["HYDROGEN", "LibrarySettings", "attachment_points", "balancing_counterions", "build_library",
           "library_for_campaign", "substituent_fragment"]
