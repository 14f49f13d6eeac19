"""The work of one checkpoint, run in a worker process (or a Dask task)."""

import os
import time
import warnings
from datetime import datetime, timezone

from .._errors import one_line
from .records import RECORD_VERSION, fingerprint, measures

__all__ = ["profile_one", "warm", "failure", "DIED"]


def profile_one(task):
    """Profile one checkpoint and write its result; return its summary fields."""
    from .._document import Profile
    from .._files import write_document
    from .._pipeline import profile

    start = time.perf_counter()
    attrs = {}
    try:
        stamp, attrs = fingerprint(task["path"], task["group_attr"])
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            prof = profile(task["path"], task["options"])
        doc = prof.to_dict()
        doc["batch"] = {
            "version": RECORD_VERSION, "checkpoint": task["path"],
            "fingerprint": stamp, "options": task["recorded"], "attrs": attrs,
            "wall_seconds": round(time.perf_counter() - start, 6),
            "warnings": list(dict.fromkeys(one_line(w.message) for w in caught)),
            "written": datetime.now(timezone.utc).isoformat(timespec="seconds")}
        Profile(doc)  # validated; the batch cleaned stale temporary files once, at start
        write_document(doc, task["target"], clean=False)
    except Exception as exc:
        return failure(task, f"{type(exc).__name__}: {one_line(exc)}", attrs,
                       time.perf_counter() - start)
    return {"key": task["key"], "status": "done", "attrs": attrs, **measures(doc)}


def warm(parent):
    """Worker start-up: import what profiling needs, so task times exclude it, and
    exit when the batch process ``parent`` is gone (killed), not linger as an orphan."""
    import threading

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
