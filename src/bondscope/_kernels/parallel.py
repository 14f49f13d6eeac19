"""Where kernel work runs: BLAS thread lanes, and an active Dask client's workers."""

import os
import sys
import threading
from contextlib import contextmanager

__all__ = ["blas_threads", "lanes", "dask_client", "gathered", "locked"]


def blas_threads():
    """Threads the loaded BLAS may use right now (threadpoolctl), else the core count."""
    from threadpoolctl import threadpool_info

    counts = [lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"]
    return max(counts) if counts else (os.cpu_count() or 1)


@contextmanager
def lanes():
    """Yield how many lanes run at once (1 or 2); with 2, each gets half the BLAS threads."""
    total = blas_threads()
    if total < 2:
        yield 1
        return
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=total // 2, user_api="blas"):
        yield 2


def dask_client():
    """The active dask.distributed client of this process, or None.

    Only a client the caller already made counts (dask is never imported here),
    and not inside a Dask worker, whose task is already one unit of parallel work.
    """
    if "distributed" not in sys.modules:
        return None
    from distributed import get_client, get_worker

    try:
        get_worker()
        return None
    except ValueError:
        pass
    try:
        return get_client()
    except ValueError:
        return None


def gathered(raw):
    """Values, waiting for any that are Dask futures."""
    return [v.result() if hasattr(v, "result") else v for v in raw]


def locked(tick):
    """``tick`` callable from several threads (None stays a no-op)."""
    if tick is None:
        return lambda: None
    lock = threading.Lock()

    def call():
        with lock:
            tick()
    return call
