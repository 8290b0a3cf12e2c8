"""The invented aqueous example, reduced: three phenazine anolytes at pH 14 against ferricyanide,
run end to end (compute with protonation forms, calibration at the campaign pH, ranking with the
water window, report with the Pourbaix view)."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest

from redoxfront import columns as C
from redoxfront.pipeline import run_campaign
from redoxfront.units import nernst_slope_v_per_ph

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "phenazine-alkaline-anolytes"
KEEP = ["phz", "phz-2me", "phz-23ome", "phz-1ome"]


def _reduced_copy(tmp_path: Path) -> Path:
    folder = tmp_path / "aqueous"
    shutil.copytree(EXAMPLE, folder)
    cands = pd.read_csv(folder / "inputs" / "candidates.csv", dtype=str, keep_default_na=False)
    cands[cands["id"].isin(KEEP)].to_csv(folder / "inputs" / "candidates.csv", index=False)
    text = (folder / "campaign.toml").read_text()
    text = text.replace("n_generate = 8", "n_generate = 2").replace("refine_lowest = 2", "refine_lowest = 1")
    text = text.replace("workers = 2", "workers = 1").replace("n_draws = 1000", "n_draws = 200")
    (folder / "campaign.toml").write_text(text)
    return folder


def test_invented_aqueous_example_runs_end_to_end(tmp_path: Path) -> None:
    folder = _reduced_copy(tmp_path)
    lines: list[str] = []
    run_campaign(folder, progress=False, echo=lines.append)
    res = folder / "results"
    assert any(ln.strip() == "aqueous at pH 14: potentials at that pH; pKa given 1, estimated 3 (+-3, flagged), none 0"
               for ln in lines)
    desc = pd.read_csv(res / "descriptors.csv").set_index(C.ID)
    assert (desc[C.STATUS] == "ok").all()
    # 5,10-dihydrophenazine is the reduced form the couple was computed with
    assert "c1ccc2c(c1)Nc1ccccc1N2 (charge +0)" in desc.loc["phz", C.PROTONATION_FORMS]
    assert desc.loc["phz", C.PKA_SOURCE] == "estimated"
    assert desc.loc["phz-1ome", C.PKA_SOURCE] == "given" and desc.loc["phz-1ome", C.PKA_REDUCED] == "15.20;16.00"
    assert (desc[C.CAMPAIGN_PH] == 14.0).all()
    # measured: Ag/AgCl at pH 14 -> SHE (+0.197 V, Bard & Faulkner); the pH-12 row moved along its lines
    cal = pd.read_csv(res / "descriptors.csv").set_index(C.ID)
    assert cal.loc["phz", C.potential_measured("she")] == pytest.approx(-0.958 + 0.197)
    pkas = [float(x) for x in str(desc.loc["phz-23ome", C.PKA_REDUCED]).split(";")]
    k = nernst_slope_v_per_ph()
    shift = k / 2 * sum(max(p - 14.0, 0) - max(p - 12.0, 0) for p in pkas)  # Nernst lines, gained protons
    assert cal.loc["phz-23ome", C.potential_measured("she")] == pytest.approx(-0.745 + shift, abs=5e-4)
    assert "measured at pH 12, moved to pH 14" in cal.loc["phz-23ome", C.MEASURED_PH_NOTE]
    # ranked against ferricyanide (+0.361 V vs SHE; Bard, Parsons & Jordan 1985, from memory)
    ranking = pd.read_csv(res / "ranking.csv").set_index(C.ID)
    e = ranking[C.potential_used("she")]
    assert ranking[C.CELL_VOLTAGE].to_numpy() == pytest.approx((0.361 - e).to_numpy())
    assert set(ranking[C.PARTNER_ID]) == {"ferricyanide"}
    # a couple moving protons at pH 14 is judged whole: these phenazines keep both electrons
    assert (ranking[C.ELECTRONS_AT_PH] == 2).all()
    cal_json = json.loads((res / "calibration.json").read_text())
    assert cal_json["lines"][0]["n"] == 3 and cal_json["lines"][0]["slope"] > 0
    summary = json.loads((res / "ranking_summary.json").read_text())
    assert summary["aqueous"]["ph"] == 14.0 and summary["partner"]["potential_v_vs_she"] == 0.361
    assert (res / "figures" / "pourbaix_picks.svg").exists()
    html = (res / "report.html").read_text()
    assert "Potentials against pH (Pourbaix view)" in html
    assert "Reduced forms computed" in html and "(estimated, +-3.0)" in html  # forms and pKa provenance per pick
    assert "hydrogen gas" in html and "safety data sheets" in html
    assert "Invented demo" in html
    # an aqueous uncalibrated potential says its band understates the error
    unc = ranking[ranking[C.POTENTIAL_BASIS] == "uncalibrated"]
    assert all("uncalibrated potential in water" in n for n in unc[C.RANKING_NOTE])
