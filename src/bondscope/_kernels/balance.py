"""Bond matrices kept near unit size while a sweep runs; the scale removed is carried as log2.

A chain's partial products grow or shrink as the product of its tensors' sizes:
300 tensors of size 200 reach 1e690, past the double range, though every tensor
and every Schmidt spectrum is moderate.  Dividing each bond matrix by 2^e, e the
binary exponent of its largest entry, after every step keeps it near 1; the
exponents removed add up to log2 of the state's scale, so its norm is still
known.  Multiplying by a power of two changes only exponents, never a digit.
"""

import math

import numpy as np

from .._errors import CheckpointError

__all__ = ["balanced", "balanced_blocks"]


def _top(m):
    """Largest |entry| of the real and imaginary parts (NaN or Inf when any entry is)."""
    parts = (m.real, m.imag) if m.dtype.kind == "c" else (m,)
    return max((float(np.abs(p).max()) for p in parts if p.size), default=0.0)


def _exponent(top, name, site, dtype):
    if not math.isfinite(top):
        hint = " or profile with --precision promote" if np.dtype(dtype).char in "fF" else ""
        raise CheckpointError(
            f"{name}: site {site}: the sweep's bond matrix holds NaN or Inf although the "
            f"tensors read were finite (computing in {np.dtype(dtype)}); expected finite "
            f"products: check the tensors near site {site}{hint}")
    return math.frexp(top)[1] if top > 0 else 0


def _scale(m, e):
    """m *= 2^-e in place, exactly (real and imaginary parts through ldexp)."""
    for part in ((m.real, m.imag) if m.dtype.kind == "c" else (m,)):
        np.ldexp(part, -e, out=part)


def balanced(m, name, site):
    """(m * 2^-e, e) with e the binary exponent of m's largest |entry| (0 when m is zero).

    ``m`` (a bond matrix the sweep owns) is overwritten.

    Raises
    ------
    CheckpointError
        ``m`` holds NaN or Inf; the message names ``name`` and ``site``.

    Notes
    -----
    Two passes over m (the largest entry, then the scaling): O(chi^2) against
    the O(d chi^3) of the factorisation that made it.
    """
    e = _exponent(_top(m), name, site, m.dtype)
    if e:
        _scale(m, e)
    return m, e


def balanced_blocks(blocks, name, site):
    """The sector blocks of one bond matrix divided by one common 2^e; (blocks, e).

    One exponent for all sectors keeps their relative weights.  ``blocks`` is a
    dict {key: ndarray}; its arrays are overwritten.
    """
    dtype = next(iter(blocks.values())).dtype if blocks else np.float64
    e = _exponent(max((_top(b) for b in blocks.values()), default=0.0), name, site, dtype)
    if e:
        for b in blocks.values():
            _scale(b, e)
    return blocks, e
