"""Exact power-of-two rescaling of tensors whose magnitude would overflow or underflow.

Entanglement does not depend on a state's scale, but the products and norms a
sweep forms do: amplitudes of size 1e170 square to infinity, 1e-170 to zero,
and MPS tensors of size 1e150 multiply past the double range.  Multiplying by
a power of two changes only the exponent of every entry, so the rescaled data
carry the same digits; the exponents removed are kept so the stored state's
norm can still be reported.
"""

import math

import numpy as np

__all__ = ["max_exponent", "amplitude_shift", "tensor_shift", "shifted", "stored_norm",
           "norm_text"]


def max_exponent(a):
    """Binary exponent e of the largest |entry| (2^(e-1) <= max < 2^e), None if all zero.

    Notes
    -----
    Complex arrays are taken by their real and imaginary parts (no temporary the
    size of the array for real data; one real view for complex), which is within
    a factor sqrt(2) of the largest modulus: enough to choose a power of two.
    """
    flat = a.reshape(-1)
    if flat.dtype.kind == "c":
        flat = flat.view(flat.real.dtype)
    if not flat.size:
        return None
    top = max(float(flat.max()), -float(flat.min()))
    return math.frexp(top)[1] if top > 0 else None


def _limit(dtype):
    return np.finfo(dtype).maxexp


def amplitude_shift(a):
    """Exponent to remove from a state vector (0 when its magnitude is safe).

    Safe means the sum of squares stays a normal number: the largest entry is
    within 2^(+-maxexp/10) of 1 (2^+-102 in double precision).
    """
    e = max_exponent(a)
    bound = _limit(a.dtype) // 10
    return e if e is not None and abs(e) > bound else 0


def tensor_shift(a, sites):
    """Exponent to remove from one of ``sites`` MPS tensors (0 when safe).

    A chain's products grow as the product of its tensors' sizes, so a tensor
    is rescaled when its largest entry exceeds 2^(maxexp / 2N) (at least 2^8),
    or falls below 2^(-maxexp/8): tensors of a canonical form (entries <= 1) are
    never touched.
    """
    e = max_exponent(a)
    if e is None:
        return 0
    limit = _limit(a.dtype)
    high, low = max(8, limit // (2 * max(sites, 1))), -(limit // 8)
    return e if e > high or e < low else 0


def shifted(a, exponent, inplace=False):
    """``a * 2**-exponent``, exact for every entry that stays a normal number.

    ``a`` must be C-contiguous; it is overwritten when ``inplace``.
    """
    if not exponent:
        return a
    out = a if inplace else np.empty_like(a)
    np.ldexp(_real(a), -exponent, out=_real(out))
    return out


def _real(a):
    return a.view(a.real.dtype) if a.dtype.kind == "c" else a


def stored_norm(norm, exponent):
    """(norm, extra exponent) of the stored state from the rescaled state's norm.

    The first item is the norm itself when it is a normal double (second item
    0); otherwise a mantissa in [0.5, 1) with the power of two that scales it.
    """
    if not exponent:
        return norm, 0
    mantissa, e = math.frexp(norm)
    total = e + exponent
    if np.finfo(float).minexp <= total <= np.finfo(float).maxexp:
        return math.ldexp(mantissa, total), 0
    return mantissa, total


def norm_text(norm, exponent):
    """The norm as text, '1.5 x 2^3000' past the double range."""
    return f"{norm:.12g}" if not exponent else f"{norm:.12g} x 2^{exponent}"
