"""One Dask client for the analyses that fan out (``planner risk``, ``planner compare``).

A scheduler address is connected to; without one a local cluster of single-threaded
worker processes is started (one per core, or ``workers``) and closed afterwards.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from planner.errors import EXIT_BAD_INPUT, PlannerError


class ClusterError(PlannerError):
    """The Dask scheduler could not be reached (bad input: the address; exit 2)."""

    exit_code = EXIT_BAD_INPUT


@contextmanager
def dask_client(scheduler: str | None, workers: int | None, client: Any, timeout: str,
                most: int | None = None) -> Iterator[tuple[Any, int, str]]:
    """(client, number of workers, where it runs) for the block; what it opened is closed after.

    ``client``: one the caller already has (used as it is); ``scheduler``: an address to connect to
    within ``timeout`` (a Dask duration such as "10s"); else a local cluster of ``workers`` processes
    (default one per core, at most ``most``).
    """
    from distributed import Client, LocalCluster

    own_cluster = own_client = None
    try:
        if client is None:
            if scheduler:
                try:
                    client = own_client = Client(scheduler, timeout=timeout)
                except Exception as e:  # unreachable, refused or malformed: the address is at fault
                    raise ClusterError(f"cannot reach the Dask scheduler at {scheduler}: {e} "
                                       "(check the address, or leave --scheduler out for a local cluster)") from None
            else:
                n = workers or min(os.cpu_count() or 1, most or os.cpu_count() or 1)
                own_cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                           dashboard_address=None, silence_logs=logging.ERROR)
                client = own_client = Client(own_cluster)
        n_workers = len(client.scheduler_info().get("workers", {})) or 1
        where = scheduler or ("local cluster" if own_cluster else str(getattr(client, "scheduler", "client")))
        yield client, n_workers, where
    finally:
        if own_client is not None:
            own_client.close()
        if own_cluster is not None:
            own_cluster.close()
