"""Checkpoints and batch directories for the figure and report tests."""

import shutil
from pathlib import Path

import h5py
import numpy as np

from builders import random_chain, write_chain

__all__ = ["ROOT", "series_checkpoints", "time_checkpoints", "batch_dir", "PNG_MAGIC"]

ROOT = Path(__file__).resolve().parent.parent
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
# (bond dimension, made-up discarded weight of the run) of the fallback series
_FALLBACK = ((2, 3e-3), (4, 4e-4), (8, 5e-5))


def _normalised(tensors):
    from reference.states import to_vector

    tensors = [t.copy() for t in tensors]
    tensors[0] /= np.linalg.norm(to_vector(tensors))
    return tensors


def series_checkpoints(dest):
    """A bond-dimension series: data/series/*.h5 when present, else small random chains."""
    dest = Path(dest)
    dest.mkdir(parents=True, exist_ok=True)
    shipped = sorted((ROOT / "data" / "series").glob("*.h5"))
    if shipped:
        return [Path(shutil.copy(p, dest / p.name)) for p in shipped]
    rng = np.random.default_rng(70)
    out = []
    for chi, weight in _FALLBACK:
        path = dest / f"chain_chi{chi}.h5"
        bonds = [min(2**k, chi, 2 ** (10 - k)) for k in range(1, 10)]
        write_chain(path, _normalised(random_chain(rng, [2] * 10, bonds)), pattern="/s/T{site}")
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
        write_chain(path, _normalised(chain), pattern="/psi/T{site}")
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
