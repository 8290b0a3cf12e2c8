"""CSV result tables: the text of ``DataFrame.to_csv(index=False)``, made by pyarrow.compute,
written atomically through :func:`redoxfront.outputs.replacing`; large tables by forked
processes while the caller goes on (:func:`start_csv_writes`).

Reading tables back is :func:`redoxfront.outputs.read_table`.
"""

from __future__ import annotations

import functools
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Sequence

from redoxfront.outputs import _refuse_linked_folder, replacing

if TYPE_CHECKING:  # pandas is imported by the callers that hand us a table
    import numpy as np
    import pandas as pd
    import pyarrow as pa


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
"""Tables of at least this many rows in all are written by :func:`start_csv_writes` in a
forked process beside the caller's further work (the drawing of figures); the ranking step
draws its second figure in a forked process above the same size."""


def start_csv_writes(items: "Sequence[tuple[pd.DataFrame, str | Path]]") -> Callable[[], None]:
    """Start writing each ``(table, path)`` with :func:`write_csv`; return ``wait``, which
    returns once every file is in place and raises :class:`~redoxfront.errors.DataError` if a
    write failed.

    Large tables (:data:`BACKGROUND_ROWS` rows in all) are written one after the other by one
    child process forked from this one (:mod:`redoxfront.processes`) while this process goes
    on; each file is still written whole or not at all, with the same bytes. (Two children
    writing halves that this process then joined took about 0.8 s longer for the 100,000-row
    ranking on 2 cores: the join copies the file once more.) Where fork is not available,
    inside a daemonic worker, or for small tables, the writes happen here and ``wait`` has
    nothing to do.
    """
    from redoxfront.processes import can_fork, start_forked

    items = [(table, Path(path)) for table, path in items]
    for _, path in items:
        _refuse_linked_folder(path)
    if sum(len(table) for table, _ in items) < BACKGROUND_ROWS or not can_fork():
        for table, path in items:
            write_csv(table, path)
        return lambda: None
    return start_forked([[functools.partial(write_csv, table, path) for table, path in items]],
                        "writing " + ", ".join(path.name for _, path in items))
