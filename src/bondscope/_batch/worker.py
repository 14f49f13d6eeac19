"""The work of one checkpoint, run in a worker process (or a Dask task)."""

import os
import signal
import threading
import time
import warnings
from contextlib import contextmanager
from datetime import datetime, timezone

from .._errors import one_line
from .records import RECORD_VERSION, fingerprint, measures

__all__ = ["profile_one", "warm", "failure", "DIED", "hard_limit", "overran"]


class _TimeLimit(BaseException):
    """Raised in a worker at its checkpoint's time limit (a BaseException, so that no
    ``except Exception`` on the way turns it into another error)."""


def profile_one(task):
    """Profile one checkpoint and write its result; return its summary fields."""
    from .._document import Profile
    from .._files import write_document
    from .._pipeline import profile

    start = time.perf_counter()
    attrs, notes = {}, []
    try:
        with _alarm(task.get("time_limit")):
            stamp, attrs = fingerprint(task["path"], task["group_attr"], task["rename"], notes)
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                prof = profile(task["path"], task["options"])
        doc = prof.to_dict()
        doc["batch"] = {
            "version": RECORD_VERSION, "checkpoint": task["path"],
            "fingerprint": stamp, "options": task["recorded"], "attrs": attrs,
            "wall_seconds": round(time.perf_counter() - start, 6),
            "warnings": list(dict.fromkeys([*notes, *(one_line(w.message) for w in caught)])),
            "written": datetime.now(timezone.utc).isoformat(timespec="seconds")}
        Profile(doc)  # validated; the batch cleaned stale temporary files once, at start
        write_document(doc, task["target"], clean=False)
    except _TimeLimit:
        return failure(task, overran(task["time_limit"]), attrs, time.perf_counter() - start)
    except Exception as exc:
        return failure(task, f"{type(exc).__name__}: {one_line(exc)}", attrs,
                       time.perf_counter() - start)
    return {"key": task["key"], "status": "done", "attrs": attrs, **measures(doc)}


@contextmanager
def _alarm(seconds):
    """Raise _TimeLimit in this (main) thread after ``seconds``; elsewhere, or without a
    limit, do nothing (the pool's hard limit still applies)."""
    if seconds is None or threading.current_thread() is not threading.main_thread():
        yield
        return

    def stop(signum, frame):
        raise _TimeLimit

    previous = signal.signal(signal.SIGALRM, stop)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def hard_limit(seconds):
    """When the pool kills a worker whose checkpoint overran ``seconds`` (time to start
    the worker, and for it to stop the checkpoint itself, included)."""
    return seconds + max(5.0, 0.25 * seconds)


def overran(seconds):
    return (f"TimeLimit: still running after the time limit of {seconds:g} s (time_limit, "
            "--time-limit); stopped")


def warm(parent):
    """Worker start-up: import what profiling needs, so task times exclude it, and
    exit when the batch process ``parent`` is gone (killed), not linger as an orphan."""
    import h5py  # noqa: F401
    import scipy.linalg  # noqa: F401

    from .. import _pipeline  # noqa: F401
    from .._kernels import chain  # noqa: F401

    threading.Thread(target=_watch, args=(parent,), daemon=True).start()


def _watch(parent):
    while os.getppid() == parent:
        time.sleep(0.5)
    os._exit(1)


def failure(task, error, attrs=None, seconds=None):
    return {"key": task["key"], "status": "failed", "attrs": attrs or {}, "error": error,
            "wall_seconds": None if seconds is None else round(seconds, 6)}


DIED = ("WorkerDied: the worker process profiling it died (killed by a signal, e.g. for "
         "exceeding its memory)")
