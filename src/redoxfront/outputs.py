"""Result files are written whole or not at all, and read back with ids as text.

Every file the tool writes goes to a temporary file in the same folder, is flushed to
disk and then renamed over the target (``os.replace``, atomic on POSIX within one file
system): a crash leaves either the old file or the new one, never a truncated one. The
rename replaces a symlink at the target instead of writing through it, so a link planted
in ``results/`` cannot redirect a write, and a folder that is a link (``results/figures``
pointing elsewhere) is refused. New files get the user's normal permissions
(0666 minus the umask), not the 0600 of a private temporary file.

Reading: :func:`read_table` is the one way a CSV table (a result file or a user's input
table) is read. Ids and other text columns stay the strings the user wrote (``001`` stays
``001``; ``NA`` and ``null`` are ids, not missing values), and an empty or damaged file gives
one line naming the file and the command that writes it again, never a traceback.

CSV tables are written by :mod:`redoxfront.csv_tables` (through :func:`replacing`).
"""

from __future__ import annotations

import contextlib
import csv
import json
import os
import tempfile
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Iterator

from redoxfront import columns
from redoxfront.errors import DataError

if TYPE_CHECKING:  # pandas is imported by the callers that hand us a table
    import pandas as pd


def _default_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _refuse_linked_folder(target: Path) -> None:
    """A result file goes only into a real folder: results/figures -> /elsewhere would carry the write out."""
    if target.parent.is_symlink():
        raise DataError(f"{target.parent} is a link to {target.parent.resolve()}; result files are "
                        "written only into real folders of the campaign: remove the link")


@contextlib.contextmanager
def replacing(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success rename it over ``path``.

    On an exception the temporary file is removed and ``path`` is left as it was.
    The temporary name keeps the target's suffix so writers that choose a format
    from the suffix (matplotlib, RDKit) still do.
    """
    target = Path(path)
    _refuse_linked_folder(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.", suffix=f".tmp{target.suffix}")
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        os.chmod(tmp, _default_mode())
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    finally:
        if tmp.exists():
            tmp.unlink()


def write_text(path: str | Path, text: str) -> Path:
    """Write ``text`` (UTF-8) atomically to ``path``."""
    with replacing(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(path)


def write_bytes(path: str | Path, data: bytes) -> Path:
    """Write ``data`` atomically to ``path``."""
    with replacing(path) as tmp:
        tmp.write_bytes(data)
    return Path(path)


def write_json(path: str | Path, obj: Any, *, allow_nan: bool = True) -> Path:
    """Write ``obj`` as indented JSON atomically to ``path``."""
    return write_text(path, json.dumps(obj, indent=2, allow_nan=allow_nan) + "\n")


TEXT_COLUMNS: frozenset[str] = frozenset({
    columns.ID, columns.SMILES, columns.CANONICAL_SMILES, columns.PARTNER_ID, columns.STATUS,
    columns.ROLE, columns.CALIBRATION_GROUP, columns.CALIBRATION_STATUS, columns.MODEL_SET,
    columns.DOMAIN, columns.POTENTIAL_BASIS, columns.DESCRIPTOR_NOTES, columns.RANKING_NOTE,
    columns.NOTE, "counterions", "class", "label", "site", "reference", "file", "row", "field",
    "reason", "dataset", "sheet",
})
"""Columns read as text, never as numbers or missing values (ids, SMILES, labels, notes)."""

MISSING_MARKERS: tuple[str, ...] = ("", "nan", "NaN", "NA", "N/A", "n/a", "null", "NULL", "None", "-nan")
"""What counts as a missing value in a numeric column (the text columns have none)."""


WRITTEN_BY: dict[str, str] = {
    "descriptors.csv": "compute", "input_problems.csv": "compute", "geometries.sdf": "compute",
    "calibration.json": "calibrate", "rates.csv": "fade", "fade_models.csv": "fade",
    "fade_cycles.csv": "fade", "fade_report.md": "fade", "model.json": "fit", "predictions.csv": "fit",
    "ranking.csv": "rank", "picks.csv": "rank", "ranking_summary.json": "rank",
    "training_picks.csv": "choose-training", "report.html": "report",
    "fast_tier.csv": "compute --funnel", "fast_tier_summary.json": "compute --funnel",
}
"""Which command writes each result file (the remedy named when one is damaged)."""


def regenerate_hint(path: str | Path, campaign_folder: str | Path | None = None) -> str:
    """'regenerate it with `redoxfront <command> <campaign>`' for a result file."""
    p = Path(path)
    folder = campaign_folder if campaign_folder is not None else (
        p.parent.parent if p.parent.name == "results" else "CAMPAIGN")
    command = WRITTEN_BY.get(p.name)
    if command is None:
        return "regenerate it with the step that writes it (see docs/guarantees.md)"
    return f"regenerate it with `redoxfront {command} {folder}`"


def _is_text(name: str, extra: Iterable[str]) -> bool:
    key = name.strip().lower()
    return key in TEXT_COLUMNS or name in set(extra) or key.startswith(columns.SUBSTITUENT_PREFIX)


def read_header(path: str | Path, *, remedy: str) -> list[str]:
    """The column names of a CSV table (its first line), without reading the rest; a missing,
    empty or undecodable file raises the one-line DataError of :func:`read_table`."""
    p = Path(path)
    if not p.is_file():
        raise DataError(f"{p}: no such file; {remedy}")
    try:
        with p.open(newline="", encoding="utf-8-sig") as fh:
            return next(csv.reader(fh), [])
    except (csv.Error, UnicodeDecodeError, OSError) as exc:
        raise DataError(f"{p}: damaged or not a CSV table ({type(exc).__name__}); {remedy}") from exc


def read_table(path: str | Path, *, remedy: str, text_columns: Iterable[str] = (),
               required: Iterable[str] = (), columns: Iterable[str] | None = None) -> "pd.DataFrame":
    """Read a CSV table with ids and other text columns as the strings written.

    ``remedy``: how the file is made again (``"run `redoxfront compute CAMPAIGN`"``) or fixed;
    it ends the one-line :class:`~redoxfront.errors.DataError` raised when the file is missing,
    empty, not UTF-8 text, not a table or lacks a ``required`` column. Text columns
    (:data:`TEXT_COLUMNS`, ``substituent_*`` and ``text_columns``) keep every value as
    written, an empty cell as ``""``; numeric columns read the usual missing markers as NaN.
    ``columns``: read only these (in the file's order), for a wide table of which a step needs a few.
    """
    import pandas as pd

    p = Path(path)
    extra = tuple(text_columns)
    if not p.is_file():
        raise DataError(f"{p}: no such file; {remedy}")
    if p.stat().st_size == 0:
        raise DataError(f"{p}: the file is empty (an interrupted write?); {remedy}")
    try:
        with p.open(newline="", encoding="utf-8-sig") as fh:
            names = next(csv.reader(fh), [])
        dup = sorted({c for c in names if names.count(c) > 1 and c})
        if dup:
            raise DataError(f"{p}: column '{dup[0]}' appears twice in the header; {remedy}")
        text = [c for c in names if _is_text(c, extra)]
        na = {c: list(MISSING_MARKERS) for c in names if c not in text}
        wanted = None if columns is None else [c for c in names if c in set(columns)]
        table = pd.read_csv(p, dtype={c: str for c in text}, keep_default_na=False, na_values=na,
                            encoding="utf-8-sig", usecols=wanted)
    except DataError:
        raise
    except pd.errors.EmptyDataError as exc:
        raise DataError(f"{p}: the file holds no table (empty or blank); {remedy}") from exc
    except (pd.errors.ParserError, csv.Error, ValueError, UnicodeDecodeError, OSError) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise DataError(f"{p}: damaged or not a CSV table ({first}); {remedy}") from exc
    missing = [c for c in required if c not in table.columns]
    if missing:
        raise DataError(f"{p}: column '{missing[0]}' is missing (found: {', '.join(names[:12])}); {remedy}")
    return table


def read_json_file(path: str | Path, *, remedy: str) -> Any:
    """Read a JSON result file; a missing, empty or damaged file raises a one-line DataError."""
    p = Path(path)
    if not p.is_file():
        raise DataError(f"{p}: no such file; {remedy}")
    try:
        return json.loads(p.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        what = "the file is empty (an interrupted write?)" if p.stat().st_size == 0 else f"damaged JSON ({exc})"
        raise DataError(f"{p}: {what}; {remedy}") from exc
