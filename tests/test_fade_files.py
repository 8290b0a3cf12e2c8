"""Cycler and decay file import: header/unit detection, messy-file hygiene, errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from redoxfront.columns import (
    CHARGE_CAPACITY,
    CYCLE,
    DISCHARGE_CAPACITY,
    NOTE,
    RETENTION,
    SIGNAL,
    TIME_H,
    USED,
)
from redoxfront.errors import InputError
from redoxfront.fade.cleanup import flag_spikes
from redoxfront.fade.files import load_series, role_of, split_header


def point_level_frame(n_cycles: int = 8, q0: float = 20.0, k_per_h: float = 0.01,
                      seed: int = 0) -> tuple[pd.DataFrame, np.ndarray]:
    """Invented point-level export: charge 4 rows, rest 2 rows, discharge 4 rows per cycle."""
    rng = np.random.default_rng(seed)
    rows, t, caps = [], 0.0, []
    for c in range(1, n_cycles + 1):
        q = q0 * np.exp(-k_per_h * t / 3600.0)
        caps.append(q)
        for f in np.linspace(0, 1, 4):
            rows.append([t + f * 3600, c, "CC_Chg", 5.0, 3.0 + 0.1 * f, q * f, 0.0])
        t += 3600
        for f in (0.0, 1.0):
            rows.append([t + f * 600, c, "Rest", 0.0, 3.1, q, 0.0])
        t += 600
        for f in np.linspace(0, 1, 4):
            rows.append([t + f * 3600, c, "CC_DChg", -5.0, 3.1 - 0.1 * f, q, 0.98 * q * f])
        t += 3600 + rng.uniform(0, 1)
    cols = ["Test Time (s)", "Cycle Index", "Step Type", "Current (mA)", "Voltage (V)",
            "Charge Capacity (mAh)", "Discharge Capacity (mAh)"]
    return pd.DataFrame(rows, columns=cols), np.array(caps)


def test_split_header_reads_units_in_common_spellings() -> None:
    # common practice, no source: units written as "(s)", "/h", "[mAh]" or a trailing token
    assert split_header("Test Time (s)") == ("time", "s")
    assert split_header("Q discharge/mA.h") == ("q discharge", "mah")
    assert split_header("Discharge_Capacity[Ah]") == ("discharge capacity", "ah")
    assert split_header("time_min") == ("time", "min")
    assert split_header("Concentration (mM)") == ("concentration", "mm")
    assert split_header("c / mol L-1") == ("c", "moll-1")
    assert split_header("Cycle Index") == ("cycle index", None)


@pytest.mark.parametrize("header,role", [
    ("Test Time (s)", "time"), ("Cycle_Index", "cycle"), ("Cycle #", "cycle"),
    ("Step Type", "step"), ("Current (mA)", "current"), ("Ewe/V", "voltage"),
    ("Charge Capacity (mAh)", "charge_capacity"), ("Q charge/mA.h", "charge_capacity"),
    ("Discharge Capacity (mAh)", "discharge_capacity"), ("Dchg. Cap.(mAh)", "discharge_capacity"),
    ("QDis (Ah)", "discharge_capacity"), ("Capacity (mAh)", "capacity"),
    ("Absorbance", "absorbance"), ("NMR integral", "integral"), ("Conc (mM)", "concentration"),
    ("Step Time (s)", None), ("Energy (Wh)", None),
])
def test_role_of_common_headers(header: str, role: str | None) -> None:
    # common practice, no source: header spellings seen in cycler exports
    assert role_of(header) == role


def test_point_level_rest_steps_nan_and_counter_resets(tmp_path) -> None:
    df, caps = point_level_frame(n_cycles=8)
    # a missing value and a restarted test: cycles 5..8 written as 1..4, time restarting at 0
    df.loc[3, "Voltage (V)"] = np.nan
    df.loc[5, "Cycle Index"] = np.nan
    restart = df["Cycle Index"] >= 5
    t_restart = df.loc[restart, "Test Time (s)"].min()
    df.loc[restart, "Cycle Index"] -= 4
    df.loc[restart, "Test Time (s)"] -= t_restart
    path = tmp_path / "cell.csv"
    df.to_csv(path, index=False)
    s = load_series(path)
    tab = s.table
    assert s.kind == "cycling"
    assert tab[CYCLE].tolist() == [1, 2, 3, 4, 5, 6, 7, 8]
    np.testing.assert_allclose(tab[DISCHARGE_CAPACITY], 0.98 * caps, rtol=1e-9)
    np.testing.assert_allclose(tab[CHARGE_CAPACITY], caps, rtol=1e-9)
    np.testing.assert_allclose(tab["coulombic_efficiency_percent"], 98.0, rtol=1e-9)
    # time keeps increasing across the restart; end of cycle 1 = 1 h + 10 min + 1 h
    assert np.all(np.diff(tab[TIME_H]) > 0)
    assert tab[TIME_H].iloc[0] == pytest.approx(7800 / 3600)
    text = "\n".join(s.report)
    assert "15 rest-step rows" in text
    assert "1 rows with a missing or non-numeric cycle or time dropped" in text
    assert "cycle counter fell back" in text and "time fell back" in text
    assert s.columns_used["discharge_capacity"] == "Discharge Capacity (mAh)"
    np.testing.assert_allclose(tab[RETENTION].iloc[0], 100.0)


def test_single_capacity_column_split_by_current_sign(tmp_path) -> None:
    df, caps = point_level_frame(n_cycles=5)
    cap = np.where(df["Current (mA)"] < 0, df["Discharge Capacity (mAh)"],
                   df["Charge Capacity (mAh)"])
    cap = np.where(df["Step Type"] == "Rest", 0.0, cap)
    out = df[["Test Time (s)", "Cycle Index", "Current (mA)", "Voltage (V)"]].copy()
    out["Capacity (Ah)"] = cap / 1000.0
    path = tmp_path / "single.tsv"
    out.to_csv(path, sep="\t", index=False)
    tab = load_series(path).table
    # units: 1 Ah = 1000 mAh (definition)
    np.testing.assert_allclose(tab[CHARGE_CAPACITY], caps, rtol=1e-9)
    np.testing.assert_allclose(tab[DISCHARGE_CAPACITY], 0.98 * caps, rtol=1e-9)


def test_per_cycle_repeats_spike_and_missing(tmp_path) -> None:
    n = 30
    cyc = list(range(1, n + 1))
    q = 10.0 * np.exp(-0.01 * np.arange(1, n + 1))
    df = pd.DataFrame({"Cycle": cyc, "Time [h]": np.arange(1, n + 1) * 1.0,
                       "Discharge Capacity [C]": q * 3.6})
    df.loc[12, "Discharge Capacity [C]"] *= 0.7  # spike
    df.loc[20, "Discharge Capacity [C]"] = np.nan
    partial = df.iloc[[5]].assign(**{"Discharge Capacity [C]": 1.0})  # cycle 6 written twice
    df = pd.concat([df.iloc[:5], partial, df.iloc[5:]], ignore_index=True)
    path = tmp_path / "per_cycle.csv"
    df.to_csv(path, index=False)
    s = load_series(path)
    tab = s.table
    assert len(tab) == n
    # common practice, no source: 1 mAh = 3.6 C
    np.testing.assert_allclose(tab.loc[0, DISCHARGE_CAPACITY], q[0], rtol=1e-12)
    np.testing.assert_allclose(tab.loc[5, DISCHARGE_CAPACITY], q[5], rtol=1e-12)
    assert tab.loc[12, USED] == np.False_ and tab.loc[12, NOTE] == "spike"
    assert tab.loc[20, USED] == np.False_ and tab.loc[20, NOTE] == "no discharge capacity"
    assert int(tab[USED].sum()) == n - 2
    text = "\n".join(s.report)
    assert "1 repeated cycle rows: the last row of each cycle kept" in text
    assert "1 spike points" in text and ": 13" in text


def test_per_cycle_table_with_mean_voltage_is_not_point_level(tmp_path) -> None:
    path = tmp_path / "summary.csv"
    pd.DataFrame({"Cycle Number": [1, 2, 3, 4, 5, 6], "Time (min)": [60, 120, 180, 240, 300, 360],
                  "Mean Voltage (V)": 0.9, "Voltage (V)": 0.9,
                  "Discharge Capacity (mAh)": [10.0, 9.9, 9.8, 9.7, 9.6, 9.5]}).to_csv(path, index=False)
    s = load_series(path)
    np.testing.assert_allclose(s.table[SIGNAL], [10.0, 9.9, 9.8, 9.7, 9.6, 9.5])
    np.testing.assert_allclose(s.table[TIME_H], [1, 2, 3, 4, 5, 6])
    assert s.n_used == 6


def test_excel_input_second_sheet(tmp_path) -> None:
    df, caps = point_level_frame(n_cycles=6)
    path = tmp_path / "cell.xlsx"
    with pd.ExcelWriter(path, engine="openpyxl") as xw:
        pd.DataFrame({"Info": ["invented test data", "channel 3"]}).to_excel(xw, sheet_name="info", index=False)
        df.to_excel(xw, sheet_name="record", index=False)
    tab = load_series(path).table
    np.testing.assert_allclose(tab[DISCHARGE_CAPACITY], 0.98 * caps, rtol=1e-9)


def test_unknown_headers_error_names_file_headers_and_key(tmp_path) -> None:
    path = tmp_path / "odd.csv"
    pd.DataFrame({"Zeit (s)": [0, 1, 2], "Zyklus": [1, 2, 3], "Entladung": [1.0, 0.9, 0.8]}).to_csv(
        path, index=False)
    with pytest.raises(InputError) as exc:
        load_series(path)
    msg = str(exc.value)
    assert str(path) in msg
    assert "'Zeit (s)', 'Zyklus', 'Entladung'" in msg
    assert "column_map.discharge_capacity" in msg
    s = load_series(path, column_map={"time": "Zeit (s)", "cycle": "Zyklus",
                                      "discharge_capacity": "Entladung"})
    np.testing.assert_allclose(s.table[SIGNAL], [1.0, 0.9, 0.8])
    np.testing.assert_allclose(s.table[TIME_H], np.array([0, 1, 2]) / 3600.0)
    with pytest.raises(InputError, match=r"column_map.cycle = 'Cycle' is not a header"):
        load_series(path, column_map={"cycle": "Cycle"})


def test_time_without_unit_needs_time_unit(tmp_path) -> None:
    path = tmp_path / "decay.csv"
    pd.DataFrame({"time": [0, 1, 2, 3], "absorbance": [1.0, 0.9, 0.8, 0.7]}).to_csv(path, index=False)
    with pytest.raises(InputError, match=r"time_unit = 's', 'min', 'h' or 'd'"):
        load_series(path)
    s = load_series(path, time_unit="d")
    assert s.kind == "decay"
    # a day is 24 h (definition)
    np.testing.assert_allclose(s.table[TIME_H], [0.0, 24.0, 48.0, 72.0])


def test_decay_unsorted_semicolon_decimal_comma_and_concentration_units(tmp_path) -> None:
    path = tmp_path / "nmr.csv"
    path.write_text("t (h);c (mM)\n2,0;40,5\n0,0;50,0\n1,0;45,0\n", encoding="utf-8")
    s = load_series(path)
    np.testing.assert_allclose(s.table[TIME_H], [0.0, 1.0, 2.0])
    # 1 mM = 1e-3 mol/L (definition)
    np.testing.assert_allclose(s.table[SIGNAL], [0.050, 0.045, 0.0405])
    assert "rows sorted by time" in "\n".join(s.report)


def test_datetime_stamps_become_hours(tmp_path) -> None:
    path = tmp_path / "stamps.csv"
    pd.DataFrame({"Date Time": ["2025-01-01 00:00", "2025-01-01 06:00", "2025-01-02 00:00"],
                  "Integral": [1.0, 0.8, 0.5]}).to_csv(path, index=False)
    s = load_series(path)
    np.testing.assert_allclose(s.table[TIME_H], [0.0, 6.0, 24.0])


def test_old_excel_and_missing_file_errors(tmp_path) -> None:
    old = tmp_path / "old.xls"
    old.write_bytes(b"\xd0\xcf\x11\xe0")
    with pytest.raises(InputError, match=r"old.xls: old-style .xls files are not read"):
        load_series(old)
    with pytest.raises(InputError, match="file not found"):
        load_series(tmp_path / "none.csv")


def test_flag_spikes_hampel() -> None:
    y = np.linspace(10.0, 9.0, 21)
    y[10] = 7.0
    flags = flag_spikes(y, 6.0)
    assert flags.tolist() == [i == 10 for i in range(21)]


def test_header_unit_wins_and_contradicting_setting_is_an_error(tmp_path) -> None:
    """Issue 11: a file headed 'Test Time (s)' read with time_unit = 'h' was 3600x off."""
    df, _caps = point_level_frame(n_cycles=4)
    path = tmp_path / "cell.csv"
    df.to_csv(path, index=False)
    with pytest.raises(InputError) as err:
        load_series(path, time_unit="h")
    msg = str(err.value)
    assert "cell.csv" in msg and "'Test Time (s)'" in msg and "[fade] time_unit = 'h'" in msg
    with pytest.raises(InputError, match=r"\[fade\] capacity_unit = 'ah'"):
        load_series(path, capacity_unit="ah")
    # the same setting as the header is no contradiction; 3600 s = 1 h (definition)
    same = load_series(path, time_unit="s", capacity_unit="mah")
    assert same.table[TIME_H].iloc[0] == pytest.approx(7800 / 3600)
    # a header without a unit takes the setting
    path2 = tmp_path / "nounit.csv"
    pd.DataFrame({"cycle": [1, 2, 3], "time": [1.0, 2.0, 3.0], "discharge capacity": [5.0, 4.9, 4.8]}).to_csv(
        path2, index=False)
    s = load_series(path2, time_unit="h", capacity_unit="ah")
    np.testing.assert_allclose(s.table[TIME_H], [1.0, 2.0, 3.0])
    # 1 Ah = 1000 mAh (definition)
    np.testing.assert_allclose(s.table[DISCHARGE_CAPACITY], [5000.0, 4900.0, 4800.0])
    assert "([fade] time_unit setting)" in "\n".join(s.report)


def test_per_cycle_restart_of_cycle_and_time_keeps_one_cycle_duration(tmp_path) -> None:
    """Per-cycle rows hold the end time of each cycle: after a restart where both the counter
    and the time start again, cycle 6 ends one cycle (1.5 h) after cycle 5, not at the same time."""
    t = np.arange(1, 11) * 1.5
    cyc = np.arange(1, 11)
    t[5:] -= t[4]  # the restarted test: time counts again from 0 (1.5, 3.0, ...)
    cyc[5:] -= 5
    path = tmp_path / "per_cycle.tsv"
    lines = ["cycle\ttime/h\tQ discharge/mAh"]
    for i, (c, tt) in enumerate(zip(cyc, t)):
        lines.append(f"{c}\t{tt}\t{10 - 0.1 * i:.2f}")
        if i == 2:
            lines.append("")  # a blank line
            lines.append("\t\t")  # a row of empty cells
    lines.append("11\t16.5\tn/a")  # unparseable capacity
    path.write_text("\n".join(lines) + "\n")
    s = load_series(path)
    # common practice, no source: continuous time on the cycler's clock
    np.testing.assert_allclose(s.table[TIME_H].to_numpy()[:10], np.arange(1, 11) * 1.5)
    text = "\n".join(s.report)
    assert "2 blank rows skipped" in text
    assert "1 values of 'Q discharge/mAh' are not numbers (e.g. 'n/a')" in text
    assert s.table[USED].sum() == 10


def _per_cycle(n: int = 30, k: float = 0.01, q0: float = 10.0) -> pd.DataFrame:
    cyc = np.arange(1, n + 1)
    return pd.DataFrame({"Cycle": cyc, "Time [h]": cyc * 1.0, "Discharge Capacity [mAh]": q0 * np.exp(-k * cyc)})


def test_rows_out_of_order_are_sorted_with_a_note_not_read_as_restarts(tmp_path) -> None:
    df = _per_cycle()
    shuffled = df.iloc[np.random.default_rng(1).permutation(len(df))]
    path = tmp_path / "shuffled.csv"
    shuffled.to_csv(path, index=False)
    s = load_series(path)
    np.testing.assert_allclose(s.table[TIME_H], df["Time [h]"])  # the original order back
    np.testing.assert_allclose(s.table[SIGNAL], df["Discharge Capacity [mAh]"], rtol=1e-12)
    text = "\n".join(s.report)
    assert "rows out of order" in text and "sorted by cycle" in text
    assert "fell back" not in text  # not read as counter resets


def test_degenerate_datasets_and_every_sheet_of_a_workbook(tmp_path) -> None:
    from redoxfront.fade.step import fit_fade_folder

    data = tmp_path / "cycling"
    data.mkdir()
    const = _per_cycle()
    const["Time [h]"] = 5.0
    const.to_csv(data / "one_time.csv", index=False)
    zeros = _per_cycle()
    zeros["Discharge Capacity [mAh]"] = 0.0
    zeros.to_csv(data / "zeros.csv", index=False)
    with pd.ExcelWriter(data / "two_cells.xlsx", engine="openpyxl") as xw:
        _per_cycle(k=0.01).to_excel(xw, sheet_name="cell A", index=False)
        _per_cycle(k=0.03, q0=20.0).to_excel(xw, sheet_name="cell B", index=False)
        pd.DataFrame({"Info": ["invented test data"]}).to_excel(xw, sheet_name="notes", index=False)
    rates = fit_fade_folder(data, None, tmp_path / "out", progress=False).set_index("id")
    assert rates.loc["one_time", "status"].startswith("error: ") and "all 30 usable points are at one time" \
        in rates.loc["one_time", "status"]
    assert "the signal is zero (or missing) at all 30 points" in rates.loc["zeros", "status"]
    # first-order fade q = q0 exp(-k t): k_fade equals the invented k (common practice, no source)
    assert rates.loc["two_cells:cell A", "status"] == "ok" and rates.loc["two_cells:cell B", "status"] == "ok"
    assert rates.loc["two_cells:cell A", "k_fade_per_h"] == pytest.approx(0.01, rel=1e-6)
    assert rates.loc["two_cells:cell B", "k_fade_per_h"] == pytest.approx(0.03, rel=1e-6)
    report = (tmp_path / "out" / "fade_report.md").read_text()
    assert "sheet(s) 'notes' hold no capacity or decay column and were not fitted" in report


def test_ids_in_a_cycling_file_stay_text(tmp_path) -> None:
    df = _per_cycle()
    df.insert(0, "Sample ID", "007")
    path = tmp_path / "cell.csv"
    df.to_csv(path, index=False)
    assert load_series(path).dataset_id == "007"
