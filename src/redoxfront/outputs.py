"""Result files are written whole or not at all.

Every file the tool writes goes to a temporary file in the same folder, is flushed to
disk and then renamed over the target (``os.replace``, atomic on POSIX within one file
system): a crash leaves either the old file or the new one, never a truncated one. The
rename replaces a symlink at the target instead of writing through it, so a link planted
in ``results/`` cannot redirect a write. New files get the user's normal permissions
(0666 minus the umask), not the 0600 of a private temporary file.
"""

from __future__ import annotations

import contextlib
import json
import os
import tempfile
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator

if TYPE_CHECKING:  # pandas is imported by the callers that hand us a table
    import pandas as pd


def _default_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


@contextlib.contextmanager
def replacing(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success rename it over ``path``.

    On an exception the temporary file is removed and ``path`` is left as it was.
    The temporary name keeps the target's suffix so writers that choose a format
    from the suffix (matplotlib, RDKit) still do.
    """
    target = Path(path)
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
    """Write a table as CSV (no index unless asked) atomically to ``path``."""
    to_csv.setdefault("index", False)
    with replacing(path) as tmp:
        table.to_csv(tmp, **to_csv)
    return Path(path)
