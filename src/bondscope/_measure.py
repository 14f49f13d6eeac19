"""Entropy measures of one Schmidt spectrum."""

import math

import numpy as np

__all__ = ["entropy_measures", "spectrum_measures", "renyi_orders", "resolution_floor",
           "kept_rank", "discarded_weight", "ResolutionWarning", "SENSITIVE", "floor_errors"]

# sum of lambda^2 off 1 by more than this (relative) is not a normalised spectrum
_NORM_SLACK = 1e-6


class ResolutionWarning(UserWarning):
    """Some cut's Schmidt values are resolved far worse than the compute precision allows
    (an ill-conditioned stored gauge), or a Rényi order is too sensitive to the floor."""


def resolution_floor(values, route, size, *, eps=None, data_eps=None):
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
    eps : float, optional
        Precision of the arithmetic (default: eps of ``values``' dtype).
    data_eps : float, optional
        Precision of the stored numbers, when coarser (a float32 state computed
        in double): they perturb the state by data_eps relative, hence every
        value by data_eps * n * lambda_max at most on either route.

    Notes
    -----
    Backward-stable SVD and Hermitian eigensolvers perturb each value by at most
    a small multiple of eps times the largest one (Golub & Van Loan, *Matrix
    Computations*, 4th ed., sections 8.1 and 8.6); the factor n is a safety margin.
    A perturbation E of the state moves every Schmidt value by at most ||E||_2
    (Weyl's inequality for singular values, same reference, section 8.6.1).
    """
    if eps is None:
        eps = np.finfo(np.float64 if values.dtype.itemsize >= 8 else np.float32).eps
    top = float(values[0]) if values.size else 0.0
    n = max(size, 1)
    floor = math.sqrt(eps * n) * top if route == "gram" else eps * n * top
    return max(floor, (data_eps or 0.0) * n * top)


def _weights(values):
    return np.square(np.asarray(values, dtype=np.float64))


def kept_rank(values, bond_dim=None, weight_tol=None):
    """Rank kept when truncating a descending spectrum to ``bond_dim`` and/or ``weight_tol``.

    With ``weight_tol`` it is the smallest rank whose dropped weight
    (sum of lambda^2 beyond it, relative to the total) is <= weight_tol.
    With both, the smaller of the two ranks.
    """
    k = np.asarray(values).size
    if weight_tol is not None:
        ok = np.nonzero(_tails(values) <= weight_tol)[0]
        k = int(ok[0]) if ok.size else k
        k = max(k, 1)
    if bond_dim is not None:
        k = min(k, bond_dim)
    return k


def discarded_weight(values, keep):
    """Sum of lambda^2 beyond the first ``keep`` values, relative to the total."""
    tail = _tails(values)
    return float(tail[keep]) if keep < tail.size else 0.0


def _tails(values):
    """tail[j]: weight of values j..end relative to the total (one rounding path for
    :func:`kept_rank` and :func:`discarded_weight`, so they agree at ties)."""
    p = _weights(values)
    return np.cumsum(p[::-1])[::-1] / p.sum()


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
        Resolution floor; values at or below it are not counted in the rank, the
        levels or any entropy (every measure uses the same values).

    Returns
    -------
    dict
        ``entropy``, ``renyi`` (dict keyed by the orders as written), ``schmidt_rank``,
        ``levels`` (ndarray of -ln lambda^2 above the floor); ``entropy_error`` and
        ``renyi_error`` (dict as ``renyi``): bounds on how far each measure may be
        off when every value is known only to within ``floor`` (those under it
        anywhere in [0, floor]); ``floor_sensitive``: the orders whose bound
        exceeds :data:`SENSITIVE` times max(1, value), too sensitive to the floor
        to be reported (orders below 1 sum f^(2 alpha) over every unresolved value).

    Raises
    ------
    ValueError
        Negative, non-finite or unnormalised values, a bad order, base or floor.

    Notes
    -----
    S = -sum p ln p with p = lambda^2; S_alpha = ln(sum p^alpha) / (1 - alpha)
    (Rényi, Proc. 4th Berkeley Symp. 1, 547 (1961)).  Cost O(k) per order.
    The bounds are interval evaluations of each formula over the values' ranges,
    capped at ln(k), the widest any measure of k values can be.

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


def spectrum_measures(values, orders, base, floor, *, weights=False):
    """:func:`entropy_measures` for trusted input: a normalised descending spectrum and
    validated order keys (the kernels' path).

    ``weights=True`` when the floor comes from weights lambda^2 resolved to floor^2
    (the gram route): a resolved value is then off by at most floor^2 / lambda, less
    than the floor, which the bounds use."""
    v = np.asarray(values, dtype=np.float64)
    scale = 1.0 / math.log(base)
    resolved = v[v > floor] if floor > 0 else v[v > 0]
    if not resolved.size:
        resolved = v[:1]
    unresolved = v.size - resolved.size if floor > 0 else 0
    p = np.square(resolved)
    nz = p[p > 0]
    entropy = float(-(nz * np.log(nz)).sum()) if nz.size else 0.0
    rank = resolved.size
    out, errors = {}, {}
    for key in orders:
        alpha = float(key)
        if alpha == 0:
            val = math.log(rank)
        elif math.isinf(alpha):
            val = -math.log(nz.max())
        elif alpha == 1:
            val = entropy
        else:
            val = math.log(float((nz ** alpha).sum())) / (1.0 - alpha)
        out[key] = max(val, 0.0) * scale + 0.0           # never -0.0
        errors[key] = _order_error(resolved, unresolved, floor, alpha, val, weights) * scale
    entropy_error = _order_error(resolved, unresolved, floor, 1.0, entropy, weights) * scale
    sensitive = [k for k in orders if errors[k] > SENSITIVE * max(1.0, out[k])]
    return {"entropy": max(entropy, 0.0) * scale + 0.0, "renyi": out, "schmidt_rank": rank,
            "levels": -np.log(nz), "entropy_error": entropy_error, "renyi_error": errors,
            "floor_sensitive": sensitive}


# A measure whose bound from the floor (:func:`_order_error`) exceeds this, relative to
# max(1, its value), is flagged as too sensitive to the floor: far above the rounding of
# a measure of resolved values (1e-12 and below), below any fit's statistical error.
SENSITIVE = 1e-6


def _entropy_term(p):
    return -p * np.log(np.where(p > 0, p, 1.0))


def _order_error(resolved, unresolved, floor, alpha, value, weights=False):
    """Bound (nats) on the error of one measure from the floor ``floor``.

    Each resolved value may be off by up to ``floor`` (floor^2 / lambda with
    ``weights``, whose lambda^2 are resolved to floor^2) and each of the
    ``unresolved`` ones may be anything in [0, floor]; the bound is the
    largest change of the measure over those intervals: for 0 < alpha != 1,
    sum p^alpha lies in [sum (lambda - f)^(2 alpha), sum (lambda + f)^(2 alpha)
    + unresolved f^(2 alpha)]; for alpha = 1 each -p ln p moves within its
    interval (at most -f^2 ln f^2 for an unresolved value); alpha = inf moves
    with lambda_max alone; alpha = 0 (the rank) is anywhere up to ln(rank +
    unresolved).
    """
    widest = math.log(resolved.size + unresolved)      # every measure lies in [0, ln D]
    return min(_interval_error(resolved, unresolved, floor, alpha, value, weights), widest)


def _interval_error(resolved, unresolved, floor, alpha, value, weights):
    if alpha == 0:
        return math.log((resolved.size + unresolved) / resolved.size)
    if not floor > 0:
        return 0.0
    off = np.minimum(floor, floor * floor / resolved) if weights else floor
    lo, hi = np.maximum(resolved - off, 0.0), np.minimum(resolved + off, 1.0)
    if math.isinf(alpha):
        return 2.0 * math.log(resolved[0] / lo[0]) if lo[0] > 0 else math.inf
    if alpha == 1:
        p, plo, phi = np.square(resolved), np.square(lo), np.square(hi)
        top = np.where((plo < 1 / math.e) & (phi > 1 / math.e), 1 / math.e,
                       np.maximum(_entropy_term(plo), _entropy_term(phi)))
        low = np.minimum(_entropy_term(plo), _entropy_term(phi))
        here = _entropy_term(p)
        tail = float(_entropy_term(np.float64(min(floor * floor, 1 / math.e))))
        return float(np.maximum(top - here, here - low).sum()) + unresolved * tail
    small = float((lo ** (2 * alpha)).sum())
    big = float((hi ** (2 * alpha)).sum()) + unresolved * floor ** (2 * alpha)
    ends = [math.log(x) / (1.0 - alpha) if x > 0 else math.inf for x in (small, big)]
    return max(abs(e - value) for e in ends)


def floor_errors(measures, orders):
    """The document's ``floor_errors`` field from the per-cut :func:`spectrum_measures`.

    Returns
    -------
    dict
        ``entropy``: the von Neumann entropy's bound per cut; ``renyi``: per order,
        the bound per cut; ``floor_sensitive``: per order, the cut positions (1-based)
        where it is too sensitive to the floor to be reported (empty lists included).
    """
    return {"entropy": [m["entropy_error"] for m in measures],
            "renyi": {k: [m["renyi_error"][k] for m in measures] for k in orders},
            "floor_sensitive": {k: [i + 1 for i, m in enumerate(measures)
                                    if k in m["floor_sensitive"]] for k in orders}}
