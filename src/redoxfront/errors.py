"""One exception family for everything a user can get wrong.

The CLI turns any :class:`RedoxfrontError` into a one-line message and a non-zero
exit code; messages name the input (file, row id, field) and say how to fix it.
"""

from __future__ import annotations


class RedoxfrontError(Exception):
    """Base class of every error redoxfront raises on purpose."""


class SettingsError(RedoxfrontError):
    """A campaign setting is unknown, missing or has a bad value."""


class InputError(RedoxfrontError):
    """A row or field of a user file cannot be used.

    Parameters
    ----------
    reason
        What is wrong and how to fix it.
    row
        The row id (candidate id, or 1-based line number) if known.
    field
        The column or field name if known.
    source
        The file the row came from, if known.
    """

    def __init__(
        self,
        reason: str,
        *,
        row: str | int | None = None,
        field: str | None = None,
        source: str | None = None,
    ) -> None:
        self.reason = reason
        self.row = row
        self.field = field
        self.source = source
        where = []
        if source is not None:
            where.append(str(source))
        if row is not None:
            where.append(f"row {row}")
        if field is not None:
            where.append(f"field '{field}'")
        prefix = ", ".join(where)
        super().__init__(f"{prefix}: {reason}" if prefix else reason)


class EngineError(RedoxfrontError):
    """The semiempirical engine failed (SCC not converged, bad geometry, ...)."""


class DataError(RedoxfrontError):
    """Data are too few or degenerate for the requested fit or statistic."""
