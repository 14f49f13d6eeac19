"""Unit-cell sources: n site tensors of an infinite chain whose bonds close into a cell.

A family of site tensors is a unit cell when every tensor has rank 3, each
left bond meets the previous right bond and the last right bond meets the
first left bond.  Auto-detection takes a family as a cell when it does not
form an open chain and, in the stored axis order (left, phys, right unless
``axes`` is given), its first left bond equals its last right bond and is
not 1; ``unit_cell=True`` (``--unit-cell``) asks for it explicitly (a cell
of bond 1, a product state, included).
"""

from itertools import permutations

import numpy as np

from ._errors import CheckpointError
from ._source import AXIS_WORDS, ChainSource, array_family, parse_axes

__all__ = [
    "CellSource",
    "cell_candidate",
    "cell_from_arrays",
    "cell_problem",
    "looks_like_cell",
    "resolve_cell_axes",
    "tensors_source",
]


def cell_problem(shapes, labels, words):
    """First reason the shapes do not close into a unit cell under ``words``, or None."""
    canon = []
    for shape, label in zip(shapes, labels):
        if len(shape) != 3:
            return (f"site {label}: tensor has rank {len(shape)} {tuple(shape)}, expected "
                    "rank 3 (left, phys, right) in a unit cell")
        canon.append(dict(zip(words, shape)))
    for i in range(len(canon)):
        prev = canon[i - 1]
        if canon[i]["left"] != prev["right"]:
            where = "the last site" if i == 0 else "site"
            return (f"site {labels[i]}: left bond {canon[i]['left']} does not meet {where} "
                    f"{labels[i - 1]}'s right bond {prev['right']}, so the bonds do not close "
                    "into a unit cell")
    return None


def looks_like_cell(shapes, words=AXIS_WORDS):
    """Auto-detection rule: rank 3, first left bond == last right bond != 1."""
    if not shapes or len(words) != 3 or any(len(s) != 3 for s in shapes):
        return False
    first, last = dict(zip(words, shapes[0])), dict(zip(words, shapes[-1]))
    return first["left"] == last["right"] != 1


def resolve_cell_axes(shapes, labels, axes=None, where="unit cell"):
    """Axis words under which ``shapes`` close into a cell (given ones checked).

    Raises
    ------
    CheckpointError
        The bonds do not close, or several orders close and the default is not one.
    """
    if not shapes:
        raise CheckpointError(f"{where}: found no site tensors")
    if axes is not None:
        words = parse_axes(axes)
        problem = cell_problem(shapes, labels, words)
        if problem:
            raise CheckpointError(f"{where}: {problem}")
        return words
    fits = [w for w in permutations(AXIS_WORDS) if cell_problem(shapes, labels, w) is None]
    if AXIS_WORDS in fits:
        return AXIS_WORDS
    if len(fits) == 1:
        return fits[0]
    if not fits:
        raise CheckpointError(f"{where}: {cell_problem(shapes, labels, AXIS_WORDS)} (set "
                              "--axes if the order is unusual)")
    listed = "; ".join(",".join(w) for w in fits)
    raise CheckpointError(f"{where}: the bonds close into a cell under several axis orders "
                          f"({listed}); choose one with --axes")


class CellSource(ChainSource):
    """The n site tensors of an infinite chain's unit cell, read one at a time.

    Parameters are those of :class:`~bondscope._source.ChainSource`; every
    tensor has rank 3 and the bonds close (validated by the caller).

    Attributes
    ----------
    detection : str
        "requested" (``unit_cell=True``) or "detected" (auto-detection).
    """

    kind = "unit-cell"

    def __init__(self, shapes, dtype, read, labels, axes, name, precision="promote",
                 detection="detected"):
        super().__init__(shapes, dtype, read, labels, axes, name, precision)
        self.detection = detection

    @property
    def bond_dims(self):
        """Bond dimension after each cell site (length n; the last is between cells)."""
        return [s[2] for s in self.shapes]


def cell_from_arrays(tensors, axes=None, precision="promote", detection="requested"):
    """A CellSource over in-memory site tensors (list of rank-3 arrays)."""
    arrays, dtype, labels, shapes = array_family(tensors)
    words = resolve_cell_axes(shapes, labels, axes, where="site tensors")
    return CellSource(shapes, dtype, arrays.__getitem__, labels, words, "<arrays>", precision,
                      detection)


def cell_candidate(cand, shapes, labels, axes, where, unit_cell):
    """Turn a checkpoint family that is not an open chain into a unit-cell candidate.

    ``unit_cell`` True always tries; None tries when :func:`looks_like_cell`
    holds under some axis order.  On failure ``cand.problem`` says why.
    """
    if not unit_cell and not looks_like_cell(shapes, parse_axes(axes) if axes else AXIS_WORDS):
        return
    try:
        cand.axes = resolve_cell_axes(shapes, labels, axes, where=where)
    except CheckpointError as exc:
        cand.problem = str(exc)
        return
    cand.kind, cand.problem = "unit-cell", None
    cand.detection = "requested" if unit_cell else "detected"


def tensors_source(tensors, axes=None, precision="promote", unit_cell=None):
    """A ChainSource or CellSource over a list of in-memory site tensors.

    ``unit_cell`` as in :class:`~bondscope.ProfileOptions`: True reads a cell,
    False a chain, None a chain unless the tensors only close into a cell
    with a first left bond other than 1.
    """
    from ._source import chain_from_arrays

    if unit_cell:
        return cell_from_arrays(tensors, axes, precision, "requested")
    try:
        return chain_from_arrays(tensors, axes, precision)
    except CheckpointError:
        shapes = [np.shape(t) for t in tensors]
        if unit_cell is None and looks_like_cell(shapes, parse_axes(axes) if axes else AXIS_WORDS):
            return cell_from_arrays(tensors, axes, precision, "detected")
        raise
