"""Checkpoints and batch directories for the figure and report tests."""

import shutil
from pathlib import Path

import h5py
import numpy as np

from bondscope._text import natural_key
from builders import random_chain, write_chain

__all__ = ["ROOT", "series_checkpoints", "time_checkpoints", "batch_dir", "PNG_MAGIC",
           "spin_one_heisenberg", "spin_one_checkpoint", "normalised"]

ROOT = Path(__file__).resolve().parent.parent
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
# (bond dimension, made-up discarded weight of the run) of the fallback series
_FALLBACK = ((2, 3e-3), (4, 4e-4), (8, 5e-5))


def normalised(tensors):
    """Site tensors scaled so that their state has norm 1."""
    from reference.states import to_vector

    tensors = [t.copy() for t in tensors]
    tensors[0] /= np.linalg.norm(to_vector(tensors))
    return tensors


def series_checkpoints(dest, small=False):
    """A bond-dimension series, smallest bond dimension first: data/series/*.h5 when
    present (and not ``small``), else random 10-site chains."""
    dest = Path(dest)
    dest.mkdir(parents=True, exist_ok=True)
    shipped = sorted((ROOT / "data" / "series").glob("*.h5"), key=lambda p: natural_key(p.name))
    if shipped and not small:
        return [Path(shutil.copy(p, dest / p.name)) for p in shipped]
    rng = np.random.default_rng(70)
    out = []
    for chi, weight in _FALLBACK:
        path = dest / f"chain_chi{chi}.h5"
        bonds = [min(2**k, chi, 2 ** (10 - k)) for k in range(1, 10)]
        write_chain(path, normalised(random_chain(rng, [2] * 10, bonds)), pattern="/s/T{site}")
        with h5py.File(path, "a") as f:
            f.attrs.update(bond_dim=chi, max_discarded_weight=weight, boundary="open")
        out.append(path)
    return out


def time_checkpoints(dest, times=(0.0, 0.5, 1.0, 1.5)):
    """Random 8-site chains with a ``time`` attribute; names run against the time order."""
    dest = Path(dest)
    dest.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(71)
    out = []
    for k, t in enumerate(times):
        path = dest / f"snap_{len(times) - k:02d}.h5"
        chain = random_chain(rng, [2] * 8, [2, 4, 8, 16, 8, 4, 2])
        write_chain(path, normalised(chain), pattern="/psi/T{site}")
        with h5py.File(path, "a") as f:
            f.attrs.update(time=t, time_unit="1/J")
        out.append(path)
    return out


def batch_dir(dest):
    """Run the batch over a bond-dimension series plus one broken file, with spectra."""
    from bondscope._batch.run import run_batch

    dest = Path(dest)
    inputs = series_checkpoints(dest / "in")
    broken = dest / "in" / "zz_broken.h5"
    broken.write_bytes(b"not an HDF5 file")
    run_batch([*inputs, broken], dest / "out", workers=1, spectrum=True,
              group_pattern=r"(\w+)_chi\d+", threads=1)
    return dest / "out", [*inputs, broken]


def spin_one_heisenberg(L=8):
    """Ground state of the open spin-1 Heisenberg chain H = sum S_i . S_{i+1} (exact diag.).

    Its ground state is a singlet (Lieb & Mattis, J. Math. Phys. 3, 749 (1962), for a
    bipartite chain with equal sublattices), so every reduced density matrix commutes
    with the total spin of its block: the entanglement spectrum comes in SU(2)
    multiplets of sizes 2S + 1 = 1, 3, 5, 7, ...  Returns the normalised state vector,
    site 0 the slowest index, of length 3**L.
    """
    import scipy.sparse as sp

    from reference.spin import ground_state

    r2 = np.sqrt(2.0)
    sp_ = sp.csr_matrix(np.array([[0, r2, 0], [0, 0, r2], [0, 0, 0]]))  # S+ for spin 1
    sz = sp.csr_matrix(np.diag([1.0, 0.0, -1.0]))

    def at(op, i):
        return sp.kron(sp.kron(sp.identity(3**i), op), sp.identity(3 ** (L - i - 1)),
                       format="csr")

    H = sp.csr_matrix((3**L, 3**L))
    for i in range(L - 1):
        H = H + at(sz, i) @ at(sz, i + 1) + 0.5 * (at(sp_, i) @ at(sp_.T, i + 1)
                                                  + at(sp_.T, i) @ at(sp_, i + 1))
    return ground_state(H.tocsr())[1]


def spin_one_checkpoint(dest, L=8):
    """:func:`spin_one_heisenberg` written as exact site tensors (local dimension 3)."""
    from reference.states import from_vector

    path = Path(dest) / "spin1_heisenberg.h5"
    write_chain(path, from_vector(spin_one_heisenberg(L), [3] * L), pattern="/psi/T{site}")
    return path
