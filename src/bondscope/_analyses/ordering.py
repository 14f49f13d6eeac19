"""Site ordering from the mutual-information graph, and the state profiled in that order."""

import numpy as np

__all__ = ["fiedler_order", "ordering_advice", "ordering_cost", "reordered_profiles"]

# Fiedler values closer than this (relative) leave the ordering ambiguous (common practice)
_DEGENERATE = 1e-6


def ordering_cost(mi, order=None):
    """sum_{i<j} I(i, j) |pos(i) - pos(j)|^2, with pos(site) its place in ``order``.

    Examples
    --------
    >>> mi = np.array([[0, 1, 0], [1, 0, 0.5], [0, 0.5, 0]])
    >>> ordering_cost(mi), ordering_cost(mi, [1, 0, 2])
    (1.5, 3.0)
    """
    mi = np.asarray(mi, dtype=float)
    n = mi.shape[0]
    pos = np.empty(n)
    pos[list(range(n)) if order is None else list(order)] = np.arange(n)
    return float(np.triu(mi * (pos[:, None] - pos[None, :]) ** 2, 1).sum())


def _component_order(weights, members):
    """Members of one connected component ordered by the Fiedler vector of its Laplacian."""
    from scipy.linalg import eigh

    if len(members) < 3:
        return list(members), None, False
    w = weights[np.ix_(members, members)]
    lap = np.diag(w.sum(axis=1)) - w
    values, vectors = eigh(lap)
    vec = vectors[:, 1]
    # the sign is free: keep the orientation closest to the current order
    if np.dot(vec - vec.mean(), np.arange(len(members)) - (len(members) - 1) / 2) < 0:
        vec = -vec
    ambiguous = len(values) > 2 and values[2] - values[1] <= _DEGENERATE * max(values[-1], 1e-300)
    return [members[k] for k in np.argsort(vec, kind="stable")], float(values[1]), ambiguous


def fiedler_order(mi, floors=None):
    """Site order from the Fiedler vector of the mutual-information graph.

    Parameters
    ----------
    mi : ndarray, shape (N, N)
        I(i, j), symmetric, zero diagonal.
    floors : ndarray, shape (N, N), optional
        Entries at or below their floor are unresolved and get weight 0.

    Returns
    -------
    order : list of int
        Sites from 0, in the suggested order.
    fiedler_values : list of float
        The second-smallest Laplacian eigenvalue of each connected component.
    ambiguous : bool
        A component's second and third eigenvalues coincide, so its Fiedler
        vector (and the order) is not determined.

    Notes
    -----
    Sorting the components of the eigenvector of the second-smallest
    eigenvalue of L = D - I minimises sum I_ij (x_i - x_j)^2 over unit
    vectors orthogonal to the constant, the continuous relaxation of the
    ordering cost (Barcza, Legeza, Marti, Reiher, Phys. Rev. A 83, 012508
    (2011); Fiedler, Czech. Math. J. 23, 298 (1973)).  Sites that share no
    resolved mutual information form separate components, each ordered on its
    own and placed by its first site.  Cost O(N^3).
    """
    from scipy.sparse.csgraph import connected_components

    w = np.clip(np.asarray(mi, dtype=float), 0.0, None)
    if floors is not None:
        w = np.where(w > np.asarray(floors), w, 0.0)
    np.fill_diagonal(w, 0.0)
    count, labels = connected_components(w > 0, directed=False)
    order, values, ambiguous = [], [], False
    for c in sorted(range(count), key=lambda c: int(np.nonzero(labels == c)[0][0])):
        part, value, amb = _component_order(w, list(np.nonzero(labels == c)[0]))
        order += [int(k) for k in part]
        ambiguous = ambiguous or amb
        if value is not None:
            values.append(value)
    return order, values, ambiguous


def ordering_advice(mi, floors):
    """The suggested order and its cost against the current one.

    Returns
    -------
    dict
        ``fiedler_order`` and ``suggested_order`` (sites numbered 1..N),
        ``current_cost``, ``fiedler_cost``, ``suggested_cost``, ``cost_floor``
        (the costs' error bound from the floors), ``fiedler_values``,
        ``verdict`` ("reorder", "keep" or "inconclusive") and ``reason``.
        The suggestion is the Fiedler order when it lowers the cost by more
        than the floor, else the current order.
    """
    mi, floors = np.asarray(mi, dtype=float), np.asarray(floors, dtype=float)
    n = mi.shape[0]
    order, values, ambiguous = fiedler_order(mi, floors)
    current, proposed = ordering_cost(mi), ordering_cost(mi, order)
    slack = ordering_cost(floors) + ordering_cost(floors, order)
    if ambiguous:
        verdict, reason = "inconclusive", ("the Fiedler vector is not unique (degenerate "
                                           "Laplacian eigenvalues)")
    elif current - proposed > slack:
        verdict, reason = "reorder", f"cost {current:.4g} -> {proposed:.4g}"
    elif order == list(range(n)):
        verdict, reason = "keep", "the Fiedler order is the current order"
    elif proposed - current > slack:
        verdict, reason = "keep", "the Fiedler order costs more than the current one"
    else:
        verdict, reason = "inconclusive", (f"costs {current:.4g} and {proposed:.4g} differ by "
                                           f"less than their error bound {slack:.2g}")
    suggested = order if verdict == "reorder" else list(range(n))
    return {"fiedler_order": [k + 1 for k in order], "suggested_order": [k + 1 for k in suggested],
            "current_cost": current, "fiedler_cost": proposed,
            "suggested_cost": ordering_cost(mi, suggested), "cost_floor": slack,
            "fiedler_values": values, "verdict": verdict, "reason": reason}


def _summary(prof, target):
    from .budget import bond_budget

    budget = bond_budget(prof, target=target)
    return {"entropies": prof.entropies.tolist(), "max_entropy": float(prof.entropies.max()),
            "bond_dimensions": prof.bond_dimensions.tolist(),
            "budget": [c["bond_dimension"] for c in budget["cuts"]],
            "budget_max": budget["max_bond_dimension"], "budget_target": target}


def reordered_profiles(src, order, opts, *, cap=None, target=1e-8):
    """Profiles of the state in its current order and in ``order`` (sites from 0).

    State vectors are permuted exactly (with the fermionic sign when
    ``opts.parity`` is set); an MPS is reordered by swap gates with bonds
    capped at ``cap`` (default: its largest stored bond), and the truncation
    this cost is reported with a bound on the entropies' error.

    Returns
    -------
    dict
        ``before`` and ``after`` (``entropies`` per cut, ``max_entropy``,
        ``bond_dimensions``, ``budget``: the bond dimension each cut needs
        for discarded weight <= ``target``, ``budget_max``), ``order`` (1..N),
        ``method`` ("exact permutation" or "swap gates"), and for swaps
        ``swap_bond_dim``, ``swaps``, ``discarded_weight_sum``,
        ``max_discarded_weight``, ``infidelity_bound`` and
        ``entropy_error_bound`` (Fannes-Audenaert with the trace distance
        bounded by the swaps' distance bound; Audenaert, J. Phys. A 40, 8127
        (2007)).
    """
    import warnings

    from .._pipeline import UnnormalisedStateWarning, profile
    from .mutual import audenaert

    with warnings.catch_warnings():
        # the mutual information is of the normalised state; so are these profiles
        warnings.simplefilter("ignore", UnnormalisedStateWarning)
        return _profiles(src, order, opts, cap, target, profile, audenaert)


def _profiles(src, order, opts, cap, target, profile, audenaert):
    settings = {"renyi": (), "spectrum": True, "base": opts.base, "threads": opts.threads,
                "max_memory": opts.max_memory}
    out = {"order": [k + 1 for k in order]}
    if src.kind == "state-vector":
        from .._kernels.partialtrace import fermion_permuted

        psi = src.amplitudes()
        before = profile(psi.reshape(src.local_dims), **settings)
        after = profile(fermion_permuted(psi, src.local_dims, order, opts.parity).reshape(
            [src.local_dims[k] for k in order]), **settings)
        out["method"] = "exact permutation"
    else:
        from .._kernels.swaps import reorder_chain

        tensors = [src.tensor(i) for i in range(src.sites)]
        cap = cap or max(src.bond_dims)
        before = profile(tensors, **settings)
        moved = reorder_chain(tensors, order, cap, opts.parity)
        del tensors
        after = profile(moved.tensors, **settings)
        rank = max(max(t.shape[0], t.shape[2]) for t in moved.tensors)
        bound = audenaert(min(moved.distance_bound, 1.0), rank) / np.log(after.log_base)
        out.update(method="swap gates", swap_bond_dim=cap, swaps=moved.swaps,
                   discarded_weight_sum=float(sum(moved.discarded)),
                   max_discarded_weight=float(max(moved.discarded, default=0.0)),
                   infidelity_bound=moved.infidelity_bound, entropy_error_bound=float(bound))
    out["before"], out["after"] = _summary(before, target), _summary(after, target)
    return out
