"""Sources: validated site tensors or amplitudes, read lazily.

A source knows shapes and dtype from metadata alone; data is read one tensor
at a time when the sweep asks for it, and checked for NaN/Inf as it arrives.
"""

from itertools import permutations
from math import prod

import numpy as np

from ._errors import CheckpointError
from ._exponent import amplitude_shift, shifted, tensor_shift
from ._options import PRECISIONS
from ._vectorshape import power_hint

__all__ = ["ChainSource", "AmplitudeSource", "AXIS_WORDS", "WORD_SETS", "parse_axes",
           "chain_from_arrays", "amplitudes_from_array", "compute_dtype", "numeric_dtype",
           "source_eps"]

AXIS_WORDS = ("left", "phys", "right")
# pure states, density matrices (bondscope._mixed) and purifications
WORD_SETS = (AXIS_WORDS, ("left", "ket", "bra", "right"), ("left", "phys", "ancilla", "right"))
_WORD_HINT = ("use a permutation of left,phys,right (a pure state), left,ket,bra,right (a "
              "density matrix) or left,phys,ancilla,right (a purification)")


def parse_axes(text):
    """'left,phys,right' (any permutation, or of a set in WORD_SETS) -> tuple of words."""
    words = tuple(w.strip().lower() for w in text.split(",")) if isinstance(text, str) \
        else tuple(text)
    for w in words:
        if not any(w in ws for ws in WORD_SETS):
            raise ValueError(f"unknown axis word {w!r} in axes {','.join(words)}; {_WORD_HINT}")
    if not any(sorted(words) == sorted(ws) for ws in WORD_SETS):
        raise ValueError(f"axes {','.join(words)} is not a permutation of one word set; "
                         f"{_WORD_HINT}")
    return words


def numeric_dtype(dtype, where):
    """Check a stored dtype is real or complex numbers; return it as a numpy dtype."""
    dtype = np.dtype(dtype)
    if dtype.kind in "fciu" and dtype.itemsize <= 16:
        return dtype
    raise CheckpointError(f"{where}: dtype {dtype} is not numeric; expected real or complex "
                          "floating-point numbers")


def compute_dtype(dtype, precision="promote"):
    """The dtype the sweep works in: float64/complex128, or the stored single precision.

    Raises
    ------
    ValueError
        ``precision`` is not one of ``promote``, ``stored``.
    """
    if precision not in PRECISIONS:
        raise ValueError(f"precision (--precision) must be one of {', '.join(PRECISIONS)}, "
                         f"found {precision!r}")
    dtype = np.dtype(dtype)
    if precision == "stored" and dtype in (np.float32, np.complex64):
        return dtype
    return np.dtype(np.complex128 if dtype.kind == "c" else np.float64)


def source_eps(src):
    """Relative precision of a source's numbers: eps of the coarser of its stored dtype
    and its compute dtype (integers are exact; a float32 state is known to float32 eps
    even when computed in double)."""
    dtypes = [np.dtype(src.compute_dtype)]
    if np.dtype(src.dtype).kind in "fc":
        dtypes.append(np.dtype(src.dtype))
    return max(float(np.finfo(d).eps) for d in dtypes)


def _canonical(shape, words, first, last):
    """Stored shape -> (left, phys, right) under the axis words; rank-2 ends get a bond of 1."""
    if len(shape) == 3:
        named = dict(zip(words, shape))
    elif len(shape) == 2 and (first or last):
        drop = "left" if first else "right"
        named = dict(zip([w for w in words if w != drop], shape))
        named[drop] = 1
    else:
        return None
    return named["left"], named["phys"], named["right"]


def _chain_problem(shapes, labels, words):
    """(first reason the shapes do not form an open chain under ``words`` or None,
    number of checks passed before it: ranks, left end, each bond, right end)."""
    n = len(shapes)
    canon = []
    for i, shape in enumerate(shapes):
        c = _canonical(shape, words, i == 0, i == n - 1)
        if c is None:
            allowed = "3 (or 2 at an end of the chain)"
            return (f"site {labels[i]}: tensor has rank {len(shape)} {tuple(shape)}, "
                    f"expected rank {allowed}"), i
        canon.append(c)
    if canon[0][0] != 1:
        return (f"site {labels[0]}: left bond is {canon[0][0]}, expected 1 at the open end "
                f"of the chain (shape {tuple(shapes[0])}, axes {','.join(words)})"), n
    for i in range(1, n):
        if canon[i][0] != canon[i - 1][2]:
            return (f"site {labels[i]}: left bond {canon[i][0]} does not meet site "
                    f"{labels[i - 1]}'s right bond {canon[i - 1][2]} (the bond between sites "
                    f"{labels[i - 1]} and {labels[i]})"), n + i
    if canon[-1][2] != 1:
        return (f"site {labels[-1]}: right bond is {canon[-1][2]}, expected 1 at the open end "
                f"of the chain (shape {tuple(shapes[-1])}, axes {','.join(words)})"), 2 * n
    return None, 2 * n + 1


def resolve_axes(shapes, labels, axes=None, where="chain"):
    """Axis words for a chain: the given ones (checked) or the unambiguous inferred ones.

    Raises
    ------
    CheckpointError
        Shapes do not chain, or several orders chain and the default is not one.
    """
    if len(shapes) < 2:
        raise CheckpointError(f"{where}: found {len(shapes)} site tensor(s); a chain needs at "
                              "least 2 sites to have a cut")
    for label, shape in zip(labels, shapes):
        if 0 in shape:
            raise CheckpointError(f"{where}: site {label}: tensor shaped {tuple(shape)} has an "
                                  "axis of length 0; expected bonds and local dimension >= 1")
    if axes is not None:
        words = parse_axes(axes)
        if len(words) != 3:
            raise CheckpointError(f"{where}: axes {','.join(words)} name four axes but the site "
                                  f"tensors have rank {max(len(s) for s in shapes)}; use "
                                  "left,phys,right")
        problem = _chain_problem(shapes, labels, words)[0]
        if problem:
            raise CheckpointError(f"{where}: {problem}")
        return words
    tried = {w: _chain_problem(shapes, labels, w) for w in permutations(AXIS_WORDS)}
    fits = [w for w, (problem, _) in tried.items() if problem is None]
    if AXIS_WORDS in fits or len(fits) == 1:
        return AXIS_WORDS if AXIS_WORDS in fits else fits[0]
    if not fits:
        # blame the order that chains furthest (the stored order, bar the fault)
        best = max(tried, key=lambda w: (tried[w][1], w == AXIS_WORDS))
        raise CheckpointError(f"{where}: {tried[best][0]} (axes {','.join(best)}, the order "
                              "that chains furthest); no axis order makes the bonds chain")
    listed = "; ".join(",".join(w) for w in fits)
    raise CheckpointError(f"{where}: the bonds chain under several axis orders ({listed}); "
                          "choose one with --axes")


class _Held:
    """Closing and context management for sources that may hold a file open."""

    def close(self):
        """Release the checkpoint file (no-op for in-memory sources)."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


class ChainSource(_Held):
    """Site tensors of an open-boundary MPS, read one at a time.

    Parameters
    ----------
    shapes : list of tuple
        Stored shape of each site tensor.
    dtype : numpy dtype
        Stored dtype (numeric).
    read : callable
        ``read(i)`` returns site i's stored array (any layout of ``shapes[i]``).
    labels : list
        Site labels for messages (the checkpoint's own numbering).
    axes : tuple of str
        Stored axis order (words), already resolved.
    name : str
        Description for messages and the profile's ``source`` field.

    Notes
    -----
    ``tensor(i)`` returns an array shaped (left, phys, right) in the compute
    dtype; only that tensor is in memory.  A tensor whose size would overflow
    or underflow the sweep's products is returned times an exact power of two
    (:func:`bondscope._exponent.tensor_shift`); ``scale_exponent`` sums the
    exponents removed from the tensors read so far.
    """

    kind = "mps"

    def __init__(self, shapes, dtype, read, labels, axes, name, precision="promote"):
        self.stored_shapes = [tuple(int(x) for x in s) for s in shapes]
        self.axes = tuple(axes)
        self.shapes = self._canonical_shapes()
        self.dtype = np.dtype(dtype)
        self.compute_dtype = compute_dtype(self.dtype, precision)
        self.labels = list(labels)
        self.name = name
        self._read = read
        self._shifts = {}

    def _canonical_shapes(self):
        """(left, phys, right) per site from the stored shapes and axis words."""
        n = len(self.stored_shapes)
        return [_canonical(s, self.axes, i == 0, i == n - 1)
                for i, s in enumerate(self.stored_shapes)]

    def _raw(self, i):
        """Site i as stored, its shape and values checked."""
        raw = np.asarray(self._read(i))
        if raw.shape != self.stored_shapes[i]:
            raise CheckpointError(f"{self.name}: site {self.labels[i]} read with shape "
                                  f"{raw.shape}, its metadata said {self.stored_shapes[i]}")
        if not np.isfinite(raw).all():
            raise CheckpointError(f"{self.name}: site {self.labels[i]} holds NaN or Inf values")
        return raw

    @property
    def scale_exponent(self):
        """log2 of (stored state / state the tensors returned describe)."""
        return sum(self._shifts.values())

    @property
    def sites(self):
        return len(self.shapes)

    @property
    def local_dims(self):
        return [s[1] for s in self.shapes]

    @property
    def bond_dims(self):
        """Internal bond dimensions, one per cut (length N-1)."""
        return [s[2] for s in self.shapes[:-1]]

    @property
    def nbytes(self):
        return sum(prod(s) for s in self.shapes) * self.dtype.itemsize

    def tensor(self, i):
        """Site i as an array shaped (left, phys, right) in the compute dtype."""
        raw = self._raw(i)
        words = self.axes if raw.ndim == 3 else \
            [w for w in self.axes if w != ("left" if i == 0 else "right")]
        a = raw.transpose([words.index(w) for w in AXIS_WORDS if w in words])
        a = np.ascontiguousarray(a.reshape(self.shapes[i]), dtype=self.compute_dtype)
        self._shifts[i] = shift = tensor_shift(a, self.sites)
        return shifted(a, shift)


class AmplitudeSource(_Held):
    """A state vector over N sites with local dimensions d_1..d_N.

    Parameters
    ----------
    local_dims : list of int
    dtype : numpy dtype
        Stored dtype.
    read : callable
        ``read()`` returns the amplitudes (any shape with prod(local_dims) entries,
        site 1 the slowest index).
    name : str
    owned : bool
        ``read()`` returns a fresh array the source may overwrite (a file read);
        otherwise (the caller's array) rescaling makes a copy.

    Notes
    -----
    Amplitudes whose sum of squares would overflow or underflow are returned
    times an exact power of two (:func:`bondscope._exponent.amplitude_shift`),
    recorded in ``scale_exponent``.
    """

    kind = "state-vector"

    def __init__(self, local_dims, dtype, read, name, precision="promote", owned=False):
        self.local_dims = [int(d) for d in local_dims]
        if min(self.local_dims, default=0) < 1:
            raise CheckpointError(f"{name}: shaped {tuple(self.local_dims)}, which holds no "
                                  "amplitudes; expected every axis (local dimension) >= 1")
        self.dtype = np.dtype(dtype)
        self.compute_dtype = compute_dtype(self.dtype, precision)
        self.name = name
        self._read = read
        self._owned = owned
        self.scale_exponent = 0

    @property
    def sites(self):
        return len(self.local_dims)

    @property
    def size(self):
        return prod(self.local_dims)

    @property
    def nbytes(self):
        return self.size * self.dtype.itemsize

    def amplitudes(self):
        """All amplitudes as a 1-D array in the compute dtype."""
        raw = np.asarray(self._read())
        if raw.size != self.size:
            raise CheckpointError(f"{self.name}: read {raw.size} amplitudes, expected "
                                  f"{self.size}")
        a = np.ascontiguousarray(raw.reshape(-1), dtype=self.compute_dtype)
        if not np.isfinite(a).all():
            raise CheckpointError(f"{self.name}: the state vector holds NaN or Inf values")
        self.scale_exponent = amplitude_shift(a)
        mine = self._owned or not np.may_share_memory(a, raw)
        return shifted(a, self.scale_exponent, inplace=mine)


def split_local_dims(size, local_dim, where):
    """Local dimensions of a 1-D state of ``size`` amplitudes.

    ``local_dim`` is one integer d (size must be a power of d) or a list whose
    product is size.
    """
    if local_dim is None:
        local_dim = 2
    if isinstance(local_dim, (list, tuple)):
        dims = [int(d) for d in local_dim]
        if any(d < 1 for d in dims) or prod(dims) != size:
            raise CheckpointError(f"{where}: length {size} is not the product of the local "
                                  f"dimensions {','.join(map(str, dims))} (= {prod(dims)})")
        return dims
    d = int(local_dim)
    if d < 2:
        raise ValueError(f"local dimension must be >= 2, found {d}")
    n, rest = 0, size
    while rest > 1 and rest % d == 0:
        rest //= d
        n += 1
    if rest != 1 or n < 2:
        fix = power_hint(size, d) or "set --local-dim (an integer or a comma list per site)"
        raise CheckpointError(f"{where}: length {size} is not a power d^N of the local "
                              f"dimension d={d} with N >= 2; {fix}")
    return [d] * n


def _array(a, where):
    if not isinstance(a, np.ndarray):
        a = np.asarray(a)
    numeric_dtype(a.dtype, where)
    return a


def array_family(tensors):
    """(arrays, compute-ready dtype, labels, shapes) of a list of in-memory site tensors."""
    if isinstance(tensors, np.ndarray) or not len(tensors):
        raise TypeError("site tensors must be a non-empty list of arrays")
    arrays = [_array(t, f"site {i}") for i, t in enumerate(tensors)]
    dtype = np.result_type(*arrays)
    if dtype.kind not in "fc":
        dtype = np.dtype(np.float64)
    return arrays, dtype, list(range(len(arrays))), [a.shape for a in arrays]


def chain_from_arrays(tensors, axes=None, precision="promote"):
    """A ChainSource (or, for rank-4 tensors, a MixedSource) over in-memory site tensors."""
    arrays, dtype, labels, shapes = array_family(tensors)
    from ._mixed import MixedSource, is_mixed_family, mixed_axes

    # rank-4 tensors: a density matrix or a purification (bondscope._mixed)
    resolve, kind = (mixed_axes, MixedSource) if is_mixed_family(shapes) else \
        (resolve_axes, ChainSource)
    words = resolve(shapes, labels, axes, where="site tensors")
    return kind(shapes, dtype, arrays.__getitem__, labels, words, "<arrays>", precision)


def amplitudes_from_array(state, local_dim=None, precision="promote"):
    """An AmplitudeSource over an in-memory state vector (1-D, or shaped (d_1, ..., d_N))."""
    a = _array(state, "state vector")
    if a.ndim == 1:
        dims = split_local_dims(a.size, local_dim, "state vector")
    else:
        dims = list(a.shape)
        if local_dim is not None and list(np.atleast_1d(local_dim)) not in ([*dims], [dims[0]]):
            raise ValueError(f"state shaped {a.shape} does not match local_dim {local_dim}")
        if len(dims) < 2:
            raise CheckpointError(f"state vector shaped {a.shape}: needs at least 2 sites")
    dtype = a.dtype if a.dtype.kind in "fc" else np.dtype(np.float64)
    return AmplitudeSource(dims, dtype, lambda: a, "<array>", precision)
