"""The whole job on a small campaign: every step runs, files appear, the report escapes input."""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from redoxfront import columns as C
from redoxfront.campaign import load_campaign
from redoxfront.compute.step import compute_campaign
from redoxfront.pipeline import run_campaign

SMILES = ["COc1ccccc1", "Cc1ccc(C)cc1", "COc1ccc(C)cc1", "COc1ccc(OC)cc1", "COc1ccccc1OC",
          "Cc1ccc(OC)c(C)c1", "CC(C)(C)c1ccc(OC)cc1"]
IDS = ["anisole", "p-xylene", "4-me-anisole", "dmb", "veratrole", "dime-anisole", "x<script>alert(1)</script>"]


def _campaign(folder: Path) -> Path:
    (folder / "inputs").mkdir(parents=True)
    pd.DataFrame({"id": IDS, "smiles": SMILES, "solubility_mol_per_l": 0.8}).to_csv(
        folder / "inputs" / "candidates.csv", index=False)
    (folder / "campaign.toml").write_text(
        'name = "pipeline test"\n'
        "[inputs]\nmeasured_potentials = 'inputs/potentials.csv'\nmeasured_rates = 'inputs/rates.csv'\n"
        "[compute]\nworkers = 1\n[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n"
        "[model]\nterms = ['potential', 'spin_exposure_angstrom2_mean']\nn_permutations = 100\n"
        "[cell]\ncounter = 'potential'\ncounter_potential_v = -2.0\n"
        "[ranking]\nn_draws = 200\nn_suggestions = 2\n"
        "[report]\nnote = 'test data made by a known rule'\n"
    )
    return folder


def test_run_every_step_and_report(tmp_path):
    folder = _campaign(tmp_path)
    camp = load_campaign(folder)
    raw = compute_campaign(camp, progress=False).table.set_index(C.ID)
    pot = raw[C.potential_uncalibrated("fc")]
    # measured = 0.30 + 0.80 x computed exactly, reported vs SCE for half of them
    # (Connelly & Geiger, Chem. Rev. 1996, 96, 877: Fc+/Fc = +0.40 V vs SCE in MeCN)
    made = IDS[:6]
    meas = pd.DataFrame({"id": made, "potential_v": 0.30 + 0.80 * pot[made].to_numpy(),
                         "reference": ["fc", "sce"] * 3, "solvent": "acetonitrile"})
    meas.loc[meas.reference == "sce", "potential_v"] += 0.40
    meas.to_csv(folder / "inputs" / "potentials.csv", index=False)
    e_cal = 0.30 + 0.80 * pot[made]
    expo = raw.loc[made, "spin_exposure_angstrom2_mean"]
    noise = np.random.default_rng(0).normal(0, 0.01, len(made))
    log10k = -3.0 + 1.0 * e_cal + 0.10 * expo + noise
    pd.DataFrame({"id": made, C.LOG10_K_FIRST: log10k.to_numpy()}).to_csv(folder / "inputs" / "rates.csv", index=False)

    lines: list[str] = []
    run_campaign(folder, progress=False, echo=lines.append)
    steps = [ln.split()[0] for ln in lines if not ln.startswith(" ")]
    assert steps == ["compute", "fade", "calibrate", "fit", "rank", "report"]
    # issue 11: run says which sources each step used (6 measured potentials, 1 calibrated)
    assert any(ln.strip() == "potentials: measured 6, calibrated 1, uncalibrated 0" for ln in lines)
    assert any(ln.strip() == "rates that trained the model: measured 6, fitted 0" for ln in lines)
    assert any(ln.strip() == "ranked on potentials: measured 6, calibrated 1, uncalibrated 0; "
               "rates: measured 6, fitted 0, predicted 1" for ln in lines)
    res = folder / "results"
    cal = json.loads((res / "calibration.json").read_text())
    assert cal["lines"][0]["slope"] == pytest.approx(0.80, abs=1e-6)  # exact rule recovered
    assert cal["lines"][0]["intercept_v"] == pytest.approx(0.30, abs=1e-6)
    model = json.loads((res / "model.json").read_text())
    assert model["coefficients"][2] == pytest.approx(0.10, abs=0.02)
    ranking = pd.read_csv(res / "ranking.csv")
    assert len(ranking) == 7 and ranking[C.HALF_LIFE].notna().all()
    html = (res / "report.html").read_text()
    assert "<script>alert(1)</script>" not in html  # every string is escaped
    assert "x&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "test data made by a known rule" in html
    # issue 11: the report says which rates trained the model and which window was checked
    assert "Rates that trained the model: measured 6, fitted from cycling files 0" in html
    assert "V vs Fc+/Fc (typical window of acetonitrile with 0.1 M TBAPF6" in html
    assert "potentials vs Fc+/Fc;" in html  # the reference as a person writes it, not its key
    assert '<svg role="img" aria-label="Trade-off front"' in html  # figures inline: one self-contained file
    assert "safety data sheets" in html
    # provenance: the engine's version and the key of the stored states are in the report
    from importlib.metadata import version

    assert f"tblite {version('tblite')}" in html
    assert f"settings hash {camp.compute.result_hash()}" in html
    assert "<code>geometries.sdf</code>" in html and "<code>picks.csv</code>" in html  # files listed


@pytest.mark.slow
def test_invented_bipolar_example_runs_end_to_end_with_symmetric_cells(tmp_path):
    import shutil

    from redoxfront.units import AH_PER_MOL_ELECTRONS

    folder = tmp_path / "bipolar"
    shutil.copytree(Path(__file__).parents[1] / "examples" / "bipolar-symmetric-cells", folder)
    lines = []
    run_campaign(folder, progress=False, echo=lines.append)
    text = "\n".join(lines)
    assert "bipolar reductions calibrated 4" in text and "bipolar oxidations measured 1" in text
    res = folder / "results"
    ranked = pd.read_csv(res / "ranking.csv").set_index("id")
    bip = ranked[ranked[C.ROLE] == "bipolar"]
    assert sorted(bip.index) == ["imine-cn", "imine-h", "imine-nme2", "imine-ome"]
    assert bip[C.PARETO_RANK].notna().all() and ranked[C.PARETO_RANK].notna().all()  # ranked side by side
    assert (bip[C.PARTNER_ID] == bip.index).all()  # each bipolar molecule is its own counter electrolyte
    red, ox = C.process_potential("reduction", "used", "fc"), C.process_potential("oxidation", "used", "fc")
    # V = E(ox) - E(red); W = V Q / 2 on the two-tank basis, Q = F c / 3600 = 26.80148 x 0.5 Ah/L
    # (CODATA 2018 Faraday constant)
    assert bip[C.CELL_VOLTAGE].to_numpy() == pytest.approx((bip[ox] - bip[red]).to_numpy())
    assert bip[C.ENERGY_DENSITY].to_numpy() == pytest.approx(bip[C.CELL_VOLTAGE].to_numpy() * 26.80148 * 0.5 / 2, rel=1e-5)
    assert AH_PER_MOL_ELECTRONS == pytest.approx(26.80148, abs=1e-5)
    assert (bip[C.CELL_VOLTAGE_LOW] < bip[C.CELL_VOLTAGE]).all() and (bip[C.CELL_VOLTAGE] < bip[C.CELL_VOLTAGE_HIGH]).all()
    # the measured oxidation of imine-h is used as measured; the rest are calibrated per couple type
    assert ranked.loc["imine-h", ox] == pytest.approx(1.24)
    assert ranked.loc["imine-h", "oxidation_potential_basis"] == "measured"
    assert set(bip["reduction_potential_basis"]) == {"calibrated"}
    forms = bip[[C.form_column("reduced", C.HALF_LIFE), C.form_column("oxidised", C.HALF_LIFE)]]
    assert bip[C.HALF_LIFE].to_numpy() == pytest.approx(forms.min(axis=1).to_numpy())
    assert set(bip[C.LIFE_LIMITED_BY]) <= {"reduced", "oxidised"}
    # one rate model for both forms: each form's rate is the model at that form's own potential
    model = json.loads((res / "model.json").read_text())
    pred = pd.read_csv(res / "predictions.csv").set_index("id").loc[bip.index]
    b0, b1, b2 = model["coefficients"]
    assert model["terms"] == [C.potential_calibrated("fc"), "gap_discharged_ev"]
    assert pred[C.log10_k_predicted_form("oxidised", 1)].to_numpy() == pytest.approx(
        (b0 + b1 * pred[C.process_potential("oxidation", "calibrated", "fc")] + b2 * pred["gap_discharged_ev"]).to_numpy())
    assert pred[C.log10_k_predicted_form("reduced", 1)].to_numpy() == pytest.approx(
        (b0 + b1 * pred[C.process_potential("reduction", "calibrated", "fc")] + b2 * pred["gap_discharged_ev"]).to_numpy())
    summary = json.loads((res / "ranking_summary.json").read_text())["symmetric_cells"]
    assert summary["n_bipolar"] == 4 and summary["n_bipolar_ranked"] == 4
    assert "shorter" in summary["rules"]["half_life_h"]
    groups = [line["group"] for line in json.loads((res / "calibration.json").read_text())["lines"]]
    assert groups == ["all", "bipolar reduction", "bipolar oxidation"]
    # the report shows both potentials, the symmetric cell, the limiting form and the rules
    html = (res / "report.html").read_text()
    for text in ("Reduction potential", "Oxidation potential", "Life limited by", "symmetric cell",
                 "(symmetric cell: the same molecule in both tanks)", "Bipolar candidates",
                 "bipolar reduction", "bipolar oxidation"):
        assert text in html, text
    assert "per row: 5 catholyte, 5 anolyte, 4 bipolar" in html  # the roles the rows name, not the default
    limiting = {"reduced": "radical anion", "oxidised": "radical cation"}[bip.loc["imine-h", C.LIFE_LIMITED_BY]]
    assert f"limited by the {limiting}" in html
