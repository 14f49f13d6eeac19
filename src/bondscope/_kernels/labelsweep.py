"""Charge-resolved spectra of a dense MPS in any gauge.

The right-to-left LQ sweep is the plain one (bond matrices L_i with
psi = [A_0 ... A_{i-1}] L_i Q_i, Q_i an isometry).  The left-to-right sweep
carries an orthonormal basis of the left block in which every vector has a
definite charge, its label.  At site i the product basis (basis vector x local
state) is labelled by the sums of the labels, exactly; the state at cut i+1 is
B = M L_{i+1} with M = R_i A_i in that basis, so the rows of B with label q
are the sector q block of the state's matrix, and their singular values are
the sector spectra -- exact in any gauge, since the product basis is
orthonormal and charge-definite by construction and L_{i+1} Q_{i+1} is the
right block.  The left singular vectors of each sector block, kept where
their singular value is above eps * n * s_max (the rest is rounding), are the
next basis, with R_{i+1} = U_q^H M_q stacked over the sectors.

For an eigenstate of the total charge the kept vectors number at most the
bond dimension (the sectors' row spaces are orthogonal); a state that is not
one is caught at the last site, where the state's weights in the labelled
basis give its total charge distribution.  The kept vectors are capped at
the bond dimension, largest values first, so memory stays bounded; the
weight dropped (rounding for an eigenstate) is returned.
"""

import numpy as np

from .blocksweep import charge_groups, sector_pool
from .chain import lq_step
from .parallel import lanes

__all__ = ["labelled_chain"]


def _sector(task):
    """One sector's rows of M = R_i A_i (from the basis rows whose label plus a local
    charge is the sector's), its block B_q = M_q L, and B_q's SVD (U, s)."""
    from scipy.linalg import svd

    pieces, env = task
    m = np.vstack([r @ a for r, a in pieces])
    u, s, _ = svd(m @ env, full_matrices=False, overwrite_a=True, check_finite=False)
    return m, u, s


def _label_step(pool, r, labels, a, site, env, charges):
    """One step: the cut's sector values, the next (R, labels) and the dropped weight."""
    c = a.shape[2]
    tasks = {}
    for qs, states in charge_groups(site).items():
        for ql, rows in charge_groups(labels).items():
            q = charges.key(charges.add(ql, qs))
            tasks.setdefault(q, []).extend((r[rows], a[:, s, :]) for s in states)
    keys = sorted(tasks)
    parts = [(q, *out) for q, out in zip(keys, pool(_sector, [(tasks[q], env) for q in keys]))]
    values = [s for *_, s in parts]
    total = sum(float(s @ s) for s in values)
    # rounding of the product M L is bounded by eps ||M|| ||L||, which in a gauge far from
    # canonical exceeds eps ||B||: values below eps n ||M|| ||L|| are rounding, not kept
    norm_m = np.sqrt(sum(float(np.vdot(m, m).real) for _, m, _, _ in parts))
    gauge = max(norm_m * float(np.linalg.norm(env)) / np.sqrt(total), 1.0) if total > 0 \
        else 1.0
    top = max((float(s[0]) for s in values if s.size), default=0.0)
    size = max(r.shape[0] * a.shape[1], c)
    floor = np.finfo(env.dtype).eps * size * top * gauge
    kept = sorted(((float(x), j, n) for j, (*_, s) in enumerate(parts)
                   for n, x in enumerate(s) if x > floor), reverse=True)[:c]
    take = {}
    for _, j, n in kept:
        take.setdefault(j, []).append(n)
    dropped = total - sum(x * x for x, _, _ in kept)
    blocks, new_labels = [], []
    for j, cols in sorted(take.items()):
        q, m, u, _ = parts[j]
        blocks.append(u[:, sorted(cols)].conj().T @ m)
        new_labels += [q] * len(cols)
    r = np.vstack(blocks) if blocks else np.zeros((0, c), dtype=env.dtype)
    labels = np.array(new_labels, dtype=np.int64).reshape(-1, charges.quantities)
    cut = [(q, s) for (q, *_), s in zip(parts, values)]
    return cut, r, labels, (max(dropped, 0.0) / total if total > 0 else 0.0)


def labelled_chain(src, charges, store, tick, ledger, scales):
    """Charge-resolved Schmidt values of every cut of a dense MPS in any gauge.

    Parameters
    ----------
    src : ChainSource
        Site tensors (left, phys, right), read one at a time.
    charges : ChainCharges
        Local charges bound to ``src``'s sites.
    store : BondStore
        Holds the right-to-left sweep's bond matrices.
    tick : callable
        Called once per site tensor processed.
    ledger : GaugeLedger
        Receives the norms of the matrices the sweeps multiply (:mod:`.conditioning`).
    scales : SweepScales
        Balances every bond matrix and keeps the exponents (:mod:`.balance`); the
        first cut's values are those of R_0 A_0 L_1.

    Returns
    -------
    cuts : list of list of (key, ndarray)
        Per cut (position 1..N-1), the raw singular values of each left-block
        charge sector.
    dropped : float
        Largest relative weight dropped at one cut (rounding-level for an
        eigenstate of the total charge).
    totals : dict
        Weight of the state per total charge (keys), from the last site.

    Notes
    -----
    Per site, besides the right-to-left sweep, per sector q: its rows of
    R_i A_i, their product with L_{i+1}, one SVD with left vectors and the
    projection onto the kept vectors: O(d chi^3) work in all.  The sectors
    run side by side, one BLAS thread each (as in the block-wise sweep); the
    right-to-left sweep gets the BLAS threads the plain engine gives each of
    its two concurrent sweeps (half of them, from two up), which on a machine
    shared with other work avoids BLAS threads waiting for busy cores.
    Memory: one site tensor and three arrays of its size; the bond matrices
    wait in ``store``, so the peak does not grow with N.

    References
    ----------
    G. Vidal, Phys. Rev. Lett. 91, 147902 (2003) -- Schmidt decompositions
    along a chain from successive factorisations; here each factorisation is
    split by the (exactly known) charge of the product basis.
    """
    n = src.sites
    env = np.ones((1, 1), dtype=src.compute_dtype)
    with lanes():                   # the plain engine's threads per sweep (half, from 2 up)
        for i in range(n - 1, 0, -1):
            a = src.tensor(i)
            env = scales.right(i, lq_step(a, env))
            ledger.right(i, a, env)
            store.put(f"L{i}", env)
            tick()
    r = np.ones((1, 1), dtype=src.compute_dtype)
    labels = np.zeros((1, charges.quantities), dtype=np.int64)
    cuts, dropped = [], 0.0
    with sector_pool() as pool:
        for i in range(n - 1):
            a = src.tensor(i)
            cut, r, labels, lost = _label_step(pool, r, labels, a, charges.sites[i],
                                               store.pop(f"L{i + 1}"), charges)
            r = scales.left(i, r)
            ledger.left(i, a, r)
            cuts.append(cut)
            dropped = max(dropped, lost)
            tick()
    a = src.tensor(n - 1)
    m = (r @ a.reshape(a.shape[0], -1)).reshape(-1)
    rows = charges.add(labels[:, None, :], charges.sites[n - 1][None, :, :]).reshape(
        m.size, -1)
    weights = np.abs(m) ** 2
    totals = {}
    for row, wt in zip(map(tuple, rows.tolist()), weights):
        totals[row] = totals.get(row, 0.0) + float(wt)
    tick()
    return cuts, dropped, totals
