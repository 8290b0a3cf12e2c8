"""What a Dask worker of a local cluster runs at start (imported only where Dask is used).

:class:`ExitWithParent` makes each worker process of a ``--cluster local`` run end when the
process that started the cluster dies, even by kill -9, as the local pool's workers do
(:func:`redoxfront.compute.executors.exit_with_parent`). A remote cluster's workers are the
user's and are left alone.
"""

from __future__ import annotations

import os
from typing import Any

from distributed import WorkerPlugin

from redoxfront.compute.executors import exit_with_parent


class ExitWithParent(WorkerPlugin):
    """Worker plugin: end the worker when ``parent_pid`` (the cluster's process) is gone."""

    name = "redoxfront-exit-with-parent"

    def __init__(self, parent_pid: int) -> None:
        self.parent_pid = parent_pid

    def setup(self, worker: Any) -> None:
        # a local cluster's worker is a child of the cluster's process (its nanny runs there);
        # the kernel's parent-death signal is left out: it would follow the thread that started
        # the worker (the cluster's event loop), not the process
        if os.getppid() == self.parent_pid:
            exit_with_parent(self.parent_pid, kernel_signal=False)


__all__ = ["ExitWithParent"]
