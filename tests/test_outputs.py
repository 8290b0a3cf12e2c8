"""Result files are written whole or not at all (redoxfront.outputs)."""

from __future__ import annotations

import os
import stat
from pathlib import Path

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
