"""Relative pKa estimates (proton exchange against a reference acid) on phenols with published pKa."""

from __future__ import annotations

import math

import numpy as np
import pytest

from redoxfront.campaign import ComputeSettings, ConformerSettings
from redoxfront.candidates.protonation import deprotonated_molecule
from redoxfront.compute.aqueous import form_energy_eh
from redoxfront.engine.pka import (
    EMPIRICAL_SLOPE,
    PHENOL_OH,
    deprotonation_energy_ev,
    estimate_pka,
    reference_acid,
    relative_pka,
)
from redoxfront.engine.xtb import make_engine
from redoxfront.units import GAS_CONSTANT_J_PER_MOL_K, FARADAY_C_PER_MOL

# CRC Handbook of Chemistry and Physics, "Dissociation constants of organic acids in aqueous
# solution", 25 degC (values from memory)
PHENOLS = {
    "Oc1ccc([N+](=O)[O-])cc1": 7.15,  # 4-nitrophenol
    "Oc1ccc(C#N)cc1": 7.95,  # 4-cyanophenol
    "Oc1ccc(Cl)cc1": 9.41,  # 4-chlorophenol
    "Oc1ccccc1": 9.99,  # phenol
    "Oc1ccc(C)cc1": 10.26,  # 4-methylphenol
}


def test_relative_pka_formula() -> None:
    # Ho & Coote, Theor. Chem. Acc. 2010, 125, 3 (proton-exchange scheme): with slope 1, a
    # deprotonation energy (ln 10) RT higher than the reference's is one pKa unit higher
    rt_ln10_ev = math.log(10) * GAS_CONSTANT_J_PER_MOL_K * 298.15 / FARADAY_C_PER_MOL
    assert relative_pka(1.0 + rt_ln10_ev, 1.0, 9.99, slope=1.0) == pytest.approx(10.99)
    assert relative_pka(1.0 - 2 * rt_ln10_ev, 1.0, 4.20, slope=0.5) == pytest.approx(3.20)


def test_phenol_pka_estimates_correlate_with_published_values() -> None:
    settings = ComputeSettings(solvent="water", conformers=ConformerSettings(n_generate=2, refine_lowest=1))
    engine = make_engine(settings.engine, settings.method, settings.solvent)
    memo: dict = {}

    def lookup(smiles, name):
        return memo.get((smiles, name))

    def keep(smiles, name, payload):
        return memo.setdefault((smiles, name), payload)

    de = []
    for smiles in PHENOLS:
        acid, base = deprotonated_molecule(smiles, 0)
        e_acid = form_energy_eh(engine, smiles, acid, 0, 0, "", settings, lookup, keep)
        e_base = form_energy_eh(engine, smiles, base, -1, 0, "-H@0", settings, lookup, keep)
        de.append(deprotonation_energy_ev(e_acid, e_base))
    de = np.array(de)
    published = np.array(list(PHENOLS.values()))
    r = np.corrcoef(de, published)[0, 1]
    assert r > 0.95  # correlation, not absolute accuracy (CRC values above)
    rt_ln10_ev = math.log(10) * GAS_CONSTANT_J_PER_MOL_K * 298.15 / FARADAY_C_PER_MOL
    fitted_slope = np.polyfit(de / rt_ln10_ev, published, 1)[0]
    # measured 0.235 on seven phenols; the stated slope must stay near what the engine gives
    assert fitted_slope == pytest.approx(EMPIRICAL_SLOPE, abs=0.06)
    ref = reference_acid(PHENOL_OH)
    est = [estimate_pka(x, ref, de[3]).pka for x in de]
    assert est[3] == pytest.approx(9.99)
    assert np.mean(np.abs(np.array(est) - published)) < 1.0  # within the stated +-3 units, well inside
    assert estimate_pka(de[0], ref, de[3]).source == "estimated"
