"""Checkpoints: HDF5 files opened read-only, searched by metadata, read one tensor at a time."""

import re
from pathlib import Path

import numpy as np

from ._errors import CheckpointError
from ._source import (AmplitudeSource, ChainSource, numeric_dtype, parse_axes, resolve_axes,
                      split_local_dims)

__all__ = ["open_source", "scan", "Candidate"]

_NUMBER = re.compile(r"\d+")
_COMPLEX_FIELDS = (("r", "i"), ("re", "im"), ("real", "imag"))
_LISTED = 8


class Candidate:
    """A layout found in a checkpoint: a state-vector dataset or a family of site tensors."""

    def __init__(self, kind, spec, datasets, labels=None, problem=None):
        self.kind, self.spec, self.datasets, self.labels = kind, spec, datasets, labels
        self.problem = problem

    @property
    def flag(self):
        if self.kind == "state-vector":
            return f"--state {self.spec}"
        return f"--tensors '{self.spec}'" + (" --unit-cell" if self.kind == "unit-cell" else "")


def _open(path):
    import h5py

    path = Path(path)
    if not path.exists():
        raise CheckpointError(f"{path}: no such file")
    if path.is_dir():
        raise CheckpointError(f"{path}: is a directory, expected an HDF5 checkpoint")
    try:
        with open(path, "rb") as f:
            head = f.read(8)
    except OSError as exc:
        raise CheckpointError(f"{path}: cannot be read ({exc.strerror})") from None
    if not h5py.is_hdf5(str(path)):
        what = "empty" if not head else "not an HDF5 file"
        raise CheckpointError(f"{path}: {what} (no HDF5 signature); expected an HDF5 checkpoint")
    try:
        return h5py.File(path, "r")
    except OSError as exc:
        reason = " ".join(str(exc).split())
        hint = " - the file looks truncated (an interrupted copy or write?)" \
            if "truncated" in reason or "eof" in reason.lower() else ""
        raise CheckpointError(f"{path}: not a readable HDF5 file ({reason}){hint}") from None


def _stored_dtype(dset, where):
    """The numeric dtype a dataset reads as; compound (re, im) pairs count as complex."""
    dt = dset.dtype
    if dt.names:
        names = tuple(n.lower() for n in dt.names)
        fields = [dt.fields[n][0] for n in dt.names]
        if len(names) == 2 and names in _COMPLEX_FIELDS and fields[0] == fields[1] \
                and fields[0].kind == "f":
            return np.dtype(np.complex64 if fields[0].itemsize == 4 else np.complex128)
        raise CheckpointError(f"{where}: compound dtype with fields {dt.names} is not a "
                              "complex number; expected fields (r, i), (re, im) or (real, imag)")
    return numeric_dtype(dt, where)


def _reader(dset, dtype):
    """Read the whole of one dataset (never more), combining compound complex parts."""
    where = dset.name

    def read(*_):
        try:
            if dset.dtype.names:
                re_name, im_name = dset.dtype.names
                out = np.empty(dset.shape, dtype=dtype)
                out.real = dset.fields(re_name)[()]
                out.imag = dset.fields(im_name)[()]
                return out
            return dset[()]
        except OSError as exc:
            raise CheckpointError(f"{dset.file.filename}: dataset {where} cannot be read "
                                  f"({' '.join(str(exc).split())}); the file may be "
                                  "truncated or damaged") from None
    return read


def _datasets(f):
    import h5py

    found = []

    def visit(name, obj):
        if isinstance(obj, h5py.Dataset):
            found.append("/" + name)
    f.visititems(visit)
    return found


def _family(f, pattern, paths=None):
    """Datasets matching a ``{site}`` pattern -> (numbers, paths) sorted numerically."""
    if "{site}" not in pattern:
        raise ValueError(f"tensor pattern {pattern!r} has no {{site}} placeholder, "
                         "e.g. /run/psi/T{site}")
    head, _, tail = pattern.partition("{site}")
    regex = re.compile(re.escape(head if head.startswith("/") else "/" + head)
                       + r"(\d+)" + re.escape(tail) + "$")
    hits = {}
    for p in (paths if paths is not None else _datasets(f)):
        m = regex.match(p)
        if m:
            hits[int(m.group(1))] = p
    return dict(sorted(hits.items()))


def _numbering_problem(numbers, pattern):
    if not numbers:
        return f"no datasets match {pattern}"
    start = numbers[0]
    if start not in (0, 1):
        return f"sites in {pattern} start at {start}; expected numbering from 0 or from 1"
    missing = sorted(set(range(start, numbers[-1] + 1)) - set(numbers))
    if missing:
        return (f"site {missing[0]} of {pattern} is missing (found sites {start}.."
                f"{numbers[-1]} with {len(missing)} gap(s))")
    return None


def _chain_candidate(f, pattern, hits, axes, unit_cell=None):
    numbers = list(hits)
    problem = _numbering_problem(numbers, pattern)
    cand = Candidate("mps", pattern, [hits[n] for n in numbers], numbers, problem)
    if problem is None:
        shapes = [f[p].shape for p in cand.datasets]
        where = f"{f.filename}: {pattern}"
        if unit_cell is not True:
            try:
                cand.axes = resolve_axes(shapes, numbers, axes, where=where)
                return cand
            except CheckpointError as exc:
                cand.problem = str(exc)
        if unit_cell is not False:
            from ._cellsource import cell_candidate

            cell_candidate(cand, shapes, numbers, axes, where, unit_cell)
    return cand


def scan(f, local_dim=None, unit_cell=None):
    """All plausible layouts in an open file, from metadata alone.

    Returns
    -------
    found : list of Candidate
        Chain families (a pattern whose members' bonds chain) and state-vector
        datasets (1-D of a length that splits into local dimensions, or N-D with
        small axes) outside any family.
    broken : list of Candidate
        Families of numbered rank-2/3 datasets whose bonds do not chain, with the reason.
    """
    paths = _datasets(f)
    patterns = {}
    for p in paths:
        if f[p].ndim not in (2, 3):
            continue
        for m in _NUMBER.finditer(p):
            pat = p[:m.start()] + "{site}" + p[m.end():]
            patterns.setdefault(pat, {})[int(m.group())] = p
    found, broken, members = [], [], set()
    for pat, hits in patterns.items():
        if len(hits) < 2 and not _single_cell(f, hits):
            continue
        cand = _chain_candidate(f, pat, dict(sorted(hits.items())), None, unit_cell)
        (broken if cand.problem else found).append(cand)
        members.update(cand.datasets)
    for p in paths:
        if p in members:
            continue
        d = f[p]
        try:
            dtype = _stored_dtype(d, p)
        except CheckpointError:
            continue
        if dtype.kind not in "fc":
            continue
        if d.ndim == 1:
            try:
                split_local_dims(d.shape[0], local_dim, p)
            except (CheckpointError, ValueError):
                continue
        elif d.ndim < 2 or not all(2 <= n <= 16 for n in d.shape):
            continue
        found.append(Candidate("state-vector", p, [p]))
    return found, broken


def _single_cell(f, hits):
    """A one-site family is a candidate only as a unit cell (see _cellsource)."""
    from ._cellsource import looks_like_cell

    return any(looks_like_cell([f[p].shape]) for p in hits.values())


def _describe(cands):
    shown = "; ".join(f"{c.kind} {c.spec} ({c.flag})" for c in cands[:_LISTED])
    more = f"; and {len(cands) - _LISTED} more" if len(cands) > _LISTED else ""
    return shown + more


def open_source(path, *, state=None, tensors=None, local_dim=None, axes=None,
                precision="promote", unit_cell=None):
    """Open a checkpoint read-only and return its validated source.

    Parameters
    ----------
    path : str or Path
        HDF5 checkpoint.
    state : str, optional
        Dataset holding a state vector (1-D with ``local_dim``, or shaped (d_1, ..., d_N)).
    tensors : str, optional
        Site tensor pattern with a ``{site}`` placeholder, e.g. ``/run/psi/T{site}``;
        sites numbered consecutively from 0 or 1, ordered numerically.
    local_dim : int or list of int, optional
        Local dimension(s) of a 1-D state vector (default 2).
    axes : str or tuple, optional
        Stored axis order of the site tensors, a permutation of left,phys,right.
        Inferred from how the bonds chain when omitted.
    precision : {"promote", "stored"}
        Profile single-precision data in double precision (default) or as stored.
    unit_cell : bool, optional
        True: read the tensor family as the unit cell of an infinite chain;
        False: never; None (default): a family that is not an open chain is
        a cell when its first left bond equals its last right bond and is not 1.

    Returns
    -------
    ChainSource, CellSource or AmplitudeSource
        Holds the file open; call ``close()`` (or use it as a context manager).

    Raises
    ------
    CheckpointError
        Not HDF5, truncated, no or several layouts, missing dataset or site, wrong
        rank, bonds that do not meet, non-numeric dtype, bad lengths.
    ValueError
        Contradictory or malformed options (both ``state`` and ``tensors``,
        unknown axis word, pattern without ``{site}``).

    Notes
    -----
    Only metadata is read here; data is read by the sweep, one dataset at a time.
    Rank-2 end tensors are read with the axis words minus the missing bond: the
    first site as (phys, right) and the last as (left, phys) in the given order.
    """
    if state is not None and tensors is not None:
        raise ValueError("give either a state dataset or a tensor pattern, not both")
    if axes is not None:
        parse_axes(axes)
    f = _open(path)
    try:
        src = _pick(f, Path(path), state, tensors, local_dim, axes, precision, unit_cell)
    except BaseException:
        f.close()
        raise
    src.close = f.close
    return src


def _pick(f, path, state, tensors, local_dim, axes, precision, unit_cell=None):
    if state is not None:
        name = state if state.startswith("/") else "/" + state
        return _state_source(f, path, name, local_dim, precision)
    if tensors is not None:
        hits = _family(f, tensors)
        cand = _chain_candidate(f, tensors, hits, axes, unit_cell)
        if cand.problem:
            raise CheckpointError(cand.problem if cand.problem.startswith(str(f.filename))
                                  else f"{path}: {cand.problem}")
        return _chain_source(f, path, cand, precision)
    cands, broken = scan(f, local_dim, unit_cell)
    if not cands and broken:
        problem = broken[0].problem
        raise CheckpointError(f"{problem}; or name another layout with --state / --tensors"
                              if problem.startswith(str(f.filename)) else f"{path}: {problem}")
    if not cands:
        raise CheckpointError(f"{path}: found no state-vector dataset and no chain of site "
                              "tensors; name the layout with --state DATASET or "
                              "--tensors PATTERN")
    if len(cands) > 1:
        raise CheckpointError(f"{path}: several layouts found: {_describe(cands)}; "
                              "choose one with the flag shown")
    cand = cands[0]
    if cand.kind == "state-vector":
        return _state_source(f, path, cand.spec, local_dim, precision)
    if axes is not None:
        cand = _chain_candidate(f, cand.spec, dict(zip(cand.labels, cand.datasets)), axes,
                                unit_cell)
        if cand.problem:
            raise CheckpointError(cand.problem)
    return _chain_source(f, path, cand, precision)


def _state_source(f, path, name, local_dim, precision):
    import h5py

    obj = f.get(name)
    if not isinstance(obj, h5py.Dataset):
        listed = ", ".join(_datasets(f)[:_LISTED]) or "none"
        raise CheckpointError(f"{path}: no dataset {name}; datasets here: {listed}")
    where = f"{path}:{name}"
    dtype = _stored_dtype(obj, where)
    if obj.ndim == 1:
        dims = split_local_dims(obj.shape[0], local_dim, where)
    elif obj.ndim >= 2:
        dims = list(obj.shape)
        if local_dim is not None and np.atleast_1d(local_dim).tolist() not in (dims, dims[:1]):
            raise CheckpointError(f"{where}: shaped {obj.shape}, which does not match "
                                  f"--local-dim {local_dim}")
    else:
        raise CheckpointError(f"{where}: a scalar, expected a state vector")
    return AmplitudeSource(dims, dtype, _reader(obj, dtype), where, precision)


def _chain_source(f, path, cand, precision):
    dsets = [f[p] for p in cand.datasets]
    dtypes = [_stored_dtype(d, f"{path}:{d.name}") for d in dsets]
    dtype = np.result_type(*dtypes)
    readers = [_reader(d, t) for d, t in zip(dsets, dtypes)]
    if cand.kind == "unit-cell":
        from ._cellsource import CellSource

        return CellSource([d.shape for d in dsets], dtype, lambda i: readers[i](), cand.labels,
                          cand.axes, f"{path}:{cand.spec}", precision, cand.detection)
    return ChainSource([d.shape for d in dsets], dtype, lambda i: readers[i](), cand.labels,
                       cand.axes, f"{path}:{cand.spec}", precision)
