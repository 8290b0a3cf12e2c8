"""Aqueous campaigns in the compute step: protonation forms computed and stored, pKa values
estimated or given, potentials at the campaign pH."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from redoxfront import columns as C
from redoxfront.campaign import load_campaign
from redoxfront.compute.step import compute_campaign
from redoxfront.compute.store import Store
from redoxfront.errors import SettingsError
from redoxfront.units import nernst_slope_v_per_ph


def _campaign(tmp_path: Path, rows: str, aqueous: str = "ph = 7.0\n", solvent: str = "water") -> Path:
    (tmp_path / "inputs").mkdir(parents=True, exist_ok=True)
    (tmp_path / "inputs" / "candidates.csv").write_text(rows)
    (tmp_path / "campaign.toml").write_text(
        f"[compute]\nrole = 'anolyte'\nn_electrons = 2\nsolvent = '{solvent}'\nreference = 'SHE'\nworkers = 1\n"
        "[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n"
        f"[aqueous]\n{aqueous}"
    )
    return tmp_path


def test_benzoquinone_anolyte_gets_its_hydroquinone_forms_and_a_ph_potential(tmp_path: Path) -> None:
    folder = _campaign(tmp_path, "id,smiles,pka_reduced\nbq,O=C1C=CC(=O)C=C1,\nbq_given,O=C1C=CC(=O)C(C)=C1,9.9;11.4\n")
    report = compute_campaign(load_campaign(folder), progress=False)
    t = report.table.set_index(C.ID)
    assert (t[C.STATUS] == "ok").all()
    bq = t.loc["bq"]
    assert "Oc1ccc(O)cc1 (charge +0)" in bq[C.PROTONATION_FORMS]
    assert bq[C.PKA_SOURCE] == "estimated" and bq[C.PKA_UNCERTAINTY] == 3.0
    assert "phenol (pKa 9.99)" in bq[C.PKA_REFERENCE]
    pkas = [float(x) for x in bq[C.PKA_REDUCED].split(";")]
    assert len(pkas) == 2
    # the potential column is the one at pH 7: the computed couple moved by the Nernst shift
    anchor = bq[C.potential_electron_transfer_uncalibrated("she")]
    k = nernst_slope_v_per_ph()
    expected = anchor + k / 2 * sum(max(p - 7.0, 0.0) for p in pkas)
    assert bq[C.potential_uncalibrated("she")] == pytest.approx(expected, abs=5e-4)  # pKa written to 0.01
    # below its first pKa a 2 H+ / 2 e- couple moves -59 mV per pH (CODATA slope; e.g. Clark 1960 for
    # benzoquinone, from memory)
    if min(pkas) > 7.0:
        assert bq[C.PROTONS_AT_PH] == 2
        assert bq[C.NERNST_SLOPE_AT_PH] * 1000 == pytest.approx(-59.16, abs=0.01)
    given = t.loc["bq_given"]
    assert given[C.PKA_SOURCE] == "given" and given[C.PKA_REDUCED] == "9.90;11.40"
    assert given[C.PROTONS_AT_PH] == 2
    assert given[C.potential_ph0_uncalibrated("she")] - given[C.potential_uncalibrated("she")] == \
        pytest.approx(7.0 * k, abs=1e-9)
    # the forms are stored under the candidate's SMILES with their protonation field
    with Store(folder / "cache.sqlite") as store:
        names = [r[0] for r in store._con.execute("SELECT state FROM states WHERE smiles = 'O=C1C=CC(=O)C=C1'")]
    assert any(";protonation=+H@" in n for n in names)
    # a second run reads everything back: no engine call
    again = compute_campaign(load_campaign(folder), progress=False)
    assert again.new_engine_calls == 0
    assert again.table.set_index(C.ID).loc["bq", C.potential_uncalibrated("she")] == \
        pytest.approx(bq[C.potential_uncalibrated("she")])


def test_aqueous_section_needs_water(tmp_path: Path) -> None:
    folder = _campaign(tmp_path, "id,smiles\na,O=C1C=CC(=O)C=C1\n", solvent="acetonitrile")
    with pytest.raises(SettingsError, match=r"\[aqueous\] is set but \[compute\] solvent = 'acetonitrile'"):
        compute_campaign(load_campaign(folder), progress=False)


def test_rhe_cannot_be_the_campaign_reference(tmp_path: Path) -> None:
    folder = _campaign(tmp_path, "id,smiles\na,O=C1C=CC(=O)C=C1\n")
    text = (folder / "campaign.toml").read_text().replace("reference = 'SHE'", "reference = 'RHE'")
    (folder / "campaign.toml").write_text(text)
    with pytest.raises(SettingsError, match="moves with pH"):
        load_campaign(folder)


def test_a_catholyte_written_deprotonated_uses_its_given_pka_values() -> None:
    # Clark 1960 / CRC (from memory): hydroquinone pKa 9.85 and 11.4; a catholyte written as the
    # dianion Q2- with these pKa values moves 2 H+ per 2 e- below 9.85, none above 11.4
    from redoxfront.campaign import AqueousSettings, ComputeSettings
    from redoxfront.candidates.structures import parse_candidate
    from redoxfront.compute.aqueous import aqueous_columns, proton_coupling

    settings = ComputeSettings(solvent="water", role="catholyte", n_electrons=2, reference="SHE")
    cand = parse_candidate({"id": "hq", "smiles": "[O-]c1ccc([O-])cc1.[K+].[K+]", "pka_reduced": "9.85;11.4"}, 2, settings)
    coupling = proton_coupling(cand, 0.10, 0.0, None, settings, AqueousSettings(ph=7.0), None, None)
    assert coupling.pka_source == "given" and coupling.ladder is None
    row = aqueous_columns(coupling, [], "she", 7.0)
    k = nernst_slope_v_per_ph()
    assert row[C.PROTONS_AT_PH] == 2
    assert row[C.potential_uncalibrated("she")] == pytest.approx(0.10 + k / 2 * (2.85 + 4.4))
    assert aqueous_columns(coupling, [], "she", 13.0)[C.potential_uncalibrated("she")] == pytest.approx(0.10)
