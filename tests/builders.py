"""Small random states and checkpoint writers shared by the tests."""

from math import prod

import h5py
import numpy as np
from scipy.linalg import svdvals

__all__ = ["random_chain", "contract", "direct_spectra", "write_chain", "scramble_gauge",
           "WORDS"]

WORDS = ("left", "phys", "right")


def random_chain(rng, dims, bonds, dtype=np.float64):
    """Random site tensors (left, phys, right); ``bonds`` has the N-1 internal bonds."""
    full = [1, *bonds, 1]
    out = []
    for i, d in enumerate(dims):
        shape = (full[i], d, full[i + 1])
        t = rng.standard_normal(shape)
        if np.dtype(dtype).kind == "c":
            t = t + 1j * rng.standard_normal(shape)
        out.append(t.astype(dtype))
    return out


def contract(tensors):
    """The state vector of a chain (site 1 the slowest index), shape (prod d,)."""
    psi = tensors[0].reshape(-1, tensors[0].shape[2])
    for t in tensors[1:]:
        psi = (psi @ t.reshape(t.shape[0], -1)).reshape(-1, t.shape[2])
    return psi.reshape(-1)


def direct_spectra(psi, dims):
    """Normalised Schmidt values at every cut by scipy's SVD of the reshaped state."""
    psi = np.asarray(psi).reshape(-1)
    psi = psi / np.linalg.norm(psi)
    return [svdvals(psi.reshape(prod(dims[:l]), -1)) for l in range(1, len(dims))]


def scramble_gauge(rng, tensors):
    """Insert random invertible G, G^-1 on every bond: the same state in another gauge."""
    out = [t.copy() for t in tensors]
    for i in range(len(out) - 1):
        chi = out[i].shape[2]
        g = rng.standard_normal((chi, chi)) + 3 * np.eye(chi)
        out[i] = np.einsum("lpr,rs->lps", out[i], g)
        out[i + 1] = np.einsum("sr,rpq->spq", np.linalg.inv(g), out[i + 1])
    return out


def write_chain(path, tensors, pattern="/psi/T{site}", axes=WORDS, start=0, rank2=False,
                compound=None, dtype=None):
    """Write site tensors into an HDF5 file under ``pattern`` in the ``axes`` order."""
    perm = [WORDS.index(w) for w in axes]
    with h5py.File(path, "a") as f:
        for i, t in enumerate(tensors):
            a = t.transpose(perm)
            if rank2 and i in (0, len(tensors) - 1):
                drop = "left" if i == 0 else "right"
                a = a.reshape([s for w, s in zip(axes, a.shape) if w != drop])
            if dtype is not None:
                a = a.astype(dtype)
            name = pattern.format(site=i + start)
            if compound:
                ftype = a.real.dtype
                ct = np.dtype([(compound[0], ftype), (compound[1], ftype)])
                rec = np.empty(a.shape, ct)
                rec[compound[0]], rec[compound[1]] = a.real, a.imag
                a = rec
            f.create_dataset(name, data=a)
    return path
