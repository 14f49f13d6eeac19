"""Checkpoints: HDF5 files opened read-only, searched by metadata, read one tensor at a time."""

import re
import stat
from pathlib import Path

import numpy as np

from ._errors import CheckpointError, one_line
from ._linked import refuse_missing_sources
from ._readcost import read_buffer_bytes
from ._source import AmplitudeSource, ChainSource, numeric_dtype, resolve_axes, split_local_dims
from ._vectorshape import pairs_as_complex, power_hint, vector_shape

__all__ = ["open_source", "scan", "Candidate"]

_NUMBER = re.compile(r"\d+")
_COMPLEX_FIELDS = (("r", "i"), ("re", "im"), ("real", "imag"))
_LISTED = 8
# longer digit runs are not site numbers (and int() refuses past 4300 digits)
_SITE_DIGITS = 18


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
    mode = path.stat().st_mode
    if not stat.S_ISREG(mode):
        raise CheckpointError(f"{path}: is a {_file_kind(mode)}, not a regular file; expected "
                              "an HDF5 checkpoint (copy the data to a file first)")
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
        reason = one_line(exc)
        hint = " - the file looks truncated (an interrupted copy or write?)" \
            if "truncated" in reason or "eof" in reason.lower() else ""
        raise CheckpointError(f"{path}: not a readable HDF5 file ({reason}){hint}") from None


def _file_kind(mode):
    kinds = ((stat.S_ISFIFO, "FIFO (named pipe)"), (stat.S_ISSOCK, "socket"),
             (stat.S_ISCHR, "character device"), (stat.S_ISBLK, "block device"))
    return next((name for test, name in kinds if test(mode)), "special file")


def _short(name, keep=60):
    """A name cut to about ``keep`` characters for messages."""
    return name if len(name) <= keep else f"{name[:keep - 20]}...{name[-16:]} " \
        f"({len(name)} characters)"


def _site_number(digits):
    return int(digits) if len(digits.lstrip("0")) <= _SITE_DIGITS else None


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
        except (OSError, RuntimeError) as exc:
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
    try:
        f.visititems(visit)
    except (OSError, RuntimeError, KeyError) as exc:
        raise unreadable_structure(f.filename, exc) from None
    return found


def unreadable_structure(path, exc):
    """CheckpointError for groups or links HDF5 could not walk (a file rewritten while read)."""
    return CheckpointError(f"{path}: the file's groups could not be read "
                           f"({one_line(exc)}); if another program is writing it, "
                           "retry when it has finished, otherwise the file is damaged")


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
            number = _site_number(m.group(1))
            if number is None:
                raise CheckpointError(f"{f.filename}: dataset {_short(p)} matches {pattern} "
                                      f"with a site number of {len(m.group(1))} digits; "
                                      "expected site numbers 0, 1, 2, ...")
            hits[number] = p
    return dict(sorted(hits.items()))


def _numbering_problem(numbers, pattern):
    if not numbers:
        return f"no datasets match {pattern}"
    start = numbers[0]
    if start not in (0, 1):
        return f"sites in {pattern} start at {start}; expected numbering from 0 or from 1"
    # numbers are sorted and distinct: the gaps are counted, never listed
    gaps = numbers[-1] - start + 1 - len(numbers)
    if gaps:
        first = next(start + i for i, n in enumerate(numbers) if n != start + i)
        return (f"site {first} of {pattern} is missing (found sites {start}.."
                f"{numbers[-1]} with {gaps} missing)")
    return None


def _chain_candidate(f, pattern, hits, axes, unit_cell=None):
    numbers = list(hits)
    problem = _numbering_problem(numbers, pattern)
    cand = Candidate("mps", pattern, [hits[n] for n in numbers], numbers, problem)
    if problem is None:
        try:
            shapes = [f[p].shape for p in cand.datasets]
            where = f"{f.filename}: {pattern}"
            from ._mixed import is_mixed_family, kind_of, mixed_axes, stored_hint

            if is_mixed_family(shapes):
                cand.axes = mixed_axes(shapes, numbers, axes, stored_hint(f[cand.datasets[0]]),
                                       where=where)
                cand.kind = kind_of(cand.axes)
                return cand
        except CheckpointError as exc:
            cand.problem = str(exc)
            return cand
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


def scan(f, local_dim=None, axes=None, complex_parts="auto", unit_cell=None):
    """All plausible layouts in an open file, from metadata alone.

    Parameters
    ----------
    f : h5py.File
    local_dim, axes, complex_parts
        As :func:`open_source`: a family is checked under the given axis order.

    Returns
    -------
    found : list of Candidate
        Chain families (a pattern whose members' bonds chain) and state-vector
        datasets (flat of a length that splits into local dimensions, or N-D with
        small axes) outside any family.
    broken : list of Candidate
        Families of numbered rank-2/3 datasets whose bonds do not chain, and
        flat real/complex datasets whose length needs another ``--local-dim``,
        with the reason.
    """
    paths = _datasets(f)
    patterns, oversized = {}, {}
    for p in paths:
        shape = f[p].shape
        if len(shape) not in (2, 3, 4) or _column(shape):
            continue
        for m in _NUMBER.finditer(p):
            pat = p[:m.start()] + "{site}" + p[m.end():]
            number = _site_number(m.group())
            if number is None:
                oversized.setdefault(pat, (p, len(m.group())))
            else:
                patterns.setdefault(pat, {})[number] = p
    found, broken, members = [], [], set()
    for pat, hits in patterns.items():
        if len(hits) + (pat in oversized) < 2 and not _single_cell(f, hits):
            continue
        cand = _chain_candidate(f, pat, dict(sorted(hits.items())), axes, unit_cell)
        if pat in oversized:
            name, digits = oversized[pat]
            cand.problem = (f"{f.filename}: dataset {_short(name)} of {pat} has a site "
                            f"number of {digits} digits; expected site numbers 0, 1, 2, ...")
        (broken if cand.problem else found).append(cand)
        members.update(cand.datasets)
    for p in paths:
        if p not in members:
            cand = _vector_candidate(f[p], p, local_dim, complex_parts)
            if cand is not None:
                (broken if cand.problem else found).append(cand)
    return found, broken


def _single_cell(f, hits):
    """A one-site family is a candidate only as a unit cell (see _cellsource)."""
    from ._cellsource import looks_like_cell

    return any(looks_like_cell([f[p].shape]) for p in hits.values())


def _column(shape):
    """A (D, 1) column or (1, D) row with D > 16: a vector, never an end tensor."""
    return len(shape) == 2 and min(shape) == 1 and max(shape) > 16


def _vector_candidate(d, p, local_dim, complex_parts):
    """A state-vector Candidate for dataset ``d``; with a problem when only --local-dim is
    wrong; None when it is no state vector."""
    try:
        dtype = _stored_dtype(d, p)
        if dtype.kind not in "fc" or d.ndim == 0:
            return None
        amps = vector_shape(d.shape, dtype, complex_parts, p).amplitudes
    except CheckpointError:
        return None
    if len(amps) == 1:
        try:
            split_local_dims(amps[0], local_dim, p)
        except CheckpointError:
            tried = 2 if local_dim is None else local_dim
            hint = power_hint(amps[0], tried) if isinstance(tried, int) else None
            return Candidate("state-vector", p, [p], problem=(
                f"{d.file.filename}: {p} holds {amps[0]} amplitudes; {hint}")) if hint else None
    elif not all(2 <= n <= 16 for n in amps):
        return None
    return Candidate("state-vector", p, [p])


def _describe(cands):
    shown = "; ".join(f"{c.kind} {c.spec} ({c.flag})" for c in cands[:_LISTED])
    more = f"; and {len(cands) - _LISTED} more" if len(cands) > _LISTED else ""
    return shown + more


def open_source(path, *, state=None, tensors=None, local_dim=None, axes=None,
                complex_parts="auto", precision="promote", unit_cell=None):
    """Open a checkpoint read-only and return its validated source.

    Parameters
    ----------
    path : str or Path
        HDF5 checkpoint (a regular file).
    state : str, optional
        Dataset holding a state vector: flat (also a (D, 1) column or (1, D) row)
        with ``local_dim``, or shaped (d_1, ..., d_N).
    tensors : str, optional
        Site tensor pattern with a ``{site}`` placeholder, e.g. ``/run/psi/T{site}``;
        sites numbered consecutively from 0 or 1, ordered numerically.
    local_dim : int or list of int, optional
        Local dimension(s) of a flat state vector (default 2).
    axes : str or tuple, optional
        Stored axis order of the site tensors, a permutation of left,phys,right.
        Inferred from how the bonds chain when omitted; honoured by detection.
        Rank-4 tensors: a permutation of left,ket,bra,right (density matrix) or
        left,phys,ancilla,right (purification), or found from stored
        attributes (:mod:`bondscope._mixed`).
    complex_parts : {"auto", "last-axis", "none"}
        Real and imaginary parts of a state vector in a last axis of length 2:
        found from the shape (a real (D, 2) array with D > 16), forced, or never
        (see :func:`bondscope._vectorshape.vector_shape`).
    precision : {"promote", "stored"}
        Profile single-precision data in double precision (default) or as stored.
    unit_cell : bool, optional
        True: read the tensor family as the unit cell of an infinite chain;
        False: never; None (default): a family that is not an open chain is
        a cell when its first left bond equals its last right bond and is not 1.

    Returns
    -------
    ChainSource, MixedSource, CellSource or AmplitudeSource
        Holds the file open; call ``close()`` (or use it as a context manager).
        ``read_buffer`` is the most memory HDF5 and the (re, im) combination
        need besides one returned array (see :mod:`bondscope._readcost`).

    Raises
    ------
    CheckpointError
        Not a regular HDF5 file, truncated, unreadable groups, no or several
        layouts, missing dataset or site, wrong rank, zero-length axes, bonds
        that do not meet, non-numeric dtype, bad lengths, oversized site numbers.
    ValueError
        Contradictory or malformed options (both ``state`` and ``tensors``,
        unknown axis word, pattern without ``{site}``, local dimension < 2).

    Notes
    -----
    Only metadata is read here; data is read by the sweep, one dataset at a time.
    Rank-2 end tensors are read with the axis words minus the missing bond: the
    first site as (phys, right) and the last as (left, phys) in the given order.
    """
    from ._options import ProfileOptions

    # the options' own checks, with messages naming parameter and flag
    ProfileOptions(state=state, tensors=tensors, local_dim=local_dim, axes=axes,
                   complex_parts=complex_parts, precision=precision)
    f = _open(path)
    try:
        refuse_missing_sources(f, path)
        src = _pick(f, Path(path), state, tensors, local_dim, axes, complex_parts, precision,
                    unit_cell)
    except (OSError, RuntimeError, KeyError) as exc:      # h5py's errors for a changing file
        f.close()
        raise unreadable_structure(path, exc) from None
    except BaseException:
        f.close()
        raise
    src.close = f.close
    return src


def _pick(f, path, state, tensors, local_dim, axes, parts, precision, unit_cell=None):
    if state is not None:
        name = state if state.startswith("/") else "/" + state
        return _state_source(f, path, name, local_dim, parts, precision)
    if tensors is not None:
        hits = _family(f, tensors)
        cand = _chain_candidate(f, tensors, hits, axes, unit_cell)
        if cand.problem:
            raise CheckpointError(cand.problem if cand.problem.startswith(str(f.filename))
                                  else f"{path}: {cand.problem}")
        return _chain_source(f, path, cand, precision)
    cands, broken = scan(f, local_dim, axes, parts, unit_cell)
    if not cands and broken:
        problem = broken[0].problem
        raise CheckpointError(f"{problem}; or name another layout with --state / --tensors"
                              if problem.startswith(str(f.filename)) else f"{path}: {problem}")
    if not cands:
        forced = " (--complex-parts last-axis counts only real datasets with a last axis of " \
            "length 2)" if parts == "last-axis" else ""
        raise CheckpointError(f"{path}: found no state-vector dataset and no chain of site "
                              f"tensors{forced}; name the layout with --state DATASET or "
                              "--tensors PATTERN")
    if len(cands) > 1:
        raise CheckpointError(f"{path}: several layouts found: {_describe(cands)}; "
                              "choose one with the flag shown")
    cand = cands[0]
    if cand.kind == "state-vector":
        return _state_source(f, path, cand.spec, local_dim, parts, precision)
    return _chain_source(f, path, cand, precision)


def _state_source(f, path, name, local_dim, parts, precision):
    import h5py

    obj = f.get(name)
    if not isinstance(obj, h5py.Dataset):
        listed = ", ".join(_short(p) for p in _datasets(f)[:_LISTED]) or "none"
        raise CheckpointError(f"{path}: no dataset {name}; datasets here: {listed}")
    where = f"{path}:{name}"
    dtype = _stored_dtype(obj, where)
    if obj.ndim == 0:
        raise CheckpointError(f"{where}: a scalar, expected a state vector")
    shape = vector_shape(obj.shape, dtype, parts, where)
    if shape.flat:
        dims = split_local_dims(shape.amplitudes[0], local_dim, where)
    else:
        dims = list(shape.amplitudes)
        if local_dim is not None and np.atleast_1d(local_dim).tolist() not in (dims, dims[:1]):
            raise CheckpointError(f"{where}: shaped {obj.shape}, which does not match "
                                  f"--local-dim {local_dim}")
    read, buffer = _reader(obj, dtype), read_buffer_bytes(obj)
    if shape.pairs:
        if dtype not in (np.float32, np.float64):
            buffer += obj.size * 8                    # converted to float64 first
        dtype = np.dtype(np.complex64 if dtype == np.float32 else np.complex128)
        read = _as_complex(read)
    elif obj.dtype.names:
        buffer += obj.size * dtype.itemsize // 2     # one part at a time
    src = AmplitudeSource(dims, dtype, read, where, precision, owned=True)
    src.read_buffer = buffer
    return src


def _as_complex(read):
    return lambda *args: pairs_as_complex(read(*args))


def _chain_source(f, path, cand, precision):
    dsets = [f[p] for p in cand.datasets]
    dtypes = [_stored_dtype(d, f"{path}:{d.name}") for d in dsets]
    dtype = np.result_type(*dtypes)
    readers = [_reader(d, t) for d, t in zip(dsets, dtypes)]
    if cand.kind == "unit-cell":
        from ._cellsource import CellSource

        src = CellSource([d.shape for d in dsets], dtype, lambda i: readers[i](), cand.labels,
                         cand.axes, f"{path}:{cand.spec}", precision, cand.detection)
    else:
        kind = ChainSource
        if len(cand.axes) == 4:
            from ._mixed import MixedSource as kind
        src = kind([d.shape for d in dsets], dtype, lambda i: readers[i](), cand.labels,
                   cand.axes, f"{path}:{cand.spec}", precision)
    src.read_buffer = max(read_buffer_bytes(d) + (d.size * t.itemsize // 2 if d.dtype.names
                                                  else 0) for d, t in zip(dsets, dtypes))
    return src
