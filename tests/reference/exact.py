"""Exact contraction of site tensors, and gauges of a chosen condition number.

`exact_vector` multiplies the stored float64 numbers as exact rationals
(Python's fractions), so the state a chain's stored tensors define is known to
the one final rounding, however ill-conditioned their gauge; scipy's SVD of
it is then an independent reference for the spectra (LAPACK: error about
eps * ||psi||).
"""

from fractions import Fraction

import numpy as np

__all__ = ["block_regauge", "conditioned_gauge", "exact_vector", "regauge", "spectrum_errors"]

_exact = np.vectorize(Fraction, otypes=[object])


def _real_form(a):
    """(rows, cols) complex matrix as the real (rows, 2 cols) [Re | Im]."""
    return np.hstack([a.real, a.imag])


def _real_operator(a):
    """(k, n) complex matrix as the real (2k, 2n) map [x | y] -> [Re, Im] of (x + iy) a."""
    return np.block([[a.real, a.imag], [-a.imag, a.real]])


def exact_vector(tensors):
    """The state vector of site tensors (left, phys, right), contracted exactly.

    Returns float64 (or complex128) amplitudes, each the correctly rounded
    exact value; site 0 is the slowest index.
    """
    cplx = any(np.iscomplexobj(t) for t in tensors)
    first = tensors[0].reshape(-1, tensors[0].shape[2])
    psi = _exact(_real_form(first) if cplx else first)
    for t in tensors[1:]:
        m = t.reshape(t.shape[0], -1)
        psi = psi @ _exact(_real_operator(m) if cplx else m)
        rows = t.shape[1] * psi.shape[0]
        parts = np.hsplit(psi, 2) if cplx else [psi]
        psi = np.hstack([p.reshape(rows, -1) for p in parts])
    parts = [np.array([float(x) for x in p.reshape(-1)])
             for p in (np.hsplit(psi, 2) if cplx else [psi])]
    return parts[0] + 1j * parts[1] if cplx else parts[0]


def conditioned_gauge(rng, chi, cond, dtype=np.float64):
    """A random invertible chi x chi matrix with condition number ``cond``:
    U diag(1 .. 1/cond, log-spaced) V with Haar-like orthogonal/unitary U, V."""
    def unitary():
        m = rng.standard_normal((chi, chi))
        if np.dtype(dtype).kind == "c":
            m = m + 1j * rng.standard_normal((chi, chi))
        return np.linalg.qr(m)[0]
    return (unitary() * np.logspace(0, -np.log10(cond), chi)) @ unitary()


def regauge(rng, tensors, cond):
    """The same state with G, G^-1 of condition number ``cond`` on every bond."""
    out = [t.copy() for t in tensors]
    for i in range(len(out) - 1):
        g = conditioned_gauge(rng, out[i].shape[2], cond, out[i].dtype)
        out[i] = np.einsum("lpr,rs->lps", out[i], g)
        out[i + 1] = np.einsum("sr,rpq->spq", np.linalg.inv(g), out[i + 1])
    return out


def block_regauge(rng, tensors, labels, cond):
    """:func:`regauge` inside each charge sector of every bond (bond index charges
    ``labels``, as tests/reference/charges.py builds them): the blocks stay blocks."""
    out = [t.copy() for t in tensors]
    for b in range(1, len(tensors)):
        lab = labels[b]
        g = np.zeros((lab.shape[0],) * 2, dtype=out[b].dtype)
        for q in np.unique(lab, axis=0):
            idx = np.flatnonzero((lab == q).all(axis=1))
            g[np.ix_(idx, idx)] = conditioned_gauge(rng, idx.size, cond, out[b].dtype) \
                if idx.size > 1 else rng.choice([1.0 / cond, 1.0])
        out[b - 1] = np.einsum("lpr,rs->lps", out[b - 1], g)
        out[b] = np.einsum("sr,rpq->spq", np.linalg.inv(g), out[b])
    return out


def spectrum_errors(spectra, reference):
    """Largest |computed - reference| per cut, values missing on either side counted as 0."""
    out = []
    for s, r in zip(spectra, reference):
        k = max(len(s), len(r))
        a, b = np.zeros(k), np.zeros(k)
        a[:len(s)], b[:len(r)] = s, r
        out.append(float(np.abs(a - b).max()))
    return np.array(out)
