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
"""

from __future__ import annotations

import contextlib
import csv
import functools
import json
import os
import shutil
import tempfile
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Iterable, Iterator, Sequence

from redoxfront import columns
from redoxfront.errors import DataError

if TYPE_CHECKING:  # pandas is imported by the callers that hand us a table
    import numpy as np
    import pandas as pd
    import pyarrow as pa


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


def write_csv(table: "pd.DataFrame", path: str | Path, **to_csv: Any) -> Path:
    """Write a table as CSV (no index unless asked) atomically to ``path``.

    With no other options the text is that of ``DataFrame.to_csv(index=False)`` (same
    quoting, floats written by ``repr``: the shortest text that reads back to the same
    float, so every value round-trips exactly; missing values as empty fields), made
    column by column in row blocks by ``pyarrow.compute`` (about ten times faster than pandas
    for wide float tables) and with bounded memory. Options, or a column type it does not know,
    go through ``DataFrame.to_csv``. One difference from pandas on purpose: a text field with a
    lone carriage return is quoted (pandas leaves it bare, and the row then splits on reading).
    """
    to_csv.setdefault("index", False)
    with replacing(path) as tmp:
        if to_csv == {"index": False} and _plain_columns(table):
            _write_plain_csv(table, tmp)
        else:
            table.to_csv(tmp, **to_csv)
    return Path(path)


CSV_BLOCK_ROWS = 10_000
"""Rows formatted at once by :func:`write_csv` (bounds the memory of the text being built)."""


def _plain_columns(table: "pd.DataFrame") -> bool:
    """True when every column is float, integer, boolean, nullable integer/boolean, or text
    (object or string dtype), the column names are unique text and there are two or more
    columns (a one-column CSV needs pandas' quoting of empty fields)."""
    import pandas as pd

    if table.shape[1] < 2 or not table.columns.is_unique:
        return False
    if not all(isinstance(c, str) for c in table.columns):
        return False
    for dtype in table.dtypes:
        kind = getattr(dtype, "kind", "O")
        if isinstance(dtype, pd.CategoricalDtype) or kind not in "fiubO":
            if not (isinstance(dtype, pd.StringDtype) or pd.api.types.is_string_dtype(dtype)):
                return False
    return True


def _quoted(text: str) -> str:
    """One CSV field, quoted as ``csv.QUOTE_MINIMAL`` does (delimiter, quote or line break inside)."""
    if "," in text or '"' in text or "\n" in text or "\r" in text:
        return '"' + text.replace('"', '""') + '"'
    return text


def _column_texts(series: "pd.Series") -> list[str]:
    """The CSV fields of one column, as ``DataFrame.to_csv`` writes them (Python's formatting:
    the route of the column types :func:`_arrow_fields` leaves to it)."""
    import numpy as np

    dtype = series.dtype
    kind = getattr(dtype, "kind", "O")
    if isinstance(dtype, np.dtype) and kind == "f":
        values = series.to_numpy()
        # float64: Python's repr (shortest round-trip text); narrower floats: numpy's own
        # shortest text of that width, as pandas writes them
        texts = list(map(repr, values.tolist())) if values.dtype == np.float64 else values.astype(str).tolist()
        for i in np.flatnonzero(np.isnan(values)).tolist():
            texts[i] = ""
        return texts
    if isinstance(dtype, np.dtype) and kind in "iub":
        return list(map(str, series.to_numpy().tolist()))
    missing = series.isna().to_numpy()
    values = series.to_numpy(dtype=object).tolist()
    if kind == "f":  # a nullable float column: repr as for numpy floats
        return ["" if gap else repr(float(v)) for v, gap in zip(values, missing.tolist())]
    if not missing.any():
        return [_quoted(v if isinstance(v, str) else str(v)) for v in values]
    return ["" if gap else _quoted(v if isinstance(v, str) else str(v)) for v, gap in zip(values, missing.tolist())]


def _float_fields(values: "np.ndarray") -> "pa.Array":
    """``repr`` of each float64 (NaN as a null: an empty field), made by Arrow's cast to text.

    Arrow writes the same shortest round-trip digits as ``repr`` but its own notation:
    positional for 1e-6 <= |x| < 1e10 without the ".0" of integral values ("1", "-0"),
    scientific elsewhere with an unpadded exponent ("1e-7", "1.5e+10"); ``repr`` is positional
    for 1e-4 <= |x| < 1e16 and pads exponents to two digits. The bands that differ are
    rewritten here, those between 1e10 and 1e16 (rare in result tables) by ``repr`` itself;
    :func:`_arrow_floats_match_repr` checks the whole rule on the installed pyarrow.
    """
    import numpy as np
    import pyarrow as pa
    import pyarrow.compute as pc

    nan = np.isnan(values)
    texts = pc.cast(pa.array(values, mask=nan if nan.any() else None), pa.string())
    with np.errstate(invalid="ignore"):
        size = np.abs(values)
        integral = values == np.trunc(values)
        bands = (((size < 1e10) & integral & ((size >= 1e-4) | (size == 0)), "dot"),
                 ((size < 1e-6) & (size > 0), "exponent"), ((size < 1e-4) & (size >= 1e-6), "small"),
                 ((size >= 1e10) & (size < 1e16), "repr"))
    for mask, fix in bands:
        if not mask.any():
            continue
        part = texts.filter(pa.array(mask))
        if fix == "dot":  # "12" -> "12.0", "-0" -> "-0.0"
            part = pc.binary_join_element_wise(part, ".0", "")
        elif fix == "exponent":  # "1.5e-7" -> "1.5e-07"
            part = pc.replace_substring_regex(part, r"e-(\d)$", r"e-0\1")
        elif fix == "small":  # "0.000015" -> "1.5e-05", "0.000001" -> "1e-06"
            for zeros, exponent in (("0000", "05"), ("00000", "06")):
                part = pc.replace_substring_regex(part, rf"^(-?)0\.{zeros}([1-9])$", rf"\1\2e-{exponent}")
                part = pc.replace_substring_regex(part, rf"^(-?)0\.{zeros}([1-9])(\d+)$", rf"\1\2.\3e-{exponent}")
        else:
            part = pa.array(list(map(repr, values[mask].tolist())), pa.string())
        texts = pc.replace_with_mask(texts, pa.array(mask), part)
    return texts


@functools.lru_cache(maxsize=1)
def _arrow_floats_match_repr() -> bool:
    """True when :func:`_float_fields` gives ``repr``'s text on this pyarrow for values on both
    sides of every notation edge (checked once per process; otherwise floats go through ``repr``)."""
    import numpy as np

    edges = 10.0 ** np.arange(-324, 309)
    probe = np.concatenate([edges, np.nextafter(edges, 0), np.nextafter(edges, np.inf), edges * 1.5,
                            [0.0, -0.0, np.inf, -np.inf, np.nan, 5e-324, 1.7976931348623157e308, 0.1,
                             1 / 3, 2.0 ** 53, 9007199254740993.0, 123456789012.5, 1.2345e-5, 7e-6]])
    probe = np.concatenate([probe, -probe])
    try:
        got = _float_fields(probe).fill_null("").to_pylist()
    except Exception:  # noqa: BLE001 - an older pyarrow without a kernel: the Python route
        return False
    return got == ["" if np.isnan(v) else repr(v) for v in probe.tolist()]


def _arrow_fields(series: "pd.Series") -> "Callable[[int, int], pa.Array]":
    """A function giving the CSV fields of rows ``[start, stop)`` of one column as an Arrow string
    array (nulls for empty fields), with the text of :func:`_column_texts`: float64 by
    :func:`_float_fields`, integers by Arrow's cast, booleans as True/False, text columns quoted
    as :func:`_quoted` does; object, narrow and nullable float columns through :func:`_column_texts`."""
    import numpy as np
    import pandas as pd
    import pyarrow as pa
    import pyarrow.compute as pc

    dtype = series.dtype
    kind = getattr(dtype, "kind", "O")
    if isinstance(dtype, np.dtype) and dtype == np.float64 and _arrow_floats_match_repr():
        values = series.to_numpy()
        return lambda start, stop: _float_fields(values[start:stop])
    if (isinstance(dtype, np.dtype) and kind in "iub") or isinstance(series.array, (pd.arrays.IntegerArray,
                                                                                     pd.arrays.BooleanArray)):
        data = pa.array(series.to_numpy() if isinstance(dtype, np.dtype) else series.array)  # NA -> null
        if kind == "b":
            return lambda start, stop: pc.if_else(data.slice(start, stop - start), "True", "False")
        return lambda start, stop: pc.cast(data.slice(start, stop - start), pa.string())
    if isinstance(dtype, pd.StringDtype):
        data = pa.array(series.array)
        if isinstance(data, pa.ChunkedArray):
            data = data.combine_chunks()

        def text(start: int, stop: int) -> pa.Array:
            part = data.slice(start, stop - start).cast(pa.string())
            special = pc.match_substring_regex(part, '[,"\r\n]')
            if not pc.any(special).as_py():
                return part
            quoted = pc.binary_join_element_wise("", pc.replace_substring(part, '"', '""'), "", '"')
            return pc.if_else(special, quoted, part)
        return text
    return lambda start, stop: pa.array(_column_texts(series.iloc[start:stop]), pa.string())


def _write_plain_csv(table: "pd.DataFrame", path: Path, header: bool = True) -> None:
    """Write ``table`` without index to ``path`` as :func:`write_csv` describes: each block of
    rows is formatted column by column into Arrow string arrays, joined into lines by Arrow and
    written from the joined array's data buffer (no Python work per row or per value)."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.compute as pc

    newline = os.linesep
    fields = [_arrow_fields(table[c]) for c in table.columns]
    with open(path, "wb") as fh:
        if header:
            fh.write((",".join(_quoted(c) for c in table.columns) + newline).encode("utf-8"))
        for start in range(0, len(table), CSV_BLOCK_ROWS):
            stop = min(start + CSV_BLOCK_ROWS, len(table))
            texts = [field(start, stop) for field in fields]
            lines = pc.binary_join_element_wise(*texts, ",", null_handling="replace", null_replacement="")
            lines = pc.binary_join_element_wise(lines, "", newline)
            _, offsets, data = lines.buffers()
            width = np.int64 if pa.types.is_large_string(lines.type) else np.int32
            bounds = np.frombuffer(offsets, dtype=width)[[lines.offset, lines.offset + len(lines)]]
            fh.write(memoryview(data)[int(bounds[0]):int(bounds[1])])


BACKGROUND_ROWS = 20_000
"""Tables of at least this many rows in all are written by :func:`start_csv_writes` in
forked processes beside the caller's further work (the drawing of figures)."""
WRITERS = 2
"""Forked processes that write the row halves of a large table at once (2 cores)."""


def start_csv_writes(items: "Sequence[tuple[pd.DataFrame, str | Path]]") -> Callable[[], None]:
    """Start writing each ``(table, path)`` as :func:`write_csv` does; return ``wait``, which
    returns once every file is in place and raises :class:`DataError` if a write failed.

    Large tables (:data:`BACKGROUND_ROWS` rows in all) are written by :data:`WRITERS` child
    processes forked from this one, each formatting a share of the rows into a part file
    beside the target, while this process goes on (the children see the tables as they are
    at the fork; nothing is pickled); ``wait`` joins the parts into a temporary file and
    renames it over the target, so each file is still written whole or not at all, with the
    bytes of :func:`write_csv`. Where fork is not available, inside a daemonic worker, or for
    small tables, the writes happen here and ``wait`` has nothing to do.
    """
    import multiprocessing

    items = [(table, Path(path)) for table, path in items]
    for _, path in items:
        _refuse_linked_folder(path)
    total = sum(len(table) for table, _ in items)
    if (total < BACKGROUND_ROWS or "fork" not in multiprocessing.get_all_start_methods()
            or multiprocessing.current_process().daemon):
        for table, path in items:
            write_csv(table, path)
        return lambda: None
    jobs: list[list[tuple[pd.DataFrame, Path, bool]]] = [[] for _ in range(WRITERS)]
    parts: dict[Path, list[Path]] = {}
    for table, path in items:
        path.parent.mkdir(parents=True, exist_ok=True)
        shares = WRITERS if len(table) >= BACKGROUND_ROWS // 2 else 1
        cuts = [len(table) * k // shares for k in range(shares + 1)]
        parts[path] = []
        for k in range(shares):
            part = path.parent / f".{path.name}.part{k}.tmp"
            parts[path].append(part)
            jobs[k].append((table.iloc[cuts[k]:cuts[k + 1]], part, k == 0))
    ctx = multiprocessing.get_context("fork")
    children = []
    for k in range(WRITERS):
        if jobs[k]:
            receive, send = ctx.Pipe(duplex=False)
            child = ctx.Process(target=_write_in_child, args=(jobs[k], send), name=f"redoxfront-csv-writer-{k}")
            child.start()
            send.close()
            children.append((child, receive))
    names = ", ".join(path.name for _, path in items)

    def wait() -> None:
        problems = []
        for child, receive in children:
            try:
                problems.append(receive.recv())
            except EOFError:
                problems.append("the writing process ended without a word")
            finally:
                receive.close()
                child.join()
            if child.exitcode != 0 and not problems[-1]:
                problems[-1] = f"exit code {child.exitcode}"
        try:
            problem = next((p for p in problems if p), "")
            if problem:
                raise DataError(f"writing {names} failed: {problem}")
            for path, pieces in parts.items():
                with replacing(path) as tmp, open(tmp, "wb") as out:
                    for piece in pieces:
                        with open(piece, "rb") as src:
                            shutil.copyfileobj(src, out, 1 << 22)
        finally:
            for pieces in parts.values():
                for piece in pieces:
                    piece.unlink(missing_ok=True)

    return wait


def _write_in_child(jobs: "list[tuple[pd.DataFrame, Path, bool]]", send: Any) -> None:
    """Body of a writing process: write its parts, then report '' or the one-line reason."""
    try:
        for table, part, header in jobs:
            if _plain_columns(table):
                _write_plain_csv(table, part, header=header)
            else:
                table.to_csv(part, index=False, header=header)
        send.send("")
    except BaseException as exc:  # noqa: BLE001 - the parent turns it into one DataError line
        send.send(f"{type(exc).__name__}: {exc}".splitlines()[0])
    finally:
        send.close()


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
