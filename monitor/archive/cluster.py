"""Running the per-shot summary on a Dask distributed cluster (an address, or "local" for a LocalCluster), rows streamed back as they finish."""

from __future__ import annotations

import os
import warnings
from typing import TYPE_CHECKING, Iterator

from monitor.archive.summary import Row, summarise
from monitor.errors import UsageError

if TYPE_CHECKING:
    from distributed import LocalCluster

__all__ = ["dask_rows", "local_cluster"]


def _import_distributed() -> None:
    try:
        import distributed  # noqa: F401
    except ImportError:
        raise UsageError("--scheduler needs the `distributed` package: pip install 'regime[cluster]'") from None


def local_cluster(workers: int) -> "LocalCluster":
    """A LocalCluster of ``workers`` single-threaded worker processes on the loopback interface, no dashboard.

    Two of the nanny's defaults are undone: it exports MALLOC_TRIM_THRESHOLD_=65536 to the workers, which
    makes glibc hand every freed array back to the kernel and fault it in again (measured: 22,000 minor
    page faults and about 80 % more CPU per 30,000-row shot than without), and it sets that and its other
    pre-spawn variables in the environment of this process too; ours is restored afterwards."""
    _import_distributed()
    import dask
    from distributed import LocalCluster

    saved = dict(os.environ)
    try:
        with warnings.catch_warnings(), dask.config.set(
                {"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None}):
            # without a dashboard the scheduler still serves health checks over HTTP on 127.0.0.1, at 8787
            # or, when that port is taken (another cluster), a free one: that move is not worth a warning
            warnings.filterwarnings("ignore", message="Port .* is already in use", category=UserWarning)
            return LocalCluster(n_workers=max(1, workers), threads_per_worker=1, processes=True,
                                host="127.0.0.1", dashboard_address=None, silence_logs=40)
    finally:
        os.environ.clear()
        os.environ.update(saved)


def dask_rows(paths: list[str], config_path: str | None, scheduler: str, workers: int) -> Iterator[Row]:
    """``summarise(path, config_path)`` for each path on the cluster at ``scheduler`` ("local": a new
    LocalCluster of ``workers`` processes, closed at the end). Paths (and the config file) must be
    readable at the same path on every worker: the archive lives on a shared file system."""
    _import_distributed()
    from distributed import Client, as_completed

    if not paths:
        return
    cluster = local_cluster(workers) if scheduler == "local" else None
    try:
        try:
            client = Client(cluster if cluster is not None else scheduler, timeout="10s")
        except (OSError, TimeoutError) as exc:
            raise UsageError(f"--scheduler {scheduler}: cannot reach the Dask scheduler: {exc}") from None
        with client:
            config = os.path.abspath(config_path) if config_path is not None else None
            futures = client.map(summarise, paths, config_path=config, pure=False)
            for fut in as_completed(futures):
                yield fut.result()
                fut.release()
    finally:
        if cluster is not None:
            cluster.close()
