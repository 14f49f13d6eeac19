"""Mixed-state sources: a density matrix as an MPO, or a purification with one ancilla per site.

Site tensors have four axes named by words: ``left,ket,bra,right`` (any order)
for a density matrix rho (kind "density-matrix"), ``left,phys,ancilla,right``
for a purification |psi> whose partial trace over the ancillas is rho (kind
"purified").  End tensors may drop their bond of 1 (rank 3).

Which words apply is found from, in order:

1. the ``axes`` option (``--axes``), checked against the shapes;
2. an ``axes`` attribute (comma-separated words) on the first site dataset or
   on the group holding the family;
3. a ``kind`` attribute ``"density-matrix"`` there: the two bond axes are the
   ones that chain (with 1 at the open ends), left,ket,bra,right itself when
   it chains; of the other two the first stored is read as ket (the
   entropies of rho and rho^T agree, so the choice cannot change a result).

A purification has no shape-only rule (phys and ancilla may have the same
size), so without an ``axes`` option or attribute a rank-4 family is refused
with a message saying what to set.
"""

from itertools import permutations

import numpy as np

from ._errors import CheckpointError
from ._source import ChainSource, parse_axes

__all__ = ["MixedSource", "MIXED_WORDS", "mixed_axes", "stored_hint",
           "is_mixed_family", "kind_of"]

MIXED_WORDS = {"density-matrix": ("left", "ket", "bra", "right"),
               "purified": ("left", "phys", "ancilla", "right")}
_ASK = ("rank-4 site tensors hold a density matrix or a purification; name their axes with "
        "--axes left,ket,bra,right or --axes left,phys,ancilla,right (any order), or write "
        "an 'axes' attribute on the datasets")


def is_mixed_family(shapes):
    """True when a family's inner tensors are rank 4 (for two sites: either is)."""
    inner = shapes[1:-1]
    return all(len(s) == 4 for s in inner) if inner else any(len(s) == 4 for s in shapes)


def kind_of(words):
    """'density-matrix' or 'purified' for four axis words."""
    return "density-matrix" if "ket" in words else "purified"


def _named(shape, words, first, last):
    """Stored shape -> dict word: size; rank-3 ends get their missing bond of 1."""
    if len(shape) == 4:
        return dict(zip(words, shape))
    if len(shape) == 3 and (first or last):
        drop = "left" if first else "right"
        named = dict(zip([w for w in words if w != drop], shape))
        named[drop] = 1
        return named
    return None


def _problem(shapes, labels, words):
    """First reason the shapes are not a mixed-state chain under ``words``, or None."""
    n = len(shapes)
    kind = kind_of(words)
    inner = MIXED_WORDS[kind][1:3]
    prev = None
    for i, shape in enumerate(shapes):
        named = _named(shape, words, i == 0, i == n - 1)
        if named is None:
            return (f"site {labels[i]}: tensor has rank {len(shape)} {tuple(shape)}, expected "
                    "rank 4 (or 3 at an end of the chain) for axes " + ",".join(words))
        for w in inner:
            if named[w] < 1:
                return f"site {labels[i]}: {w} axis has size {named[w]}, expected at least 1"
        if kind == "density-matrix" and named["ket"] != named["bra"]:
            return (f"site {labels[i]}: ket axis has size {named['ket']} but bra axis "
                    f"{named['bra']}; a density matrix needs equal sizes (are the axes "
                    "left,phys,ancilla,right?)")
        if i == 0 and named["left"] != 1:
            return (f"site {labels[0]}: left bond is {named['left']}, expected 1 at the open "
                    f"end of the chain (shape {tuple(shape)}, axes {','.join(words)})")
        if i == n - 1 and named["right"] != 1:
            return (f"site {labels[-1]}: right bond is {named['right']}, expected 1 at the "
                    f"open end of the chain (shape {tuple(shape)}, axes {','.join(words)})")
        if prev is not None and named["left"] != prev:
            return (f"site {labels[i]}: left bond {named['left']} does not meet site "
                    f"{labels[i - 1]}'s right bond {prev}")
        prev = named["right"]
    return None


def _from_kind(shapes, labels, where):
    """Density-matrix axis words found from how the bonds chain (ket before bra)."""
    rank = max(len(s) for s in shapes)
    fits = []
    for order in permutations(MIXED_WORDS["density-matrix"]):
        if order.index("ket") < order.index("bra") and len(order) == rank \
                and _problem(shapes, labels, order) is None:
            fits.append(order)
    if len(fits) == 1 or MIXED_WORDS["density-matrix"] in fits:
        return MIXED_WORDS["density-matrix"] if MIXED_WORDS["density-matrix"] in fits \
            else fits[0]
    if not fits:
        raise CheckpointError(f"{where}: marked kind 'density-matrix' but no axis order makes "
                              "the bonds chain; " + _ASK)
    listed = "; ".join(",".join(w) for w in fits)
    raise CheckpointError(f"{where}: the bonds chain under several axis orders ({listed}); "
                          "choose one with --axes")


def mixed_axes(shapes, labels, axes=None, hint=None, where="chain"):
    """Axis words of a rank-4 family: the option, else the stored hint, checked.

    Parameters
    ----------
    shapes : list of tuple
    labels : list
        Site labels for messages.
    axes : str or tuple, optional
        The ``axes`` option.
    hint : dict, optional
        Stored attributes: ``axes`` (text) and/or ``kind``.
    where : str
        File and pattern for messages.

    Raises
    ------
    CheckpointError
        No way to tell the axes, shapes that do not chain, ket and bra of
        different sizes, an axis of size 0.
    ValueError
        Malformed axis words in the option.
    """
    if len(shapes) < 2:
        raise CheckpointError(f"{where}: found {len(shapes)} site tensor(s); a chain needs at "
                              "least 2 sites to have a cut")
    hint = hint or {}
    if axes is None and hint.get("axes") is not None:
        try:
            axes = parse_axes(str(hint["axes"]))
        except ValueError as exc:
            raise CheckpointError(f"{where}: stored 'axes' attribute: {exc}") from None
    if axes is None:
        if str(hint.get("kind", "")).lower() == "density-matrix":
            return _from_kind(shapes, labels, where)
        raise CheckpointError(f"{where}: {_ASK}")
    words = parse_axes(axes)
    if len(words) != 4:
        raise CheckpointError(f"{where}: axes {','.join(words)} name three axes but the site "
                              "tensors have rank 4; " + _ASK.split("; ", 1)[1])
    problem = _problem(shapes, labels, words)
    if problem:
        raise CheckpointError(f"{where}: {problem}")
    return words


def stored_hint(dset):
    """The ``axes``/``kind`` attributes of a site dataset or its group (metadata only)."""
    out = {}
    for obj in (dset, dset.parent):
        for key in ("axes", "kind"):
            if key not in out and key in obj.attrs:
                value = obj.attrs[key]
                out[key] = value.decode() if isinstance(value, bytes) else value
    return out


class MixedSource(ChainSource):
    """Site tensors of a density-matrix MPO or of a purification, read one at a time.

    Parameters are those of :class:`~bondscope._source.ChainSource`, with four
    axis words.  ``tensor4(i)`` returns site i shaped (left, ket, bra, right) or
    (left, phys, ancilla, right); ``tensor(i)`` the same with the two middle
    axes merged, (left, d * d', right), so the pure-state sweeps see an MPS:
    the vectorised rho for a density matrix, the purification itself otherwise.

    Attributes
    ----------
    kind : {"density-matrix", "purified"}
    local_dims : list of int
        Physical dimension per site.
    ancilla_dims : list of int
        Ancilla (purified) or bra (density-matrix) dimension per site.
    """

    def _canonical_shapes(self):
        """Merged (left, d * d', right) per site; keeps the four-axis shapes in ``shapes4``."""
        self.kind = kind_of(self.axes)
        canon = MIXED_WORDS[self.kind]
        n = len(self.stored_shapes)
        self.shapes4 = [tuple(_named(s, self.axes, i == 0, i == n - 1)[w] for w in canon)
                        for i, s in enumerate(self.stored_shapes)]
        return [(a, p * q, b) for a, p, q, b in self.shapes4]

    @property
    def local_dims(self):
        return [s[1] for s in self.shapes4]

    @property
    def ancilla_dims(self):
        return [s[2] for s in self.shapes4]

    def tensor4(self, i):
        """Site i shaped (left, ket, bra, right) / (left, phys, ancilla, right)."""
        raw = self._raw(i)
        canon = MIXED_WORDS[self.kind]
        words = self.axes if raw.ndim == 4 else \
            [w for w in self.axes if w != ("left" if i == 0 else "right")]
        a = raw.transpose([words.index(w) for w in canon if w in words])
        return np.ascontiguousarray(a.reshape(self.shapes4[i]), dtype=self.compute_dtype)

    def tensor(self, i):
        """Site i with the two middle axes merged: (left, d * d', right); unlike an MPS
        site never rescaled (the Rényi-2 sweeps rescale every step themselves)."""
        return self.tensor4(i).reshape(self.shapes[i])
