"""Candidate files as a hostile reader sees them: text or not, table or not, row by row.

A candidates file (CSV/TSV or SDF) comes from many hands. What cannot be a candidates file at
all (a device or folder, a spreadsheet, binary data, text that is not UTF-8, an empty SDF, a
header without ``id`` and ``smiles`` or with a column twice) stops with one
:class:`~redoxfront.errors.InputError` naming the file and the fix. What is wrong with one row
(more fields than the header, a field over the CSV size limit, an unreadable SDF record) is that
row's rejection; the other rows go on. Every value stays the text the user wrote.
"""

from __future__ import annotations

import csv
from pathlib import Path
from typing import Any, Iterator

from rdkit import Chem

from redoxfront.errors import InputError

SPREADSHEET_SUFFIXES = (".xlsx", ".xlsm", ".xls", ".ods", ".numbers")
SDF_SUFFIXES = (".sdf", ".sd", ".mol")
ZIP_MAGIC = b"PK\x03\x04"
"""Start of a zip container: .xlsx, .ods and friends whatever their file name says."""

Row = tuple[int, "dict[str, Any] | InputError"]
"""(line or record number, the row's fields by column name, or the row's rejection)."""


def _check_file(path: Path) -> None:
    if not path.exists():
        raise InputError("file not found", source=str(path))
    if not path.is_file():
        raise InputError("not a regular file (a folder, device or other special file); give a CSV or "
                         "SDF file of candidates", source=str(path))
    if path.suffix.lower() in SPREADSHEET_SUFFIXES:
        raise InputError("a spreadsheet is not read as candidates; save the sheet as CSV (UTF-8) with "
                         "columns id and smiles", source=str(path))


def read_text(path: Path) -> str:
    """The file as UTF-8 text, or one InputError saying why it is not a text table."""
    _check_file(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror or exc}); check the path and its permissions",
                         source=str(path)) from exc
    if data.startswith(ZIP_MAGIC):
        raise InputError("a zip container (a spreadsheet such as .xlsx?), not a CSV text file; save the "
                         "sheet as CSV (UTF-8)", source=str(path))
    if b"\x00" in data:
        line = data[: data.index(b"\x00")].count(b"\n") + 1
        raise InputError(f"binary data (a NUL byte on line {line}), not a CSV text file; give a CSV "
                         "(UTF-8) or SDF file", source=str(path))
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise InputError(f"not UTF-8 text (byte 0x{data[exc.start]:02x} on line {line}, perhaps Latin-1 "
                         "or Windows-1252); save the file as UTF-8 (a spreadsheet's 'CSV UTF-8')",
                         source=str(path)) from exc


def csv_rows(path: Path, known: tuple[str, ...]) -> Iterator[Row]:
    """Rows of a CSV/TSV candidates file (delimiter sniffed among , ; tab), keyed by column.

    Column names in ``known`` are matched without case or surrounding spaces; other
    columns keep their name. Blank lines are skipped; numbers are physical line numbers.
    """
    text = read_text(path)
    try:
        dialect: Any = csv.Sniffer().sniff(text[:4096], delimiters=",;\t") if text.strip() else csv.excel
    except csv.Error:  # one column, or nothing the sniffer recognises: plain commas
        dialect = csv.excel
    reader = csv.reader(text.splitlines(keepends=True), dialect=dialect)
    try:
        header = next(reader, [])
    except csv.Error as exc:
        raise InputError(f"the header cannot be read ({exc})", source=str(path)) from exc
    names = [(h.strip().lower() if h.strip().lower() in known else h) for h in header]
    if not {"id", "smiles"} <= set(names):
        found = ", ".join(header) or "no header"
        found = found if len(found) <= 80 else found[:77] + "..."
        raise InputError(f"needs columns 'id' and 'smiles'; found: {found}", source=str(path))
    twice = sorted({n for n in names if names.count(n) > 1 and n})
    if twice:
        raise InputError(f"column '{twice[0]}' appears more than once in the header; keep one "
                         "(which one is meant cannot be guessed)", source=str(path))
    rows = iter(reader)
    while True:
        try:
            fields = next(rows)
        except StopIteration:
            return
        except csv.Error as exc:  # e.g. a field over the csv module's size limit
            yield reader.line_num, InputError(f"unreadable row ({exc})", row=reader.line_num, source=path.name)
            continue
        if not fields:
            continue
        if len(fields) > len(names):
            yield reader.line_num, InputError(
                f"{len(fields)} fields, but the header has {len(names)}; quote a field that holds the "
                f"delimiter '{dialect.delimiter}' or remove the extra one", row=reader.line_num, source=path.name)
            continue
        yield reader.line_num, dict(zip(names, fields + [""] * (len(names) - len(fields))))


def sdf_rows(path: Path) -> Iterator[Row]:
    """Records of an SDF file: id from an ``id`` property or the title line, properties as text."""
    _check_file(path)
    if path.stat().st_size == 0:
        raise InputError("an empty SDF file (no molecules)", source=str(path))
    try:
        supplier = Chem.SDMolSupplier(str(path), removeHs=False, sanitize=True)
    except OSError as exc:
        raise InputError(f"not a readable SDF file ({exc})", source=str(path)) from exc
    n = 0
    for i, mol in enumerate(supplier, start=1):
        n += 1
        if mol is None:
            yield i, InputError("unreadable SDF record (bad atom or bond block, or valence)", row=f"record {i}",
                                source=path.name)
            continue
        props = {k: mol.GetProp(k) for k in mol.GetPropNames()}  # as text: '001' stays '001'
        cid = props.pop("id", "").strip() or (mol.GetProp("_Name").strip() if mol.HasProp("_Name") else "")
        row: dict[str, Any] = {"id": cid or f"record{i}", "smiles": Chem.MolToSmiles(Chem.RemoveHs(mol))}
        row.update({k: v for k, v in props.items() if k != "smiles"})
        yield i, row
    if n == 0:
        raise InputError("no molecules in the SDF file", source=str(path))


SDF_TERMINATOR = b"\n$$$$"
"""A record of an SDF file ends with a line that starts with ``$$$$`` (CTfile formats, BIOVIA)."""


def _scan_sdf(text: bytes, count: int, pending: bool) -> tuple[int, bool]:
    """Terminator lines in ``text`` (whole lines, led by a newline) and whether anything but
    white space follows the last one (a final record without its terminator)."""
    k = text.count(SDF_TERMINATOR)
    if k:
        rest = text[text.rfind(SDF_TERMINATOR) + 1:].partition(b"\n")[2]
        return count + k, bool(rest.strip())
    return count, pending or bool(text.strip())


def count_rows(path: str | Path, *, chunk_bytes: int = 1 << 22) -> int:
    """Candidate rows of a file without parsing a molecule: the records of an SDF file
    (terminator lines ``$$$$``, plus a last record that lacks one, as RDKit reads them), the
    lines after the header of a CSV/TSV file. Read in chunks (bounded memory); 0 for a file
    that does not exist."""
    path = Path(path)
    if not path.is_file():
        return 0
    if path.suffix.lower() not in SDF_SUFFIXES:
        with open(path, "rb") as fh:
            return max(0, sum(1 for _ in fh) - 1)
    count, pending, carry = 0, False, b""
    with open(path, "rb") as fh:
        while chunk := fh.read(chunk_bytes):
            buf = carry + chunk
            cut = buf.rfind(b"\n") + 1  # whole lines now, the rest with the next chunk
            carry = buf[cut:]
            count, pending = _scan_sdf(b"\n" + buf[:cut], count, pending)
    if carry:
        count, pending = _scan_sdf(b"\n" + carry + b"\n", count, pending)
    return count + int(pending)

