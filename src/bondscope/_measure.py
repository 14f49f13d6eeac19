"""Entropy measures of one Schmidt spectrum."""

import math

import numpy as np

__all__ = ["entropy_measures", "spectrum_measures", "renyi_orders", "resolution_floor",
           "kept_rank", "discarded_weight"]

# sum of lambda^2 off 1 by more than this (relative) is not a normalised spectrum
_NORM_SLACK = 1e-6


def resolution_floor(values, route, size):
    """Schmidt values below this are not resolved by ``route``.

    Parameters
    ----------
    values : ndarray, shape (k,)
        Normalised Schmidt values, descending.
    route : {"svd", "gram"}
        ``"svd"``: singular values from orthogonal factorisations, absolute error
        about eps * n * lambda_max.  ``"gram"``: eigenvalues of a reduced density
        matrix, whose weights lambda^2 carry an absolute error about
        eps * n * lambda_max^2, so lambda is resolved only down to
        sqrt(eps * n) * lambda_max.
    size : int
        The dimension n of the decomposed matrix.

    Notes
    -----
    Backward-stable SVD and Hermitian eigensolvers perturb each value by at most
    a small multiple of eps times the largest one (Golub & Van Loan, *Matrix
    Computations*, 4th ed., sections 8.1 and 8.6); the factor n is a safety margin.
    """
    eps = np.finfo(np.float64).eps if values.dtype.itemsize >= 8 else np.finfo(np.float32).eps
    top = float(values[0]) if values.size else 0.0
    if route == "gram":
        return math.sqrt(eps * max(size, 1)) * top
    return eps * max(size, 1) * top


def _weights(values):
    return np.square(np.asarray(values, dtype=np.float64))


def kept_rank(values, bond_dim=None, weight_tol=None):
    """Rank kept when truncating a descending spectrum to ``bond_dim`` and/or ``weight_tol``.

    With ``weight_tol`` it is the smallest rank whose dropped weight
    (sum of lambda^2 beyond it, relative to the total) is <= weight_tol.
    With both, the smaller of the two ranks.
    """
    p = _weights(values)
    k = p.size
    if weight_tol is not None:
        tail = np.cumsum(p[::-1])[::-1] / p.sum()       # tail[j] = weight of values j..end
        ok = np.nonzero(tail <= weight_tol)[0]
        k = int(ok[0]) if ok.size else k
        k = max(k, 1)
    if bond_dim is not None:
        k = min(k, bond_dim)
    return k


def discarded_weight(values, keep):
    """Sum of lambda^2 beyond the first ``keep`` values, relative to the total."""
    p = _weights(values)
    return float(p[keep:].sum() / p.sum())


def renyi_orders(renyi):
    """Rényi orders as the keys they are written under ("2", "0.5", "inf"), validated.

    Parameters
    ----------
    renyi : str, float or sequence of them
        Orders alpha >= 0, or "inf".

    Returns
    -------
    list of str

    Raises
    ------
    ValueError
        An order that is not a number >= 0 or "inf".

    Examples
    --------
    >>> renyi_orders([2, 0.5, "inf"])
    ['2', '0.5', 'inf']
    """
    if isinstance(renyi, (str, int, float)):
        renyi = [renyi]
    out = []
    for a in renyi:
        key = a.strip() if isinstance(a, str) else (str(int(a)) if float(a).is_integer()
                                                     else repr(float(a)))
        try:
            ok = float(key) >= 0
        except ValueError:
            ok = False
        if not ok:
            raise ValueError(f"Renyi order {a!r} (renyi=, --renyi) is not a number >= 0 "
                             "or 'inf'")
        out.append(key)
    return out


def entropy_measures(values, *, renyi=(), base=math.e, floor=0.0):
    """von Neumann and Rényi entropies, rank and levels of one Schmidt spectrum.

    Parameters
    ----------
    values : array_like, shape (k,)
        Schmidt values lambda_i >= 0, normalised so that sum lambda^2 = 1.
    renyi : sequence of str or float
        Rényi orders ("0.5", 2, "inf"); "1" is the von Neumann entropy,
        "0" is ln(rank) with the rank counted above ``floor``, "inf" is -ln lambda_max^2.
    base : float
        Logarithm base of the results (> 1).
    floor : float
        Resolution floor; values at or below it are not counted in the rank or levels.

    Returns
    -------
    dict
        ``entropy``, ``renyi`` (dict keyed by the orders as written), ``schmidt_rank``,
        ``levels`` (ndarray of -ln lambda^2 above the floor).

    Raises
    ------
    ValueError
        Negative, non-finite or unnormalised values, a bad order, base or floor.

    Notes
    -----
    S = -sum p ln p with p = lambda^2; S_alpha = ln(sum p^alpha) / (1 - alpha)
    (Rényi, Proc. 4th Berkeley Symp. 1, 547 (1961)).  Cost O(k).

    Examples
    --------
    >>> m = entropy_measures([2 ** -0.5, 2 ** -0.5], renyi=[2], base=2)
    >>> round(m["entropy"], 12), round(m["renyi"]["2"], 12), m["schmidt_rank"]
    (1.0, 1.0, 2)
    """
    v = np.asarray(values, dtype=np.float64)
    if v.ndim != 1 or not v.size:
        raise ValueError(f"values must be a non-empty 1-D spectrum, found shape {v.shape}")
    if not np.isfinite(v).all() or (v < 0).any():
        raise ValueError("values must be finite Schmidt values >= 0")
    total = float(np.sum(v * v))
    if abs(total - 1.0) > _NORM_SLACK:
        raise ValueError(f"values are not normalised: sum of squares is {total:.12g}, expected 1 "
                         "(divide by the norm first)")
    if not (math.isfinite(base) and base > 1):
        raise ValueError(f"base must be a finite number > 1, found {base!r}")
    if not (math.isfinite(floor) and floor >= 0):
        raise ValueError(f"floor must be a finite number >= 0, found {floor!r}")
    return spectrum_measures(np.sort(v)[::-1], renyi_orders(renyi), base, floor)


def spectrum_measures(values, orders, base, floor):
    """:func:`entropy_measures` for trusted input: a normalised descending spectrum and
    validated order keys (the kernels' path)."""
    p = _weights(values)
    scale = 1.0 / math.log(base)
    nz = p[p > 0]
    entropy = float(-(nz * np.log(nz)).sum()) * scale
    rank = int(np.count_nonzero(np.asarray(values) > floor)) or 1
    out = {}
    for key in orders:
        alpha = float(key)
        if alpha == 0:
            val = math.log(rank)
        elif math.isinf(alpha):
            val = -math.log(nz.max())
        elif alpha == 1:
            val = entropy / scale
        else:
            val = math.log(float((nz ** alpha).sum())) / (1.0 - alpha)
        out[key] = max(val, 0.0) * scale
    above = p[: rank] if rank else p[:0]
    return {"entropy": max(entropy, 0.0), "renyi": out, "schmidt_rank": rank,
            "levels": -np.log(above[above > 0])}
