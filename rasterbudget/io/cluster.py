"""Running on dask.distributed: an existing scheduler, or a local cluster of worker processes.

Inputs are read by the workers themselves (each block task opens its input windows by path) and
outputs written there too (``outputs.AtomicRaster`` puts one writer actor per file on a worker),
so only small results (histograms, tile statistics) travel back to the client.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator

from ..errors import RasterBudgetError
from .grid import GDAL_OPTIONS


def distributed_client():
    """The dask.distributed client that dask computations go to, or None (threaded runs)."""
    try:
        from distributed import default_client
    except ImportError:
        return None
    try:
        return default_client()
    except ValueError:
        return None


def _bound_gdal_cache(cache_bytes: int) -> None:
    """Bound this process's GDAL block cache (run on each worker) [bytes]."""
    from rasterio.env import set_gdal_config

    set_gdal_config("GDAL_CACHEMAX", cache_bytes)


def close_worker_read_handles(client) -> None:
    """Close the input datasets the workers' threads kept open (after a computation)."""
    from .grid import close_read_handles

    client.run(close_read_handles)


@contextlib.contextmanager
def dask_cluster(address: str | None = None, workers: int | None = None) -> Iterator[object]:
    """Connect to the scheduler at ``address``, or start ``workers`` local worker processes.

    The client becomes dask's default scheduler inside the ``with`` block; a local cluster is
    closed on exit. Each local worker gets an equal share of the cores as threads.
    """
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise RasterBudgetError(
            "--scheduler and --workers need dask.distributed: pip install 'rasterbudget[cluster]'."
        ) from None
    cluster = None
    try:
        if address is not None:
            try:
                # waits up to dask's distributed.comm.timeouts.connect (30 s by default)
                client = Client(address)
            except (OSError, TimeoutError) as err:
                raise RasterBudgetError(
                    f"cannot reach the dask scheduler at {address} ({err}); check the address "
                    "(e.g. tcp://10.0.0.5:8786) and that the scheduler is running."
                ) from None
        else:
            import dask

            threads = max(1, (os.cpu_count() or 1) // max(1, workers or 1))
            # dask's nanny starts workers with MALLOC_TRIM_THRESHOLD_=65536, which also turns off
            # glibc's adaptive mmap threshold: every large numpy temporary is then mmapped and
            # zero-filled afresh, and the per-pixel physics ran 3.4x slower in the workers
            # (2048 x 2048 bench scene). Local workers start without it.
            environ = {
                k: v
                for k, v in dask.config.get("distributed.nanny.pre-spawn-environ", {}).items()
                if k != "MALLOC_TRIM_THRESHOLD_"
            }
            # the run's bounded GDAL block cache in the workers too (GDAL's default is 5 % of
            # the memory: with the input datasets kept open per thread it grew each worker by
            # 240 MB at 4096 x 4096)
            environ["GDAL_CACHEMAX"] = str(GDAL_OPTIONS["GDAL_CACHEMAX"])  # bytes (> 100000)
            with dask.config.set({"distributed.nanny.pre-spawn-environ": environ}):
                cluster = LocalCluster(
                    n_workers=workers,
                    threads_per_worker=threads,
                    processes=True,
                    dashboard_address=None,
                )
            client = Client(cluster)
        with client:
            # a scheduler's workers started elsewhere: their GDAL cache bounded before any read
            client.run(_bound_gdal_cache, GDAL_OPTIONS["GDAL_CACHEMAX"])
            yield client
    finally:
        if cluster is not None:
            cluster.close()
