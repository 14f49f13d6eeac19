"""Reading the three block-sparse forms' metadata (see :mod:`bondscope._blocksparse`).

Only names, attributes, shapes and the small charge tables are read here.
"""

import re
from math import prod

import numpy as np

from ._errors import CheckpointError

__all__ = ["site_groups", "form_of", "find_block_layouts", "read_site", "Site", "LABELS"]

LEG_ATTRS = ("charge_left", "charge_phys", "charge_right")
LABELS = ("charges_left", "charges_phys", "charges_right")
_NUMBER = re.compile(r"\d+")


def site_groups(f):
    """Paths of every group in an open file."""
    import h5py

    found = []
    f.visititems(lambda name, obj: found.append("/" + name)
                 if isinstance(obj, h5py.Group) else None)
    return found


def form_of(group):
    """The block form a site group's members suggest, or None (names and attributes only)."""
    import h5py

    names = set(group)
    if {"tensor", *LABELS} <= names:
        return "labelled"
    if {"data", "block_index"} <= names:
        return "packed"
    if "block_charges" in names:
        return "blocks"
    dsets = [group[n] for n in names if isinstance(group[n], h5py.Dataset)]
    if dsets and all(a in dsets[0].attrs for a in LEG_ATTRS):
        return "blocks"
    return None


def find_block_layouts(f):
    """Families of numbered site groups holding a block form: list of (pattern, form)."""
    families = {}
    for p in site_groups(f):
        form = form_of(f[p])
        if form is None:
            continue
        for m in _NUMBER.finditer(p):
            families.setdefault((p[:m.start()] + "{site}" + p[m.end():], form), []).append(p)
    return [key for key, members in families.items() if len(members) >= 2]


class Site:
    """One site's metadata: blocks (name, locator, stored shape, charges (3, n_q))."""

    def __init__(self, label, form, blocks=None, labels=None, tensor=None, local=None):
        self.label, self.form, self.blocks = label, form, blocks or []
        self.labels, self.tensor, self.local = labels, tensor, local
        self.data = None


def _ints(value, where, what):
    a = np.asarray(value)
    if a.dtype.kind not in "iu":
        raise CheckpointError(f"{where}: {what} has dtype {a.dtype}, expected integer charges")
    return a.astype(np.int64)


def read_site(f, path, gpath, label, form):
    import h5py

    g = f[gpath]
    where = f"{path}: site {label}"
    local = g.attrs.get("local_charges")
    local = None if local is None else _ints(local, where, "attribute local_charges")
    if form == "labelled":
        for name in ("tensor", *LABELS):
            if not isinstance(g.get(name), h5py.Dataset):
                raise CheckpointError(f"{where}: no {name} dataset in {gpath}; the labelled "
                                      "form needs tensor, charges_left, charges_phys and "
                                      "charges_right")
        labels = [_ints(g[n][()], where, n) for n in LABELS]
        return Site(label, form, labels=labels, tensor=g["tensor"], local=labels[1])
    if form == "packed":
        for name in ("data", "block_index"):
            if not isinstance(g.get(name), h5py.Dataset):
                raise CheckpointError(f"{where}: no {name} dataset in {gpath}; the packed form "
                                      "needs data and block_index")
        if g["data"].ndim != 1:
            raise CheckpointError(f"{where}: data has shape {g['data'].shape}, expected 1-D")
        index = _ints(g["block_index"][()], where, "block_index")
        if index.ndim != 2 or index.shape[1] < 7 or (index.shape[1] - 4) % 3:
            raise CheckpointError(f"{where}: block_index has shape {index.shape}, expected "
                                  "(n_blocks, 4 + 3 n_q): offset, n_left, n_phys, n_right, "
                                  "then left, phys and right charges")
        nq = (index.shape[1] - 4) // 3
        blocks = [(f"#{k}", int(row[0]), tuple(int(x) for x in row[1:4]),
                   row[4:].reshape(3, nq)) for k, row in enumerate(index)]
        site = Site(label, form, blocks=blocks, local=local)
        site.data = g["data"]
        _check_offsets(site, where)
        return site
    table, rows = g.get("block_charges"), {}
    if table is not None:
        names = [n.decode() if isinstance(n, bytes) else str(n)
                 for n in np.atleast_1d(table.attrs.get("blocks", []))]
        charges = _ints(table[()], where, "block_charges")
        if len(names) != charges.shape[0] or charges.ndim not in (2, 3) or \
                charges.shape[1] != 3:
            raise CheckpointError(f"{where}: block_charges has shape {charges.shape} and "
                                  f"names {len(names)} blocks; expected (n_blocks, 3) or "
                                  "(n_blocks, 3, n_q) with attribute blocks naming each row")
        rows = {n: charges[k].reshape(3, -1) for k, n in enumerate(names)}
        stray = sorted(n for n in rows if not isinstance(g.get(n), h5py.Dataset))
        if stray:
            raise CheckpointError(f"{where}: block_charges names block {stray[0]}, which "
                                  f"is not a dataset in {gpath}")
    blocks = []
    for name in sorted(g):
        d = g[name]
        if name == "block_charges" or not isinstance(d, h5py.Dataset):
            continue
        if name in rows:
            q = rows.pop(name)
        elif all(a in d.attrs for a in LEG_ATTRS):
            parts = [_ints(d.attrs[a], f"{where}: block {name}", a).reshape(-1)
                     for a in LEG_ATTRS]
            if len({p.size for p in parts}) != 1:
                raise CheckpointError(f"{where}: block {name}: charge attributes have "
                                      f"{', '.join(str(p.size) for p in parts)} entries; "
                                      "expected one per conserved quantity on every leg")
            q = np.stack(parts)
        else:
            raise CheckpointError(f"{where}: block {name} has no charges: neither the "
                                  "attributes charge_left, charge_phys, charge_right nor a "
                                  "row of a block_charges table")
        blocks.append((name, d, d.shape, q))
    if not blocks:
        raise CheckpointError(f"{where}: {gpath} holds no blocks")
    return Site(label, form, blocks=blocks, local=local)


def _check_offsets(site, where):
    spans = sorted((off, off + prod(shape), name) for name, off, shape, _ in site.blocks)
    for name, off, shape, _ in site.blocks:
        if off < 0 or min(shape) < 1:
            raise CheckpointError(f"{where}: block {name}: offset {off} and shape {shape}; "
                                  "expected an offset >= 0 and dimensions >= 1")
    for (a0, a1, an), (b0, _, bn) in zip(spans, spans[1:]):
        if b0 < a1:
            raise CheckpointError(f"{where}: blocks {an} (entries {a0}..{a1 - 1}) and {bn} "
                                  f"(from {b0}) overlap in data")
    if spans and spans[-1][1] > site.data.shape[0]:
        raise CheckpointError(f"{where}: block {spans[-1][2]} ends at entry {spans[-1][1]}, "
                              f"beyond data's length {site.data.shape[0]}")
