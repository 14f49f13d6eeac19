"""Arrays keyed by name, kept in memory up to a budget and spilled to disk past it.

The charge-resolved sweeps keep their bond matrices (dense, or one per charge
sector) here so that memory does not grow with the number of sites.
"""

import os
import shutil
import tempfile

import numpy as np

__all__ = ["SpillStore", "STORE_BYTES", "r_factor"]

# In-memory budget for bond matrices before they spill to the scratch directory.
STORE_BYTES = 32 * 2**20


def r_factor(a):
    """R of the economic QR of a 2-D array (a may be overwritten); shape (min(m, n), n).

    A Fortran-ordered ``a`` reaches LAPACK without a copy.
    """
    from scipy.linalg import qr

    return qr(a, mode="raw", overwrite_a=True, check_finite=False)[1]


class SpillStore:
    """Arrays keyed by name; in memory up to ``budget`` bytes, then ``.npy`` files.

    Parameters
    ----------
    scratch : str or None
        Directory for spilled arrays (a private subdirectory is made and removed).
    budget : int, optional
        Bytes kept in memory before spilling (default 32 MiB).
    """

    def __init__(self, scratch=None, budget=None):
        self._mem, self._disk, self._used = {}, {}, 0
        self._budget = STORE_BYTES if budget is None else budget
        self._scratch, self._dir = scratch, None

    def put(self, key, array):
        if self._used + array.nbytes <= self._budget:
            self._mem[key] = array
            self._used += array.nbytes
            return
        if self._dir is None:
            if self._scratch is not None:
                os.makedirs(self._scratch, exist_ok=True)
            self._dir = tempfile.mkdtemp(prefix="bondscope-", dir=self._scratch)
        path = os.path.join(self._dir, f"{len(self._disk)}-{abs(hash(key))}.npy")
        np.save(path, array)
        self._disk[key] = path

    def pop(self, key):
        if key in self._mem:
            a = self._mem.pop(key)
            self._used -= a.nbytes
            return a
        path = self._disk.pop(key)
        a = np.load(path)
        os.unlink(path)
        return a

    @property
    def spilled(self):
        return self._dir is not None

    def clear(self):
        """Drop every array (memory and disk)."""
        self._mem.clear()
        self._disk.clear()
        self._used = 0
        if self._dir is not None:
            shutil.rmtree(self._dir, ignore_errors=True)
            self._dir = None

    def close(self):
        self.clear()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
