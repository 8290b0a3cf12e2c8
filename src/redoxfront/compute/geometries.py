"""Optimised geometries out: the lowest conformer of every redox state, as SDF.

One record per candidate and state, in the atom order of the stored records, so any
molecular viewer can show what the engine optimised. Coordinates are Angstrom. The
drawn bonds and formal charges are those of the discharged SMILES; the state's own
total charge and multiplicity are record properties (``total_charge``,
``multiplicity``), with ``state``, ``energy_eh`` and ``conformer`` (its index in the
ensemble).
"""

from __future__ import annotations

import io
import tempfile
from pathlib import Path
from typing import Iterable, Iterator

from rdkit import Chem
from rdkit.Geometry import Point3D

from redoxfront.engine.records import CandidateStates
from redoxfront.outputs import replacing


def _records(cs: CandidateStates) -> Iterator[Chem.Mol]:
    """The lowest conformer of every state of one candidate, as RDKit molecules with properties."""
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
        yield mol


def write_geometries(candidates: Iterable[CandidateStates], path: str | Path) -> int:
    """Write the lowest conformer of every state of every candidate to ``path``; return the count."""
    written = 0
    with replacing(path) as tmp, Chem.SDWriter(str(tmp)) as writer:
        for cs in candidates:
            for mol in _records(cs):
                writer.write(mol)
                written += 1
    return written


class GeometrySpool:
    """SDF records of candidates as they finish (any order), kept in a temporary file beside the
    target; :meth:`write` puts them in the order asked into the target, whole or not at all.

    The driver of a large run hands each candidate's states here and drops them, so it never
    holds every candidate's conformers; the spool keeps one (offset, length) per candidate.
    """

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._file = tempfile.TemporaryFile(dir=self.path.parent, prefix=f".{self.path.name}.spool.")
        self._where: dict[str, tuple[int, int, int]] = {}

    def add(self, cs: CandidateStates) -> None:
        """Spool the records of one candidate (a second call for the same id replaces it)."""
        buffer = io.StringIO()
        writer = Chem.SDWriter(buffer)
        n = 0
        for mol in _records(cs):
            writer.write(mol)
            n += 1
        writer.close()
        data = buffer.getvalue().encode()
        self._file.seek(0, io.SEEK_END)
        self._where[cs.candidate_id] = (self._file.tell(), len(data), n)
        self._file.write(data)

    def __len__(self) -> int:
        return len(self._where)

    def write(self, order: Iterable[str]) -> int:
        """Write the spooled records of ``order`` (ids; ids never spooled are skipped) to the
        target; return the records written."""
        written = 0
        with replacing(self.path) as tmp, open(tmp, "wb") as out:
            for cid in order:
                where = self._where.get(cid)
                if where is None:
                    continue
                self._file.seek(where[0])
                out.write(self._file.read(where[1]))
                written += where[2]
        return written

    def close(self) -> None:
        self._file.close()

    def __enter__(self) -> "GeometrySpool":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


__all__ = ["GeometrySpool", "write_geometries"]
