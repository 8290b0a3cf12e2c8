"""Optimised geometries out: the lowest conformer of every redox state, as SDF.

One record per candidate and state, in the atom order of the stored records, so any
molecular viewer can show what the engine optimised. Coordinates are Angstrom. The
drawn bonds and formal charges are those of the discharged SMILES; the state's own
total charge and multiplicity are record properties (``total_charge``,
``multiplicity``), with ``state``, ``energy_eh`` and ``conformer`` (its index in the
ensemble).
"""

from __future__ import annotations

from pathlib import Path

from rdkit import Chem
from rdkit.Geometry import Point3D

from redoxfront.engine.records import CandidateStates
from redoxfront.outputs import replacing


def write_geometries(candidates: list[CandidateStates], path: str | Path) -> int:
    """Write the lowest conformer of every state of every candidate to ``path``; return the count."""
    written = 0
    with replacing(path) as tmp, Chem.SDWriter(str(tmp)) as writer:
        for cs in candidates:
            template = Chem.AddHs(Chem.MolFromSmiles(cs.smiles))
            for name, state in cs.states.items():
                low = state.lowest
                mol = Chem.Mol(template)
                conf = Chem.Conformer(mol.GetNumAtoms())
                for i, (x, y, z) in enumerate(low.positions_angstrom):
                    conf.SetAtomPosition(i, Point3D(float(x), float(y), float(z)))
                mol.RemoveAllConformers()
                mol.AddConformer(conf, assignId=True)
                mol.SetProp("_Name", f"{cs.candidate_id} {name}")
                mol.SetProp("id", cs.candidate_id)
                mol.SetProp("state", name)
                mol.SetIntProp("total_charge", state.charge)
                mol.SetIntProp("multiplicity", state.multiplicity)
                mol.SetDoubleProp("energy_eh", low.energy_eh)
                mol.SetIntProp("conformer", low.source_conformer)
                writer.write(mol)
                written += 1
    return written


__all__ = ["write_geometries"]
