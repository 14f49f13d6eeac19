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

__all__ = ["SweepScales", "balanced", "balanced_blocks"]


def _top(m):
    """Largest |entry| of the real and imaginary parts (NaN or Inf when any entry is)."""
    parts = (m.real, m.imag) if m.dtype.kind == "c" else (m,)
    return _largest([np.abs(p).max() for p in parts if p.size])


def _largest(tops):
    """The largest of some entry sizes, NaN if any is NaN (Python's max skips one), 0 if none."""
    return float(np.max(tops)) if len(tops) else 0.0


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
    e = _exponent(_largest([_top(b) for b in blocks.values()]), name, site, dtype)
    if e:
        for b in blocks.values():
            _scale(b, e)
    return blocks, e


class SweepScales:
    """Exponents the two sweeps of an N-site chain removed from their bond matrices.

    The left-to-right sweep balances R_{j+1} (made from site j) through
    :meth:`left`, the right-to-left sweep L_j through :meth:`right`; each sweep
    writes its own entries, so the two may run in different threads.
    """

    def __init__(self, sites, name, labels):
        self.from_r = np.zeros(sites + 1, dtype=np.int64)      # removed from R_b
        self.from_l = np.zeros(sites + 1, dtype=np.int64)      # removed from L_b
        self._name, self._labels = name, labels

    def left(self, j, m):
        """R_{j+1} (an array, or sector blocks as a dict) balanced; its exponent kept."""
        scale = balanced_blocks if isinstance(m, dict) else balanced
        m, self.from_r[j + 1] = scale(m, self._name, self._labels[j])
        return m

    def right(self, j, m):
        """L_j (an array, or sector blocks as a dict) balanced; its exponent kept."""
        scale = balanced_blocks if isinstance(m, dict) else balanced
        m, self.from_l[j] = scale(m, self._name, self._labels[j])
        return m

    def exponent(self, r_bond, l_bond):
        """log2 of the scale removed from R_{r_bond} times L_{l_bond}, in all."""
        return int(self.from_r[:r_bond + 1].sum() + self.from_l[l_bond:].sum())

    def rescale(self, ledger, reference):
        """Put a :class:`.conditioning.GaugeLedger` filled with the norms of balanced
        matrices into the units of a state norm measured times 2^-``reference``.

        Every bound the ledger sums is a product ||R_b|| ||L_b|| (or a site's norm
        times its neighbours'), in the units 2^-(CR_b + CL_b) of bond b (CR, CL the
        exponents removed from R_b, L_b in all).  Multiplying ||R_b|| by 2^x_b and
        ||L_b|| by 2^z_b with x_b + z_b = CR_b + CL_b - reference, the difference
        split evenly so that each stays near its product's size (the gauge's
        conditioning), and each site's norms by the matching powers, brings every
        product to the norm's units, exactly.
        """
        d = np.cumsum(self.from_r) + np.cumsum(self.from_l[::-1])[::-1] - reference
        x = d // 2
        z = d - x
        j = np.arange(ledger.a_rows.size)
        ledger.a_rows[:] = np.ldexp(ledger.a_rows, x[j + 1] - x[j] - self.from_r[j + 1])
        ledger.a_cols[:] = np.ldexp(ledger.a_cols, z[j] - z[j + 1] - self.from_l[j])
        ledger.r[:] = np.ldexp(ledger.r, x)
        ledger.l[:] = np.ldexp(ledger.l, z)
