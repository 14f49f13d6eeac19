"""Block-sparse MPS checkpoints: site tensors stored as charge blocks.

Every form keeps one HDF5 group per site, named by a pattern with a
``{site}`` placeholder (``--blocks '/state/site{site}'``), sites numbered
consecutively from 0 or 1.  Charges are integers, one per conserved quantity
(a scalar, or a list of n_q integers).  Forms (``--block-form``, found from
the group members when omitted):

``blocks``
    One dataset per non-zero block (any names), each stored in the
    ``--axes`` order (rank 2 allowed at the chain ends, without the end
    leg).  A block's charges are the dataset attributes ``charge_left``,
    ``charge_phys`` and ``charge_right``, or a companion table: the dataset
    ``block_charges`` in the group, int (n_blocks, 3) or (n_blocks, 3, n_q),
    legs in the order left, phys, right, with the attribute ``blocks``
    listing the block dataset each row describes.
``packed``
    A 1-D dataset ``data`` with every block's entries (each block C-ordered
    in the ``--axes`` order, anywhere in the array, not overlapping) and an
    int table ``block_index`` (n_blocks, 4 + 3 n_q) with columns offset,
    n_left, n_phys, n_right, then the left, phys and right charges.
``labelled``
    A dense ``tensor`` (``--axes`` order, as for dense checkpoints) and one
    charge per index of each leg: datasets ``charges_left``,
    ``charges_phys``, ``charges_right``, shaped (n,) or (n, n_q).  Entries
    that break the conservation rule must be exactly zero.

A block's phys leg runs over the local basis states of charge q_phys, in
basis order.  The local charges come from ``--charges``; without it, from
the site groups (``charges_phys`` of the labelled form, or the group
attribute ``local_charges`` of the other two, shaped (d,) or (d, n_q)).

Conservation rule: q_right = q_left + q_phys (charge flows to the right, the
right end's bond carrying the total charge); ``--charge-flow leftward`` reads
q_left = q_right + q_phys instead.  The end bonds have dimension 1; the
left-block charge at a cut is the bond charge measured from the left end's.

Only metadata and the small charge tables are read when the file is opened
(every rule above is checked then); tensor data is read one site at a time.
"""

from math import prod
from pathlib import Path

import numpy as np

from ._blockforms import find_block_layouts, form_of, read_site, site_groups
from ._charges import FLOWS, ChainCharges, parse_charges
from ._checkpoint import _family, _numbering_problem, _open, _reader, _stored_dtype
from ._errors import CheckpointError
from ._linked import refuse_missing_sources
from ._source import AXIS_WORDS, _canonical, _Held, compute_dtype, parse_axes

__all__ = ["open_blocks", "find_block_layouts", "has_block_layout", "BlockChainSource",
           "FORMS"]

FORMS = ("blocks", "packed", "labelled")


def _local_table(sites, charges, modulus, where):
    """The ChainCharges of the chain: from ``charges`` or from the file, checked against both."""
    found = [s.local for s in sites]
    if charges is None:
        if any(t is None for t in found):
            missing = sites[[t is None for t in found].index(True)].label
            raise CheckpointError(f"{where}: site {missing} does not store its local charges "
                                  "(attribute local_charges); give them with --charges")
        charges = [(1, t.reshape(t.shape[0], -1).T.tolist()) for t in found]
    try:
        spec = parse_charges(charges, modulus)
        tables = spec.expand(len(sites), where=f"{where}: charges")
    except ValueError as exc:
        raise CheckpointError(str(exc)) from None
    bound = ChainCharges(tables, spec.moduli)
    for s, table, own in zip(sites, bound.sites, found):
        if own is None:
            continue
        own = own.reshape(own.shape[0], -1)
        if own.shape != table.shape or not np.array_equal(bound.reduce(own), table):
            raise CheckpointError(f"{where}: site {s.label}: the stored local charges "
                                  f"{own.T.tolist()} differ from the given ones "
                                  f"{table.T.tolist()}")
    return bound


def _canon(q, charges, flow):
    """Raw (3, n_q) leg charges -> canonical (left, phys, right) keys (rightward flow)."""
    if q.shape[1] != charges.quantities:
        return None
    sign = 1 if flow == "rightward" else -1
    return (charges.key(sign * q[0]), charges.key(q[1]), charges.key(sign * q[2]))


def _rule(flow):
    return "q_right = q_left + q_phys" if flow == "rightward" else \
        "q_left = q_right + q_phys"


def _layout(sites, charges, words, flow, where):
    """Per site the canonical blocks and per bond the sector dims; the first problem or None.

    Returns (problem, blocks, bonds): blocks[i] = list of (name, locator, stored shape,
    (ql, qp, qr), (kl, dp, kr)); bonds[b] = {charge key: dim}.
    """
    n, out, bonds = len(sites), [], [dict() for _ in range(len(sites) + 1)]
    for i, s in enumerate(sites):
        at = f"{where}: site {s.label}"
        counts = {charges.key(row): 0 for row in charges.sites[i]}
        for row in charges.sites[i]:
            counts[charges.key(row)] += 1
        rows, seen = [], {}
        for name, loc, shape, q in s.blocks:
            keys = _canon(q, charges, flow)
            if keys is None:
                return (f"{at}: block {name} has {q.shape[1]} charge(s) per leg, expected "
                        f"{charges.quantities} (one per conserved quantity)"), None, None
            ql, qp, qr = keys
            if charges.key(charges.add(ql, qp)) != qr:
                shown = [charges.text(charges.key(row)) for row in q]
                return (f"{at}: block {name} has charges left {shown[0]}, phys {shown[1]}, "
                        f"right {shown[2]}, which "
                        f"break {_rule(flow)}; if the file uses the other leg direction, "
                        f"pass --charge-flow "
                        f"{'leftward' if flow == 'rightward' else 'rightward'}"), None, None
            if s.form == "packed":
                dims = shape
            else:
                dims = _canonical(shape, words, i == 0, i == n - 1)
                if dims is None:
                    return (f"{at}: block {name} has rank {len(shape)} {tuple(shape)}, "
                            "expected 3 (or 2 at an end of the chain)"), None, None
            if (ql, qp) in seen:
                return (f"{at}: blocks {seen[(ql, qp)]} and {name} have the same charges "
                        f"(left {charges.text(ql)}, phys {charges.text(qp)})"), None, None
            seen[(ql, qp)] = name
            if counts.get(qp, 0) != dims[1]:
                return (f"{at}: block {name} has a phys leg of {dims[1]} states for charge "
                        f"{charges.text(qp)}, the local basis has {counts.get(qp, 0)} such "
                        f"state(s) (axes {','.join(words)})"), None, None
            for b, q, dim, side in ((i, ql, dims[0], "left"), (i + 1, qr, dims[2], "right")):
                have = bonds[b].setdefault(q, dim)
                if have != dim:
                    return (f"{at}: block {name} gives the {side} sector of charge "
                            f"{charges.text(q)} dimension {dim}, another block on that bond "
                            f"gives {have} (axes {','.join(words)})"), None, None
            rows.append((name, loc, shape, keys, dims))
        out.append(rows)
    for b, label in ((0, "left"), (n, "right")):
        if sum(bonds[b].values()) != 1:
            return (f"{where}: the {label} end bond has sectors "
                    f"{ {charges.text(k): v for k, v in bonds[b].items()} }, expected one "
                    "sector of dimension 1"), None, None
    return None, out, bonds


def _resolve(sites, charges, axes, flow, where):
    if axes is not None or all(s.form == "packed" for s in sites):
        words = parse_axes(axes) if axes is not None else AXIS_WORDS
        problem, blocks, bonds = _layout(sites, charges, words, flow, where)
        if problem:
            raise CheckpointError(problem)
        return words, blocks, bonds
    from itertools import permutations

    first = None
    for words in [AXIS_WORDS, *[w for w in permutations(AXIS_WORDS) if w != AXIS_WORDS]]:
        problem, blocks, bonds = _layout(sites, charges, words, flow, where)
        if problem is None:
            return words, blocks, bonds
        first = first or problem
    raise CheckpointError(first)


class BlockChainSource(_Held):
    """An MPS read block by block, with the charges of every bond index.

    Attributes beyond those of :class:`bondscope._source.ChainSource`:
    ``charges`` (ChainCharges), ``first_charge`` / ``last_charge`` (canonical
    keys of the end bonds), ``bond_sectors`` (per bond 0..N, {key: dim}).
    ``blocks(i)`` returns site i's blocks ``{(q_left, q_phys): (q_right, array)}``
    shaped (left, phys, right) in the compute dtype; ``tensor(i)`` the dense
    tensor, bond indices ordered by sector (sorted charges, the stored order
    for the labelled form); ``bond_charges(b)`` the charge of each of them.
    """

    kind = "mps"

    def __init__(self, name, sites, charges, words, blocks, bonds, dtype, precision):
        self.name, self._sites, self.charges, self.axes = name, sites, charges, words
        self._blocks, self.bond_sectors = blocks, bonds
        self.dtype = np.dtype(dtype)
        self.compute_dtype = compute_dtype(self.dtype, precision)
        self.labels = [s.label for s in sites]
        self.first_charge = next(iter(bonds[0]))
        self.last_charge = next(iter(bonds[-1]))
        self.shapes = [(sum(bonds[i].values()), len(charges.sites[i]),
                        sum(bonds[i + 1].values())) for i in range(len(sites))]

    sites = property(lambda self: len(self.shapes))
    local_dims = property(lambda self: [s[1] for s in self.shapes])
    bond_dims = property(lambda self: [s[2] for s in self.shapes[:-1]])
    @property
    def nbytes(self):
        if self._sites[0].form == "labelled":
            return sum(prod(s) for s in self.shapes) * self.dtype.itemsize
        return sum(prod(d) for rows in self._blocks for *_, d in rows) * self.dtype.itemsize

    def bond_charges(self, b):
        s = self._sites[min(b, len(self._sites) - 1)]
        if s.form == "labelled":
            raw = s.labels[0 if b < len(self._sites) else 2]
            sign = -1 if self._flow_left else 1
            return self.charges.reduce(sign * raw.reshape(raw.shape[0], -1))
        return np.array([k for k, d in sorted(self.bond_sectors[b].items()) for _ in range(d)],
                        dtype=np.int64).reshape(-1, self.charges.quantities)

    def _stored(self, loc, i):
        where = f"{self.name}: site {self.labels[i]}"
        raw = np.asarray(_reader(loc, _stored_dtype(loc, where))())
        if not np.isfinite(raw).all():
            raise CheckpointError(f"{where}: holds NaN or Inf values")
        return raw

    def _oriented(self, raw, i):
        kept = self.axes if raw.ndim == 3 else \
            [w for w in self.axes if w != ("left" if i == 0 else "right")]
        return raw.transpose([kept.index(w) for w in AXIS_WORDS if w in kept])

    def blocks(self, i):
        from ._kernels.blocksweep import split_blocks

        s = self._sites[i]
        if s.form == "labelled":
            return split_blocks(self._labelled(i), self.bond_charges(i),
                                self.charges.sites[i], self.bond_charges(i + 1), self.charges)
        if s.form == "packed":
            data = self._stored(s.data, i)
        out = {}
        for name, loc, shape, (ql, qp, qr), dims in self._blocks[i]:
            if s.form == "packed":
                stored = tuple(dims[AXIS_WORDS.index(w)] for w in self.axes)
                raw = data[loc:loc + prod(dims)].reshape(stored)
            else:
                raw = self._stored(loc, i)
            a = self._oriented(raw, i).reshape(dims)
            out[(ql, qp)] = (qr, np.ascontiguousarray(a, dtype=self.compute_dtype))
        return out

    def _labelled(self, i):
        s = self._sites[i]
        a = self._oriented(self._stored(s.tensor, i), i).reshape(self.shapes[i])
        left, right = self.bond_charges(i), self.bond_charges(i + 1)
        want = self.charges.add(left[:, None, :], self.charges.sites[i][None, :, :])
        bad = (a != 0) & ~(want[:, :, None, :] == right[None, None, :, :]).all(axis=3)
        if bad.any():
            l, p, r = (int(x[0]) for x in np.nonzero(bad))
            raise CheckpointError(
                f"{self.name}: site {s.label}: entry (left {l}, phys {p}, right {r}) = "
                f"{a[l, p, r]:.3g} is non-zero but its charges break {_rule(self._flow)}; "
                "entries outside the charge blocks must be exactly zero")
        return np.ascontiguousarray(a, dtype=self.compute_dtype)

    def tensor(self, i):
        if self._sites[i].form == "labelled":
            return self._labelled(i)
        a = np.zeros(self.shapes[i], dtype=self.compute_dtype)
        offs = [_offsets(self.bond_sectors[b]) for b in (i, i + 1)]
        phys = self.charges.sites[i]
        for (ql, qp), (qr, blk) in self.blocks(i).items():
            states = np.flatnonzero((phys == np.array(qp)).all(axis=1))
            a[np.ix_(offs[0][ql], states, offs[1][qr])] = blk
        return a


def _offsets(sectors):
    out, at = {}, 0
    for k, d in sorted(sectors.items()):
        out[k] = np.arange(at, at + d)
        at += d
    return out


def has_block_layout(path):
    """True when ``path`` is a readable HDF5 file holding a block-sparse layout (metadata only)."""
    try:
        f = _open(path)
    except CheckpointError:
        return False
    with f:
        try:
            return bool(find_block_layouts(f))
        except (OSError, RuntimeError):     # unreadable groups: open_source says so
            return False


def open_blocks(path, *, pattern=None, form=None, charges=None, modulus=None, axes=None,
                flow="rightward", precision="promote"):
    """Open a block-sparse MPS checkpoint read-only.

    Parameters
    ----------
    path : str or Path
    pattern : str, optional
        Site group pattern with ``{site}``; found from metadata when omitted.
    form : {"blocks", "packed", "labelled"}, optional
        Found from the groups' members when omitted.
    charges, modulus : optional
        Local charges (see :mod:`bondscope._charges`); default: stored in the file.
    axes : str, optional
        Stored axis order of blocks and tensors; inferred when omitted.
    flow : {"rightward", "leftward"}
        Conservation rule q_right = q_left + q_phys, or q_left = q_right + q_phys.
    precision : {"promote", "stored"}

    Returns
    -------
    BlockChainSource
        Holds the file open; close it (or use it as a context manager).

    Raises
    ------
    CheckpointError
        No or several block layouts, missing sites or members, missing charges,
        blocks breaking the conservation rule, overlapping offsets, shapes that
        disagree with the charges, non-numeric data; one line naming site and block.
    ValueError
        Bad options (unknown form or flow, malformed charges or axes).
    """
    if form is not None and form not in FORMS:
        raise ValueError(f"block form {form!r} is not one of {', '.join(FORMS)}")
    if flow not in FLOWS:
        raise ValueError(f"charge flow {flow!r} is not one of {', '.join(FLOWS)}")
    f = _open(path)
    try:
        refuse_missing_sources(f, path)
        src = _build(f, Path(path), pattern, form, charges, modulus, axes, flow, precision)
    except BaseException:
        f.close()
        raise
    src.close = f.close
    return src


def _build(f, path, pattern, form, charges, modulus, axes, flow, precision):
    if pattern is None:
        found = [c for c in find_block_layouts(f) if form in (None, c[1])]
        if len(found) != 1:
            listed = "; ".join(f"--blocks '{p}' ({k})" for p, k in found) or "none"
            raise CheckpointError(f"{path}: {len(found)} block-sparse layouts found ({listed}); "
                                  "choose one with --blocks PATTERN")
        pattern, form = found[0]
    hits = _family(f, pattern, site_groups(f))
    problem = _numbering_problem(list(hits), pattern)
    if problem:
        raise CheckpointError(f"{path}: {problem} (site groups)")
    if form is None:
        forms = [form_of(f[p]) for p in hits.values()]
        known = [k for k in FORMS if k in forms]
        if not known:
            raise CheckpointError(f"{path}: the groups of {pattern} hold no block form; "
                                  f"name it with --block-form ({', '.join(FORMS)})")
        form = max(known, key=forms.count)     # a group that differs gets its own error
    sites = [read_site(f, path, p, label, form) for label, p in hits.items()]
    bound = _local_table(sites, charges, modulus, str(path))
    if form == "labelled":
        words, blocks, bonds = _labelled_layout(sites, bound, axes, flow, str(path))
    else:
        words, blocks, bonds = _resolve(sites, bound, axes, flow, str(path))
    dtypes = [_stored_dtype(s.data if form == "packed" else
                            (s.tensor if form == "labelled" else s.blocks[0][1]),
                            f"{path}: site {s.label}") for s in sites]
    src = BlockChainSource(f"{path}:{pattern}", sites, bound, words, blocks, bonds,
                           np.result_type(*dtypes), precision)
    src._flow, src._flow_left = flow, flow == "leftward"
    return src


def _labelled_layout(sites, charges, axes, flow, where):
    """Axis words and bond sectors of the labelled form, from the labels' lengths."""
    from itertools import permutations

    n = len(sites)
    sign = 1 if flow == "rightward" else -1
    for i, s in enumerate(sites[:-1]):
        a, b = s.labels[2], sites[i + 1].labels[0]
        if a.shape != b.shape or not np.array_equal(a, b):
            raise CheckpointError(f"{where}: site {sites[i + 1].label}: charges_left differs "
                                  f"from site {s.label}'s charges_right (the same bond)")
    lengths = [tuple(lab.shape[0] for lab in s.labels) for s in sites]
    choices = [parse_axes(axes)] if axes is not None else \
        [AXIS_WORDS, *[w for w in permutations(AXIS_WORDS) if w != AXIS_WORDS]]
    first = None
    for words in choices:
        bad = next((i for i, s in enumerate(sites)
                    if _canonical(s.tensor.shape, words, i == 0, i == n - 1) != lengths[i]),
                   None)
        if bad is None:
            break
        first = first or (f"{where}: site {sites[bad].label}: tensor shaped "
                          f"{sites[bad].tensor.shape} does not "
                          f"match its charge labels (left {lengths[bad][0]}, phys "
                          f"{lengths[bad][1]}, right {lengths[bad][2]}; axes "
                          f"{','.join(words)})")
    else:
        raise CheckpointError(first)
    bonds = []
    for b in range(n + 1):
        raw = sites[b].labels[0] if b < n else sites[-1].labels[2]
        lab = charges.reduce(sign * raw.reshape(raw.shape[0], -1))
        if lab.shape[1] != charges.quantities:
            raise CheckpointError(f"{where}: bond {b}: charge labels have {lab.shape[1]} "
                                  f"charge(s) per index, expected {charges.quantities}")
        keys, counts = np.unique(lab, axis=0, return_counts=True)
        bonds.append({tuple(int(v) for v in k): int(c) for k, c in zip(keys, counts)})
    for b, label in ((0, "left"), (n, "right")):
        if sum(bonds[b].values()) != 1:
            raise CheckpointError(f"{where}: the {label} end bond has dimension "
                                  f"{sum(bonds[b].values())}, expected 1")
    return words, [[] for _ in sites], bonds
