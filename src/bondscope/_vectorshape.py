"""How a stored state-vector dataset's shape reads as amplitudes.

Writers store a state vector as a flat array, as a (D, 1) column or (1, D)
row, as an N-D array (d_1, ..., d_N), or as real numbers with the real and
imaginary parts in a last axis of length 2.  All of it is decided from the
shape and dtype alone (metadata), before anything is read.
"""

from math import prod

import numpy as np

from ._errors import CheckpointError

__all__ = ["PARTS", "VectorShape", "vector_shape", "power_hint", "pairs_as_complex"]

# complex_parts (--complex-parts): find a (re, im) last axis, force it, or never
PARTS = ("auto", "last-axis", "none")
# a flat vector this long or shorter is as likely a small N-D state as (re, im) pairs
_SMALL = 16


class VectorShape:
    """``amplitudes``: the amplitude array's shape (unit axes of a column or row
    dropped); ``pairs``: the last stored axis holds (re, im)."""

    def __init__(self, amplitudes, pairs):
        self.amplitudes, self.pairs = tuple(amplitudes), pairs

    @property
    def flat(self):
        return len(self.amplitudes) == 1


def _squeezed(shape):
    """A shape with at most one axis longer than 1 is a flat vector."""
    return (prod(shape),) if sum(n > 1 for n in shape) <= 1 else tuple(shape)


def vector_shape(shape, dtype, parts="auto", where="state vector"):
    """Read a dataset of ``shape`` and (numeric) ``dtype`` as amplitudes.

    Parameters
    ----------
    shape : tuple of int
    dtype : numpy dtype
        As it reads (compound complex pairs already counted as complex).
    parts : {"auto", "last-axis", "none"}
        ``auto`` takes a real array shaped (D, 2) (or (D, 1, 2), (1, D, 2)) with
        D > 16 as D complex amplitudes; ``last-axis`` takes any real array whose
        last axis has length 2 so; ``none`` never.
    where : str
        Dataset named in messages.

    Raises
    ------
    CheckpointError
        ``last-axis`` on a complex dataset or one whose last axis is not 2.
    """
    shape = tuple(int(n) for n in shape)
    real = np.dtype(dtype).kind in "fiu"
    if parts == "last-axis":
        if not real or len(shape) < 2 or shape[-1] != 2:
            raise CheckpointError(f"{where}: --complex-parts last-axis needs real numbers with "
                                  f"a last axis of length 2, found shape {shape} of "
                                  f"{np.dtype(dtype)}; drop the flag")
        return VectorShape(_squeezed(shape[:-1]), True)
    if parts == "auto" and real and np.dtype(dtype).kind == "f" and len(shape) >= 2 \
            and shape[-1] == 2:
        rest = _squeezed(shape[:-1])
        if len(rest) == 1 and rest[0] > _SMALL:
            return VectorShape(rest, True)
    return VectorShape(_squeezed(shape), False)


def power_hint(size, tried=2):
    """'729 = 3^6: set --local-dim 3' when ``size`` is d^N (N >= 2, d <= 16, d != tried)."""
    for d in range(2, 17):
        if d == tried:
            continue
        n, rest = 0, size
        while rest > 1 and rest % d == 0:
            rest //= d
            n += 1
        if rest == 1 and n >= 2:
            return f"{size} = {d}^{n}: set --local-dim {d}"
    return None


def pairs_as_complex(raw):
    """A real array (..., 2) of (re, im) as complex amplitudes (...), a view when it can be.

    float32 pairs become complex64 and float64 pairs complex128 without a copy
    (a C-contiguous (re, im) pair is the layout of one complex number); other
    real types are converted to complex128.
    """
    raw = np.asarray(raw)
    if raw.dtype not in (np.float32, np.float64):
        raw = raw.astype(np.float64)
    raw = np.ascontiguousarray(raw)
    cplx = np.complex64 if raw.dtype == np.float32 else np.complex128
    return raw.view(cplx).reshape(raw.shape[:-1])
