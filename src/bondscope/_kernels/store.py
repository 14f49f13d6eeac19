"""Bond matrices held in memory up to a budget, then spilled to a scratch directory."""

import os
import shutil
import tempfile
import threading

import numpy as np

__all__ = ["BondStore", "STORE_BYTES", "resident_bytes"]

# In-memory budget for bond matrices before they spill to the scratch directory.
STORE_BYTES = 32 * 2**20


def resident_bytes(matrix_bytes, budget=STORE_BYTES):
    """Bytes a store holds in memory when ``matrix_bytes`` (an iterable) wait in it at once."""
    return min(sum(matrix_bytes), budget)


class BondStore:
    """Bond matrices keyed by name, held in memory up to a budget, then spilled to disk.

    Parameters
    ----------
    scratch : str or None
        Directory for spilled matrices (a private subdirectory is made and removed).
    budget : int, optional
        Bytes kept in memory before spilling (default :data:`STORE_BYTES`).

    Notes
    -----
    Safe to share between threads: ``put`` and ``pop`` hold a lock.

    Examples
    --------
    >>> import numpy as np
    >>> with BondStore(budget=0) as store:       # everything spills to disk
    ...     store.put("L3", np.eye(2))
    ...     store.pop("L3").shape, store.spilled
    ((2, 2), True)
    """

    def __init__(self, scratch=None, budget=None):
        self._mem, self._disk, self._used = {}, {}, 0
        self._budget = STORE_BYTES if budget is None else budget
        self._scratch, self._dir = scratch, None
        self._lock = threading.Lock()

    def put(self, key, matrix):
        with self._lock:
            if self._used + matrix.nbytes <= self._budget:
                self._mem[key] = matrix
                self._used += matrix.nbytes
                return
            if self._dir is None:
                if self._scratch is not None:
                    os.makedirs(self._scratch, exist_ok=True)
                self._dir = tempfile.mkdtemp(prefix="bondscope-", dir=self._scratch)
            path = os.path.join(self._dir, f"{key}.npy")
            np.save(path, matrix)
            self._disk[key] = path

    def pop(self, key):
        with self._lock:
            if key in self._mem:
                m = self._mem.pop(key)
                self._used -= m.nbytes
                return m
            path = self._disk.pop(key)
            m = np.load(path)
            os.unlink(path)
            return m

    @property
    def spilled(self):
        return self._dir is not None

    def close(self):
        self._mem.clear()
        if self._dir is not None:
            shutil.rmtree(self._dir, ignore_errors=True)
            self._dir = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
