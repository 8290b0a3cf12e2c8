"""Measured potentials at another pH: moved to the campaign pH by each couple's Nernst lines."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from redoxfront import columns as C
from redoxfront.statistics.calibration import calibrate_table, read_measured_potentials
from redoxfront.units import nernst_slope_v_per_ph

K = nernst_slope_v_per_ph()


def _table() -> pd.DataFrame:
    return pd.DataFrame({
        C.ID: ["a", "b", "c", "d"],
        C.STATUS: ["ok"] * 4,
        C.N_ELECTRONS: [2, 2, 2, 2],
        C.PKA_REDUCED: ["9.85;11.40", "12.5;13.5", "", "10;12"],
        C.PKA_SOURCE: ["given", "estimated", "none", "given"],
        C.potential_uncalibrated("she"): [-0.10, -0.30, -0.45, -0.55],
    })


def test_measured_rows_are_moved_to_the_campaign_ph_and_flagged_across_a_pka(tmp_path: Path) -> None:
    f = tmp_path / "measured.csv"
    f.write_text(
        "id,potential_v,reference,solvent,ph\n"
        "a,0.285,SHE,water,7\n"        # benzoquinone-like at pH 7 (2 H+/2 e- below 9.85)
        "b,-0.20,SHE,water,12\n"
        "c,-0.50,SHE,water,3\n"        # no proton site: pH-independent
        "d,-0.10,RHE,water,0\n"
    )
    measured, notes = read_measured_potentials(f, "she", "water")
    assert list(measured["ph"]) == [7, 12, 3, 0]
    out, report = calibrate_table(_table(), measured, "she", campaign_ph=9.0)
    m = out.set_index(C.ID)[C.potential_measured("she")]
    # Nernst: -59.16 mV/pH for 2 H+ / 2 e- (CODATA slope); none crossed between pH 7 and 9
    assert m["a"] == pytest.approx(0.285 - 2 * K, abs=1e-9)
    # from pH 12 down to 9 across pKa 12.5? no: 12.5 > 12, both pKa above; full slope, not flagged
    assert m["b"] == pytest.approx(-0.20 + 3 * K, abs=1e-9)
    assert m["c"] == pytest.approx(-0.50)
    # d: vs RHE at pH 0 is vs SHE; moved from 0 to 9, below both pKa: -9 x 59 mV
    assert m["d"] == pytest.approx(-0.10 - 9 * K, abs=1e-9)
    note = out.set_index(C.ID)[C.MEASURED_PH_NOTE]
    assert "flag" not in note["a"] and "moved to pH 9" in note["a"]
    out2, report2 = calibrate_table(_table(), measured, "she", campaign_ph=11.0)
    note2 = out2.set_index(C.ID)[C.MEASURED_PH_NOTE]
    assert "flag: pKa 9.85" in note2["a"]  # 7 -> 11 crosses 9.85 (not 11.4)
    assert any("moved across a pKa" in n for n in report2.notes)
    assert np.isfinite(out2[C.potential_calibrated("she")]).all()


def test_rhe_row_without_ph_is_skipped_with_a_message(tmp_path: Path) -> None:
    f = tmp_path / "measured.csv"
    f.write_text("id,potential_v,reference,solvent\na,0.1,RHE,water\nb,0.2,SHE,water\n")
    measured, notes = read_measured_potentials(f, "she", "water")
    assert list(measured["id"]) == ["b"]
    assert any("needs the pH" in n for n in notes)
