"""2D structure drawings of candidates for the report: RDKit depictions as inline SVG.

RDKit computes 2D coordinates (``rdDepictor``, CoordGen off) and draws with
``MolDraw2DSVG``; the markup is cleaned by :func:`redoxfront.figure_style.svg_for_html`.
A SMILES RDKit cannot read gives no drawing (the report says so), never an error.
"""

from __future__ import annotations

from rdkit import Chem, RDLogger
from rdkit.Chem.Draw import rdMolDraw2D

from redoxfront.figure_style import svg_for_html


def structure_svg(smiles: str, *, width: int = 240, height: int = 170, id_prefix: str = "") -> str:
    """Inline SVG markup of the 2D structure of ``smiles`` ('' when it cannot be parsed).

    Size in CSS pixels; transparent background so it sits on any card colour.
    """
    RDLogger.DisableLog("rdApp.*")
    try:
        mol = Chem.MolFromSmiles(str(smiles))
    finally:
        RDLogger.EnableLog("rdApp.*")
    if mol is None:
        return ""
    drawer = rdMolDraw2D.MolDraw2DSVG(width, height)
    opts = drawer.drawOptions()
    opts.clearBackground = False
    opts.bondLineWidth = 1.6
    opts.padding = 0.08
    rdMolDraw2D.PrepareAndDrawMolecule(drawer, mol)
    drawer.FinishDrawing()
    return svg_for_html(drawer.GetDrawingText(), title=f"structure of {smiles}", id_prefix=id_prefix)
