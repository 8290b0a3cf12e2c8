"""One compute run per campaign at a time: an advisory lock on a file in the campaign folder.

A second ``compute`` (or ``run``) on a campaign that another process is computing stops at
once with a message naming the process holding it, instead of doing the same engine work
a second time. The lock is an ``flock`` on ``.compute.lock``: the kernel releases it when
the holder ends in any way (kill -9 included), so a crash never leaves a stale lock.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import os
from pathlib import Path
from typing import Iterator

from redoxfront.errors import RedoxfrontError

LOCK_NAME = ".compute.lock"


class CampaignBusyError(RedoxfrontError):
    """Another process is computing this campaign."""


@contextlib.contextmanager
def campaign_lock(folder: str | Path) -> Iterator[None]:
    """Hold the campaign's compute lock for the ``with`` block, or raise CampaignBusyError."""
    try:
        import fcntl
    except ImportError:  # no flock on this platform: no lock (one run at a time is then up to the user)
        yield
        return
    path = Path(folder) / LOCK_NAME
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o666)
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            # the holder writes its pid just after taking the lock: it may not be there yet
            holder = os.pread(fd, 200, 0).decode("utf-8", "replace").strip() or "just starting"
            raise CampaignBusyError(
                f"another compute run ({holder}) holds the campaign {folder}; wait for it to finish "
                f"(`redoxfront status {folder}` shows its progress) or stop that process, then run again"
            ) from None
        started = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
        os.ftruncate(fd, 0)
        os.pwrite(fd, f"pid {os.getpid()}, started {started}".encode(), 0)
        yield
    finally:
        os.close(fd)  # closing the descriptor releases the lock
