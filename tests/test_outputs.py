"""Result files are written whole or not at all (redoxfront.outputs)."""

from __future__ import annotations

import os
import stat
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from redoxfront.outputs import write_csv, write_text


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
