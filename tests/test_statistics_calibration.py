"""Tests of the linear calibration of computed potentials."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from redoxfront import columns
from redoxfront.campaign import load_campaign
from redoxfront.errors import DataError, InputError, SettingsError
from redoxfront.statistics.calibration import (
    STATUS_CALIBRATED,
    STATUS_OUTSIDE,
    STATUS_UNCALIBRATED,
    Calibration,
    CalibrationSettings,
    calibrate_campaign,
    calibrate_table,
    read_measured_potentials,
)

RAW = columns.potential_uncalibrated("fc")
CAL = columns.potential_calibrated("fc")


def test_line_equals_scipy_linregress():
    rng = np.random.default_rng(2)
    x = rng.uniform(0.0, 1.5, 12)
    y = 0.12 + 0.87 * x + rng.normal(scale=0.03, size=12)
    line = Calibration().fit(x, y).line_
    ref = stats.linregress(x, y)
    # scipy.stats.linregress (reference library): slope, intercept and their standard errors
    assert line.slope == pytest.approx(ref.slope, rel=1e-10)
    assert line.intercept_v == pytest.approx(ref.intercept, rel=1e-10)
    assert line.slope_se == pytest.approx(ref.stderr, rel=1e-8)
    assert line.intercept_se_v == pytest.approx(ref.intercept_stderr, rel=1e-8)
    assert line.r2 == pytest.approx(ref.rvalue**2, rel=1e-10)
    assert line.rmse_v == pytest.approx(np.sqrt(np.mean((y - ref.intercept - ref.slope * x) ** 2)), rel=1e-10)
    loo = []
    for i in range(12):
        k = np.arange(12) != i
        r = stats.linregress(x[k], y[k])
        loo.append(abs(y[i] - r.intercept - r.slope * x[i]))
    assert line.loo_mae_v == pytest.approx(np.mean(loo), rel=1e-9)  # LOO by refitting
    assert (line.computed_min_v, line.computed_max_v) == (x.min(), x.max())


def make_table(n: int = 10) -> pd.DataFrame:
    x = np.linspace(0.2, 1.1, n)
    t = pd.DataFrame({"id": [f"dmb-{i}" for i in range(n)], "status": "ok", RAW: x,
                      "class": ["a"] * (n // 2) + ["b"] * (n - n // 2)})
    t.loc[n - 1, "status"] = "failed: SCC"
    t.loc[n - 1, RAW] = np.nan
    return t


def test_calibrate_table_statuses_and_interval():
    t = pd.concat([make_table(), pd.DataFrame({"id": ["far"], "status": "ok", RAW: [2.0], "class": ["a"]})],
                  ignore_index=True)
    measured = pd.DataFrame({"id": [f"dmb-{i}" for i in range(6)],
                             "measured_v": 0.05 + 0.9 * t[RAW].iloc[:6] + [0.01, -0.01, 0.0, 0.02, -0.02, 0.0]})
    out, rep = calibrate_table(t, measured, "fc")
    assert rep.n_measured_used == 6 and len(rep.lines) == 1
    st = out.set_index("id")[columns.CALIBRATION_STATUS]
    assert st["dmb-2"] == STATUS_CALIBRATED
    assert st["dmb-7"] == STATUS_OUTSIDE  # raw 0.9 V, fitted on 0.2..0.6 V
    assert st["far"] == STATUS_OUTSIDE
    assert st["dmb-9"] == STATUS_UNCALIBRATED and np.isnan(out.loc[9, CAL])
    lo, hi = columns.potential_calibrated_pi_low("fc"), columns.potential_calibrated_pi_high("fc")
    assert (out[lo] < out[CAL]).iloc[:9].all() and (out[hi] > out[CAL]).iloc[:9].all()
    # the interval widens away from the data (leverage)
    assert (out.loc[10, hi] - out.loc[10, lo]) > (out.loc[2, hi] - out.loc[2, lo])
    assert out.loc[2, CAL] == pytest.approx(0.05 + 0.9 * out.loc[2, RAW], abs=0.02)
    assert any("outside the calibration range" in n for n in rep.notes)


def test_without_measurements_everything_uncalibrated():
    out, rep = calibrate_table(make_table(), None, "fc")
    assert out[columns.CALIBRATION_STATUS].eq(STATUS_UNCALIBRATED).all()
    assert out[CAL].isna().all()
    assert rep.lines == ()


def test_per_class_lines():
    t = make_table(12)
    x = t[RAW].to_numpy()
    yv = np.where(t["class"] == "a", 0.1 + 1.0 * x, -0.2 + 0.8 * x)
    measured = pd.DataFrame({"id": t["id"].iloc[:11], "measured_v": yv[:11] + 0.001 * np.sin(np.arange(11)),
                             "class": t["class"].iloc[:11]})
    out, rep = calibrate_table(t, measured, "fc", CalibrationSettings(per_class=True, min_points_per_class=4))
    groups = {l.group: l for l in rep.lines}
    assert set(groups) == {"all", "a", "b"}
    assert groups["a"].slope == pytest.approx(1.0, abs=0.01)
    assert groups["b"].slope == pytest.approx(0.8, abs=0.01)
    assert out.loc[0, columns.CALIBRATION_GROUP] == "a" and out.loc[8, columns.CALIBRATION_GROUP] == "b"
    with pytest.raises(DataError, match="needs a 'class' column"):
        calibrate_table(t.drop(columns="class"), measured, "fc", CalibrationSettings(per_class=True))


@pytest.mark.parametrize("n", [1, 2])
def test_too_few_measurements_leave_potentials_uncalibrated_with_a_note(n):
    # a line has two parameters; with fewer than three points nothing estimates its scatter
    # (common practice, no source): the run goes on uncalibrated and says why
    t = make_table()
    measured = pd.DataFrame({"id": [f"dmb-{i}" for i in range(n)], "measured_v": [0.3, 0.5][:n]})
    out, rep = calibrate_table(t, measured, "fc")
    assert rep.lines == () and (out[columns.CALIBRATION_STATUS] == STATUS_UNCALIBRATED).all()
    assert out[CAL].isna().all()
    assert any(f"only {n} usable measured potential(s); a calibration line needs at least 3" in x for x in rep.notes)


def test_one_residual_degree_of_freedom_is_written_only_with_a_warning(tmp_path):
    from click.testing import CliRunner

    from redoxfront.cli import main

    (tmp_path / "results").mkdir()
    (tmp_path / "inputs").mkdir()
    t = make_table()
    t.to_csv(tmp_path / "results" / "descriptors.csv", index=False)
    pd.DataFrame({"id": ["dmb-0", "dmb-1", "dmb-2"], "potential_v": [0.25, 0.37, 0.46],
                  "reference": "Fc+/Fc", "solvent": "MeCN"}).to_csv(tmp_path / "inputs" / "m.csv", index=False)
    (tmp_path / "campaign.toml").write_text('[inputs]\nmeasured_potentials = "inputs/m.csv"\n')
    r = CliRunner().invoke(main, ["calibrate", str(tmp_path)])
    assert r.exit_code == 0, r.output
    # n = 3 points for intercept + slope: n - p - 1 = 1 residual degree of freedom
    assert "WARNING: 3 rows for 1 term(s) + intercept leave one residual degree of freedom" in r.output
    info = json.loads((tmp_path / "results" / "calibration.json").read_text())
    assert len(info["warnings"]) == 1 and "one residual degree of freedom" in info["warnings"][0]
    again = pd.read_csv(tmp_path / "results" / "descriptors.csv", keep_default_na=False)
    ok = again["status"] == "ok"
    assert again.loc[ok, columns.CALIBRATION_WARNING].str.contains("one residual degree of freedom").all()
    from redoxfront.campaign import load_campaign as _load
    from redoxfront.report import write_report

    html = write_report(_load(tmp_path)).read_text()
    assert '<p class="warn" role="alert"><b>calibration line &#39;all&#39;: WARNING: 3 rows' in html


def test_read_measured_converts_references(tmp_path):
    p = tmp_path / "m.csv"
    pd.DataFrame({"id": ["a", "b", "c", "d", "a"], "potential_v": [1.0, 0.5, "n/a", 0.2, 1.2],
                  "reference": ["SCE", "Fc+/Fc", "SCE", "calomel?", "SCE"], "solvent": "MeCN"}).to_csv(p, index=False)
    m, notes = read_measured_potentials(p, "fc")
    got = m.set_index("id")["measured_v"]
    # Connelly & Geiger, Chem. Rev. 1996, 96, 877: Fc+/Fc = +0.40 V vs SCE in MeCN
    assert got["a"] == pytest.approx(((1.0 - 0.40) + (1.2 - 0.40)) / 2)
    assert got["b"] == pytest.approx(0.5)
    assert set(got.index) == {"a", "b"}
    assert any("row 4 (c)" in n for n in notes) and any("calomel?" in n for n in notes)
    assert any("averaged" in n for n in notes)
    bad = tmp_path / "bad.csv"
    pd.DataFrame({"id": ["a"], "potential_v": [1.0]}).to_csv(bad, index=False)
    with pytest.raises(InputError, match="missing column\\(s\\) reference, solvent"):
        read_measured_potentials(bad, "fc")


def test_calibrate_campaign_writes_files(tmp_path):
    (tmp_path / "results").mkdir()
    (tmp_path / "inputs").mkdir()
    t = make_table()
    t.to_csv(tmp_path / "results" / "descriptors.csv", index=False)
    pd.DataFrame({"id": [f"dmb-{i}" for i in range(5)], "potential_v": 0.45 + 0.9 * t[RAW].iloc[:5] + [0, .01, -.01, .005, 0],
                  "reference": "SCE", "solvent": "MeCN"}).to_csv(tmp_path / "inputs" / "m.csv", index=False)
    (tmp_path / "campaign.toml").write_text(
        'name = "invented"\n[inputs]\nmeasured_potentials = "inputs/m.csv"\n[calibration]\nper_class = false\n')
    out = calibrate_campaign(load_campaign(tmp_path))
    again = pd.read_csv(tmp_path / "results" / "descriptors.csv")
    assert CAL in again.columns and len(again) == 10
    np.testing.assert_allclose(again[CAL], out[CAL], rtol=1e-12)
    info = json.loads((tmp_path / "results" / "calibration.json").read_text())
    # measured vs SCE converted to Fc: intercept 0.45 - 0.40 = 0.05 V
    assert info["lines"][0]["intercept_v"] == pytest.approx(0.05, abs=0.02)
    assert info["lines"][0]["slope"] == pytest.approx(0.9, abs=0.05)
    parity = (tmp_path / "results" / "figures" / "calibration_parity.svg").read_text(encoding="utf-8")
    assert "95 % prediction band" in parity and "measured compounds" in parity
    (tmp_path / "campaign.toml").write_text('[calibration]\nper_clas = true\n')
    with pytest.raises(SettingsError, match="unknown key 'per_clas'"):
        calibrate_campaign(load_campaign(tmp_path))


def test_cli_calibrate(tmp_path):
    from click.testing import CliRunner

    from redoxfront.cli import main

    (tmp_path / "results").mkdir()
    make_table().to_csv(tmp_path / "results" / "descriptors.csv", index=False)
    (tmp_path / "campaign.toml").write_text('name = "invented"\n')
    r = CliRunner().invoke(main, ["calibrate", str(tmp_path)])
    assert r.exit_code == 0, r.output
    assert "10 candidate(s): uncalibrated" in r.output


def test_measured_solvent_notes_fc_in_water_user_reference_and_uncertainty(tmp_path):
    """Issue 11: measurements in another solvent get a note, Fc+/Fc in water a warning; a
    user-defined reference with its stated offset converts; a measured interval is carried."""
    p = tmp_path / "m.csv"
    pd.DataFrame({"id": ["a", "b", "c", "d"], "potential_v": [0.30, 0.70, 0.10, 0.20],
                  "reference": ["Fc+/Fc", "SCE", "Ag wire", "Fc+/Fc"],
                  "solvent": ["MeCN", "dichloromethane", "acetonitrile", "water"],
                  "uncertainty_v": [0.01, 0.02, "", 0.05]}).to_csv(p, index=False)
    m, notes = read_measured_potentials(p, "fc", "acetonitrile", ("Ag wire", -0.25))
    got = m.set_index("id")
    # Connelly & Geiger, Chem. Rev. 1996, 96, 877: Fc+/Fc = +0.40 V vs SCE in MeCN
    assert got.loc["b", "measured_v"] == pytest.approx(0.30)
    # the user's wire stated at -0.25 V vs Fc+/Fc: +0.10 V vs it is -0.15 V vs Fc+/Fc
    assert got.loc["c", "measured_v"] == pytest.approx(-0.15)
    assert got.loc["a", "uncertainty_v"] == pytest.approx(0.01) and np.isnan(got.loc["c", "uncertainty_v"])
    text = "\n".join(notes)
    assert "measured in dichloromethane, water while the compute uses acetonitrile" in text
    assert "warning: m.csv: Fc+/Fc reference in water for d" in text
    t = make_table()
    t.loc[0, columns.ID] = "a"
    out, _ = calibrate_table(t, pd.concat([m, pd.DataFrame({"id": ["dmb-1", "dmb-2", "dmb-3"],
                                                            "measured_v": [0.4, 0.5, 0.6]})]), "fc")
    row = out.set_index(columns.ID).loc["a"]
    assert row[columns.POTENTIAL_MEASURED_UNCERTAINTY] == pytest.approx(0.01)


def _pi_half_width(x: np.ndarray, y: np.ndarray, x0: float) -> float:
    """95 % prediction-interval half-width of simple linear regression at x0 (any regression
    text: t(0.975, n-2) s sqrt(1 + 1/n + (x0 - mean x)^2 / Sxx))."""
    r = stats.linregress(x, y)
    n = len(x)
    s = np.sqrt(np.sum((y - r.intercept - r.slope * x) ** 2) / (n - 2))
    return stats.t.ppf(0.975, n - 2) * s * np.sqrt(1 + 1 / n + (x0 - x.mean()) ** 2 / np.sum((x - x.mean()) ** 2))


def test_bipolar_couples_are_calibrated_on_measured_reductions_and_oxidations_apart(tmp_path):
    rng = np.random.default_rng(7)
    xr, xo = np.array([-2.3, -2.0, -1.7, -1.5]), np.array([0.3, 0.6, 0.8, 1.1])
    yr = 0.25 + 0.9 * xr + rng.normal(scale=0.03, size=4)
    yo = -0.15 + 1.1 * xo + rng.normal(scale=0.03, size=4)
    red = columns.process_potential("reduction", "uncalibrated", "fc")
    ox = columns.process_potential("oxidation", "uncalibrated", "fc")
    t = pd.DataFrame({
        "id": [f"an{i}" for i in range(4)] + [f"cat{i}" for i in range(4)] + ["bp1", "bp2"],
        "status": "ok", "role": ["anolyte"] * 4 + ["catholyte"] * 4 + ["bipolar"] * 2,
        RAW: list(xr) + list(xo) + [np.nan, np.nan],
        red: [np.nan] * 8 + [-1.9, -2.5], ox: [np.nan] * 8 + [0.7, 0.9]})
    path = tmp_path / "measured.csv"
    lines = ["id,potential_v,reference,solvent,process"]
    lines += [f"an{i},{v},Fc+/Fc,acetonitrile," for i, v in enumerate(yr)]
    lines += [f"cat{i},{v},Fc+/Fc,acetonitrile," for i, v in enumerate(yo)]
    lines += ["bp2,0.87,Fc+/Fc,acetonitrile,oxidation", "bp1,-1.5,Fc+/Fc,acetonitrile,"]
    path.write_text("\n".join(lines) + "\n")
    measured, notes = read_measured_potentials(path, "fc")
    out, report = calibrate_table(t, measured, "fc")
    assert [line.group for line in report.lines] == ["all", "bipolar reduction", "bipolar oxidation"]
    bp = out.set_index("id").loc[["bp1", "bp2"]]
    # scipy.stats.linregress (reference library): the reduction line from the anolytes' measured
    # reductions alone; the oxidation line from the catholytes' and bp2's measured oxidation
    rr = stats.linregress(xr, yr)
    xo2, yo2 = np.append(xo, 0.9), np.append(yo, 0.87)
    ro = stats.linregress(xo2, yo2)
    cal_red = columns.process_potential("reduction", "calibrated", "fc")
    cal_ox = columns.process_potential("oxidation", "calibrated", "fc")
    assert bp[cal_red].to_numpy() == pytest.approx(rr.intercept + rr.slope * np.array([-1.9, -2.5]), rel=1e-9)
    assert bp[cal_ox].to_numpy() == pytest.approx(ro.intercept + ro.slope * np.array([0.7, 0.9]), rel=1e-9)
    hi = columns.process_potential("oxidation", "calibrated", "fc", "high")
    assert bp.loc["bp1", hi] - bp.loc["bp1", cal_ox] == pytest.approx(_pi_half_width(xo2, yo2, 0.7), rel=1e-6)
    assert bp.loc["bp2", columns.process_potential("oxidation", "measured", "fc")] == pytest.approx(0.87)
    assert bp["reduction_calibration_status"].tolist() == [STATUS_CALIBRATED, STATUS_OUTSIDE]
    # a bipolar row's measured value without its couple named is not guessed at
    assert any("bp1 without a process" in n for n in report.notes)
    assert np.isnan(bp.loc["bp1", columns.process_potential("reduction", "measured", "fc")])
    # too few measured oxidations: the couple stays uncalibrated and says so
    few, rep2 = calibrate_table(t.iloc[[0, 1, 2, 3, 4, 8, 9]].reset_index(drop=True), measured, "fc")
    assert few.set_index("id").loc["bp1", "oxidation_calibration_status"] == STATUS_UNCALIBRATED
    assert any("bipolar oxidation potentials stay uncalibrated: 2 measured oxidation(s)" in n for n in rep2.notes)
