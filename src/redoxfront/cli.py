"""Command-line interface: a thin click layer, one library call per command.

Every :class:`~redoxfront.errors.RedoxfrontError` becomes a one-line message on
stderr and exit code 2; no tracebacks for user mistakes.
"""

from __future__ import annotations

import functools
import sys
from pathlib import Path
from typing import Any, Callable

import click

from redoxfront import __version__
from redoxfront.errors import RedoxfrontError


def friendly_errors(func: Callable[..., Any]) -> Callable[..., Any]:
    """Turn RedoxfrontError into a one-line message and exit code 2."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return func(*args, **kwargs)
        except RedoxfrontError as exc:
            click.echo(f"error: {exc}", err=True)
            sys.exit(2)

    return wrapper


@click.group()
@click.version_option(__version__, prog_name="redoxfront")
def main() -> None:
    """Rank candidate redox-flow battery charge carriers before synthesis."""


CAMPAIGN_ARG = click.argument(
    "campaign", type=click.Path(exists=True, path_type=Path), metavar="CAMPAIGN"
)


# ---- commands are added below, one per library function ----------------------
