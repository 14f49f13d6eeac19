"""Writers of small block-sparse MPS checkpoints, one per form bondscope reads.

Each writer takes dense site tensors (left, phys, right), the charge of every
bond index (``labels[b]``, shape (chi_b, n_q), the left-block charge) and the
local charges (``tables[i]``, shape (d_i, n_q)), and stores the same state in
one of the forms described in ``bondscope._blocksparse``.  Used by the tests
and, for the bundled examples, by ``example_files``.
"""

import h5py
import numpy as np

__all__ = ["split", "write_blocks", "write_packed", "write_labelled", "write_dense",
           "example_files", "WORDS"]

WORDS = ("left", "phys", "right")


def _index_sets(labels):
    keys = sorted({tuple(int(v) for v in row) for row in labels})
    return {k: np.flatnonzero((labels == np.array(k)).all(axis=1)) for k in keys}


def split(tensor, left, phys, right):
    """Non-zero blocks of a dense tensor: list of ((ql, qp, qr) as arrays, block)."""
    out = []
    for qp, s in _index_sets(phys).items():
        for ql, r in _index_sets(left).items():
            for qr, c in _index_sets(right).items():
                blk = tensor[np.ix_(r, s, c)]
                if np.any(blk != 0):
                    out.append((np.array([ql, qp, qr], dtype=np.int64), blk))
    return out


def _leg_charges(q, flow, shift):
    """Canonical (left, phys, right) charges as stored under ``flow``, bonds shifted."""
    ql, qp, qr = q + np.array([shift, 0, shift])[:, None]
    sign = 1 if flow == "rightward" else -1
    return np.stack([sign * ql, qp, sign * qr])


def _stored(block, axes, rank2=None):
    a = block.transpose([WORDS.index(w) for w in axes])
    if rank2 is not None:
        a = a.reshape([n for w, n in zip(axes, a.shape) if w != rank2])
    return a


def _end(i, n, rank2_ends):
    if not rank2_ends:
        return None
    return "left" if i == 0 else ("right" if i == n - 1 else None)


def write_blocks(path, tensors, labels, tables, pattern="/state/site{site}", axes=WORDS,
                 table=False, flow="rightward", shift=0, local=True, rank2_ends=False,
                 start=0):
    """Form ``blocks``: one dataset per block, charges as attributes or a companion table."""
    with h5py.File(path, "a") as f:
        for i, t in enumerate(tensors):
            g = f.create_group(pattern.format(site=i + start))
            if local:
                g.attrs["local_charges"] = tables[i]
            rows, names = [], []
            for k, (q, blk) in enumerate(split(t, labels[i], tables[i], labels[i + 1])):
                name = f"b{k}"
                d = g.create_dataset(name, data=_stored(blk, axes,
                                                        _end(i, len(tensors), rank2_ends)))
                stored = _leg_charges(q, flow, shift)
                if table:
                    rows.append(stored)
                    names.append(name)
                else:
                    for attr, v in zip(("charge_left", "charge_phys", "charge_right"), stored):
                        d.attrs[attr] = v
            if table:
                tab = g.create_dataset("block_charges", data=np.array(rows))
                tab.attrs["blocks"] = np.array(names, dtype=h5py.string_dtype())
    return path


def write_packed(path, tensors, labels, tables, pattern="/state/site{site}", axes=WORDS,
                 flow="rightward", shift=0, local=True, gap=0):
    """Form ``packed``: one flat ``data`` array per site and its ``block_index`` table."""
    with h5py.File(path, "a") as f:
        for i, t in enumerate(tensors):
            g = f.create_group(pattern.format(site=i))
            if local:
                g.attrs["local_charges"] = tables[i]
            parts, index, at = [], [], 0
            for q, blk in split(t, labels[i], tables[i], labels[i + 1]):
                flat = _stored(blk, axes).reshape(-1)
                index.append([at, *blk.shape, *_leg_charges(q, flow, shift).reshape(-1)])
                parts += [flat, np.zeros(gap, dtype=flat.dtype)]
                at += flat.size + gap
            g.create_dataset("data", data=np.concatenate(parts))
            g.create_dataset("block_index", data=np.array(index, dtype=np.int64))
    return path


def write_labelled(path, tensors, labels, tables, pattern="/state/site{site}", axes=WORDS,
                   flow="rightward", shift=0):
    """Form ``labelled``: the dense tensor and one charge per index of each leg."""
    sign = 1 if flow == "rightward" else -1
    with h5py.File(path, "a") as f:
        for i, t in enumerate(tensors):
            g = f.create_group(pattern.format(site=i))
            g.create_dataset("tensor", data=_stored(t, axes))
            g.create_dataset("charges_left", data=sign * (labels[i] + shift))
            g.create_dataset("charges_phys", data=tables[i])
            g.create_dataset("charges_right", data=sign * (labels[i + 1] + shift))
    return path


def write_dense(path, tensors, pattern="/state/T{site}"):
    """The same state as plain dense site tensors (left, phys, right)."""
    with h5py.File(path, "a") as f:
        for i, t in enumerate(tensors):
            f.create_dataset(pattern.format(site=i), data=t)
    return path


def _example_chain(seed=7, sites=8, particles=4, max_dim=3):
    """Random particle-number-conserving chain: 8 sites holding 4 particles."""
    rng = np.random.default_rng(seed)
    table = np.array([[0], [1]])
    labels = [np.zeros((1, 1), dtype=np.int64)]
    for b in range(1, sites):
        ok = [q for q in range(b + 1) if 0 <= particles - q <= sites - b]
        dims = rng.integers(1, max_dim + 1, size=len(ok))
        labels.append(np.repeat(ok, dims).reshape(-1, 1).astype(np.int64))
    labels.append(np.full((1, 1), particles, dtype=np.int64))
    tensors = []
    for i in range(sites):
        allowed = labels[i + 1][None, None, :, 0] == \
            labels[i][:, None, None, 0] + table[None, :, None, 0]
        tensors.append(rng.standard_normal(allowed.shape) * allowed)
    norm = np.ones((1, 1))
    for t in tensors:
        norm = np.einsum("ab,asc,bsd->cd", norm, t, t)
    tensors[0] = tensors[0] / np.sqrt(norm[0, 0])
    return tensors, labels, [table] * sites


def example_files(directory, run=None):
    """Write blocks.h5, packed.h5, labelled.h5 and dense.h5 into ``directory``.

    The same 8-site chain with 4 particles in each form (files replaced);
    ``run`` becomes the root attribute ``run_id``.
    """
    from pathlib import Path

    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    tensors, labels, tables = _example_chain()
    writers = {"blocks": lambda p: write_blocks(p, tensors, labels, tables),
               "packed": lambda p: write_packed(p, tensors, labels, tables),
               "labelled": lambda p: write_labelled(p, tensors, labels, tables),
               "dense": lambda p: write_dense(p, tensors)}
    paths = {}
    for form, write in writers.items():
        path = out / f"{form}.h5"
        path.unlink(missing_ok=True)
        paths[form] = write(path)
        if run is not None:
            with h5py.File(path, "a") as f:
                f.attrs["run_id"] = run
    return paths
