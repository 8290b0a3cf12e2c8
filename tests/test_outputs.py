"""Result files are written whole or not at all (redoxfront.outputs)."""

from __future__ import annotations

import os
import stat
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from redoxfront.csv_tables import write_csv
from redoxfront.outputs import write_text


def test_failed_write_leaves_the_old_file_and_no_temporary(tmp_path: Path) -> None:
    target = tmp_path / "ranking.csv"
    write_text(target, "id\nA\n")

    class Broken(pd.DataFrame):
        def to_csv(self, *args, **kwargs):  # a writer that dies half-way
            Path(args[0]).write_text("id\n")
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        write_csv(Broken({"id": ["B"]}), target)
    assert target.read_text() == "id\nA\n"
    assert [p.name for p in tmp_path.iterdir()] == ["ranking.csv"]


def test_new_files_get_the_users_normal_permissions(tmp_path: Path) -> None:
    old = os.umask(0o022)
    try:
        path = write_csv(pd.DataFrame({"id": ["A"]}), tmp_path / "descriptors.csv")
    finally:
        os.umask(old)
    # common practice, no source: umask 022 gives rw-r--r-- to new files
    assert stat.S_IMODE(path.stat().st_mode) == 0o644


def test_a_symlink_at_the_target_is_replaced_not_followed(tmp_path: Path) -> None:
    outside = tmp_path / "outside.txt"
    outside.write_text("precious")
    results = tmp_path / "results"
    results.mkdir()
    (results / "report.html").symlink_to(outside)
    write_text(results / "report.html", "<html></html>")
    assert outside.read_text() == "precious"
    assert not (results / "report.html").is_symlink()
    assert (results / "report.html").read_text() == "<html></html>"


def _calibration_campaign(tmp_path: Path, ids: list[str]) -> Path:
    """An invented descriptor table and measured potentials under the given ids."""
    (tmp_path / "results").mkdir()
    (tmp_path / "inputs").mkdir()
    raw = [0.20, 0.35, 0.50, 0.65, 0.80, 0.95][: len(ids)]
    col = "potential_uncalibrated_v_vs_fc"
    lines = ["id,status," + col] + [f"{i},ok,{x}" for i, x in zip(ids, raw)]
    (tmp_path / "results" / "descriptors.csv").write_text("\n".join(lines) + "\n")
    meas = ["id,potential_v,reference,solvent"] + [f"{i},{0.1 + x:.3f},Fc+/Fc,MeCN" for i, x in zip(ids, raw)]
    (tmp_path / "inputs" / "measured.csv").write_text("\n".join(meas) + "\n")
    (tmp_path / "campaign.toml").write_text('[inputs]\nmeasured_potentials = "inputs/measured.csv"\n'
                                            "[calibration]\nper_class = false\n"
                                            '[ranking]\nobjectives = ["cell_voltage", "molar_mass"]\n')
    return tmp_path


def test_ids_stay_the_strings_written_through_calibration(tmp_path: Path) -> None:
    from redoxfront.campaign import load_campaign
    from redoxfront.statistics.calibration import calibrate_campaign

    ids = ["001", "1", "NA", "null", "1e3", "TRUE"]
    folder = _calibration_campaign(tmp_path, ids)
    out = calibrate_campaign(load_campaign(folder))
    # common practice, no source: an id is a label; '001' and '1' are two molecules
    assert list(out["id"]) == ids
    measured = out.set_index("id")["potential_measured_v_vs_fc"]
    assert measured["001"] == pytest.approx(0.30) and measured["1"] == pytest.approx(0.45)
    assert measured["NA"] == pytest.approx(0.60) and measured["null"] == pytest.approx(0.75)
    written = (folder / "results" / "descriptors.csv").read_text().splitlines()
    assert [line.split(",")[0] for line in written[1:]] == ids  # and written back as text


def test_read_table_keeps_id_text_and_reads_numbers(tmp_path: Path) -> None:
    from redoxfront.outputs import read_table

    p = tmp_path / "t.csv"
    p.write_text("id,partner_id,energy_density_wh_per_l\n001,NA,12.5\nnull,002,NA\n")
    t = read_table(p, remedy="x")
    assert list(t["id"]) == ["001", "null"] and list(t["partner_id"]) == ["NA", "002"]
    assert t["energy_density_wh_per_l"].iloc[0] == 12.5 and np.isnan(t["energy_density_wh_per_l"].iloc[1])


@pytest.mark.parametrize("damage", ["empty", "binary", "header_twice"])
def test_a_damaged_result_file_gives_one_line_naming_file_and_command(tmp_path: Path, damage: str) -> None:
    from click.testing import CliRunner

    from redoxfront.cli import main

    folder = _calibration_campaign(tmp_path, ["a", "b", "c"])
    desc = folder / "results" / "descriptors.csv"
    if damage == "empty":  # what a kill at the first write used to leave
        desc.write_bytes(b"")
    elif damage == "binary":
        desc.write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00\xff\xfe")
    else:
        desc.write_text("id,status,id\na,ok,b\n")
    for command in ("calibrate", "rank", "fit"):
        r = CliRunner().invoke(main, [command, str(folder)])
        assert r.exit_code == 2, (command, r.output)
        lines = r.output.strip().splitlines()
        assert len(lines) == 1 and "Traceback" not in r.output, r.output
        assert str(desc) in lines[0] and f"redoxfront compute {folder}" in lines[0], lines[0]


def test_a_damaged_model_file_names_the_fit_command(tmp_path: Path) -> None:
    from redoxfront.errors import DataError
    from redoxfront.statistics.regression import load_model

    (tmp_path / "results").mkdir()
    model = tmp_path / "results" / "model.json"
    model.write_text('{"terms": ["a"')
    with pytest.raises(DataError, match=r"model\.json: damaged JSON .*redoxfront fit"):
        load_model(model)


def _mixed_table(n: int = 3000) -> pd.DataFrame:
    """Every column type a result table holds, with the awkward values: NaN, infinities, -0.0,
    1e16 and 1e-5 (where repr switches to exponents), ids that look like numbers or missing values,
    text with commas, quotes and line breaks."""
    rng = np.random.default_rng(11)
    x = rng.normal(size=n) * 10.0 ** rng.integers(-12, 24, n)
    x[::7] = np.nan
    x[:8] = [np.inf, -np.inf, 0.0, -0.0, 1e16, 1e-5, 9.999999999999999e15, 0.1]
    ids = ["001", "1", "NA", "null", "1e3", "TRUE", "", " 7 "] + [f"inv-{i:05d}" for i in range(8, n)]
    return pd.DataFrame({
        "id": pd.array(ids, dtype="string"), "potential_v": x, "narrow": rng.normal(size=n).astype(np.float32),
        "rank": rng.integers(-5, 5, n), "knee": rng.random(n) < 0.5,
        "pick_order": pd.array([1, None] * (n // 2), dtype="Int64"),
        "note": ["a, b" if i % 3 == 0 else ('say "x"' if i % 3 == 1 else "two\nlines") for i in range(n)],
        "mixed": [None if i % 4 == 0 else ("NA" if i % 4 == 1 else 1.5) for i in range(n)],
        "flag": pd.array([True, None] * (n // 2), dtype="boolean"),
        "share": pd.array([0.1, None] * (n // 2), dtype="Float64"),
    })


def test_write_csv_writes_what_pandas_writes(tmp_path: Path) -> None:
    t = _mixed_table()
    ours = write_csv(t, tmp_path / "ours.csv").read_bytes()
    t.to_csv(tmp_path / "pandas.csv", index=False)
    # pandas (PyPI reference library) as the cross-check: the fast writer changes no byte
    assert ours == (tmp_path / "pandas.csv").read_bytes()
    assert len(ours.splitlines()) > len(t)  # the line breaks inside quoted notes are there


def test_write_csv_floats_and_ids_round_trip_exactly(tmp_path: Path) -> None:
    import csv

    from redoxfront.outputs import read_table

    t = _mixed_table()
    path = write_csv(t, tmp_path / "ranking.csv")
    with path.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    x = t["potential_v"].to_numpy()
    back = np.array([float(r["potential_v"]) if r["potential_v"] else np.nan for r in rows])
    # common practice, no source: repr of a float is the shortest text that reads back to the same
    # double (Python float repr, correctly rounded strtod), so equality is bit for bit, -0.0 included
    assert np.array_equal(back, x, equal_nan=True)
    assert np.array_equal(np.signbit(back), np.signbit(x))
    narrow = np.array([float(r["narrow"]) for r in rows], dtype=np.float32)
    assert np.array_equal(narrow, t["narrow"].to_numpy())
    table = read_table(path, remedy="x")
    assert list(table["id"]) == list(t["id"])  # '001', 'NA', 'TRUE' and '' stay the strings written
    assert list(table["note"]) == list(t["note"])
    assert table["rank"].tolist() == t["rank"].tolist() and table["knee"].tolist() == t["knee"].tolist()


def test_write_csv_of_many_rows_is_written_in_blocks_and_whole(tmp_path: Path) -> None:
    from redoxfront import csv_tables

    n = csv_tables.CSV_BLOCK_ROWS * 2 + 17
    t = pd.DataFrame({"id": [f"c{i}" for i in range(n)], "v": np.arange(n) / 3.0})
    lines = write_csv(t, tmp_path / "big.csv").read_text().splitlines()
    assert len(lines) == n + 1 and lines[0] == "id,v"
    assert lines[-1] == f"c{n - 1},{(n - 1) / 3.0!r}"  # the last block's last row, not cut


def test_tables_written_by_a_second_process_are_whole_and_failures_are_one_line(tmp_path: Path, monkeypatch) -> None:
    from redoxfront import csv_tables
    from redoxfront.errors import DataError

    monkeypatch.setattr(csv_tables, "BACKGROUND_ROWS", 1)  # the forked writer even for a small table
    t = _mixed_table(200)
    wait = csv_tables.start_csv_writes([(t, tmp_path / "ranking.csv"), (t.head(5), tmp_path / "picks.csv")])
    wait()
    t.to_csv(tmp_path / "pandas.csv", index=False)
    # pandas as the cross-check again: the child process wrote the same bytes
    assert (tmp_path / "ranking.csv").read_bytes() == (tmp_path / "pandas.csv").read_bytes()
    assert len((tmp_path / "picks.csv").read_text().splitlines()) >= 6
    assert not [p.name for p in tmp_path.iterdir() if p.name.startswith(".")]  # no temporary left
    (tmp_path / "real").mkdir()
    (tmp_path / "linked").symlink_to(tmp_path / "real")
    with pytest.raises(DataError, match=r"is a link to"):  # refused before any process writes a part
        csv_tables.start_csv_writes([(t, tmp_path / "linked" / "ranking.csv")])
    assert not list((tmp_path / "real").iterdir())

    class Unprintable:
        def __str__(self) -> str:
            raise ValueError("no text for this value")

    bad = t.assign(note=[Unprintable() if i == 150 else "ok" for i in range(len(t))])
    (tmp_path / "ranking.csv").write_text("id\nold\n")
    wait = csv_tables.start_csv_writes([(bad, tmp_path / "ranking.csv")])
    with pytest.raises(DataError, match=r"writing ranking.csv failed: ValueError: no text for this value"):
        wait()
    assert (tmp_path / "ranking.csv").read_text() == "id\nold\n"  # the old file stays whole
    assert not [p.name for p in tmp_path.iterdir() if p.name.startswith(".")]  # no part left


def test_write_csv_columns_of_few_values_write_what_pandas_writes(tmp_path: Path) -> None:
    n = 5000  # settings repeated on every row, with gaps: the path that formats each value once
    t = pd.DataFrame({"id": [f"c{i}" for i in range(n)],
                      "concentration_mol_per_l": np.where(np.arange(n) % 9 == 0, np.nan, 0.5),
                      "capacity_ah_per_l": np.tile([13.40, 26.80, 0.0, 1e-7], n // 4)})
    ours = write_csv(t, tmp_path / "ours.csv").read_bytes()
    t.to_csv(tmp_path / "pandas.csv", index=False)
    assert ours == (tmp_path / "pandas.csv").read_bytes()  # pandas (PyPI reference) as the cross-check
    zeros = pd.DataFrame({"id": [f"c{i}" for i in range(n)], "v": np.tile([0.0, -0.0], n // 2)})
    assert write_csv(zeros, tmp_path / "z.csv").read_text().splitlines()[1:3] == ["c0,0.0", "c1,-0.0"]


def _float_edges() -> np.ndarray:
    """Doubles over every decade (subnormals to the largest), both sides of each power of ten (where
    repr and Arrow switch notation: 1e-4, 1e-5, 1e-6, 1e-7, 1e10, 1e16, 1e21), integral values,
    17-significant-digit values, -0.0, infinities and NaN, with both signs."""
    rng = np.random.default_rng(5)
    powers = 10.0 ** np.arange(-323, 309)
    with np.errstate(over="ignore"):
        x = np.concatenate([
            powers, np.nextafter(powers, 0), np.nextafter(powers, np.inf), powers * 1.2345678901234567,
            rng.uniform(1, 10, len(powers)) * powers,
            np.round(rng.uniform(0, 1, 200) * 10.0 ** rng.integers(0, 17, 200)),  # integral values
            [0.0, -0.0, np.inf, -np.inf, np.nan, 5e-324, 2.2250738585072014e-308, 1.7976931348623157e308,
             1e-4, 1e-5, 1e-7, 9.999999999999999e-5, 1e16, 9.999999999999998e15, 1e21, 2.0 ** 53,
             0.1, 0.30000000000000004, 1 / 3, 12345678901.234568, 1.5e-05, 7e-06]])
    signs = np.where(rng.random(len(x)) < 0.5, -1.0, 1.0)
    return np.concatenate([x, -x, x * signs])


def test_write_csv_floats_of_every_magnitude_write_what_pandas_writes_and_read_back(tmp_path: Path) -> None:
    import csv

    from redoxfront import csv_tables

    x = _float_edges()
    n = len(x)
    text = [None if i % 11 == 0 else ["inv-1", 'say "x"', "a, b", "two\nlines", "", "1e3", "plain"][i % 7]
            for i in range(n)]
    t = pd.DataFrame({
        "value": x, "id": pd.array(text, dtype="str"), "note": pd.array(text, dtype="string"),
        "count": np.arange(n, dtype=np.int64) - n // 2, "flag": np.arange(n) % 3 == 0,
        "pick_order": pd.array([i if i % 5 else None for i in range(n)], dtype="Int64"),
        "knee": pd.array([None if i % 4 == 0 else bool(i % 2) for i in range(n)], dtype="boolean"),
    })
    assert csv_tables._arrow_floats_match_repr()  # the Arrow route is the one under test, not the repr fallback
    ours = write_csv(t, tmp_path / "ours.csv").read_bytes()
    t.to_csv(tmp_path / "pandas.csv", index=False)
    # pandas (PyPI reference library) DataFrame.to_csv(index=False) as the external reference: same bytes
    assert ours == (tmp_path / "pandas.csv").read_bytes()
    with (tmp_path / "ours.csv").open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    back = np.array([float(r["value"]) if r["value"] else np.nan for r in rows])
    # common practice, no source: the shortest round-trip text reads back to the same double, bit for bit
    assert np.array_equal(back.view(np.uint64)[~np.isnan(x)], x.view(np.uint64)[~np.isnan(x)])
    assert np.array_equal(np.isnan(back), np.isnan(x)) and len(rows) == n
    assert [r["note"] for r in rows] == [v if v is not None else "" for v in text]


def test_write_csv_quotes_a_lone_carriage_return_so_the_row_reads_back(tmp_path: Path) -> None:
    import csv

    t = pd.DataFrame({"id": pd.array(["cr\rhere", "x"], dtype="str"), "note": ["a\rb", None], "n": [1, 2]})
    data = write_csv(t, tmp_path / "t.csv").read_bytes()
    # here the writer keeps its own rule rather than pandas' (whose csv module on Python 3.11 quotes
    # only the line terminator's characters, so a lone CR splits the row on reading)
    assert data == b'id,note,n' + os.linesep.encode() + b'"cr\rhere","a\rb",1' + os.linesep.encode() + b"x,,2" + os.linesep.encode()
    with (tmp_path / "t.csv").open(newline="", encoding="utf-8") as fh:
        # Python's csv module (standard library) as the reader: two rows of three fields
        assert list(csv.reader(fh)) == [["id", "note", "n"], ["cr\rhere", "a\rb", "1"], ["x", "", "2"]]
