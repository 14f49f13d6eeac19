"""Block-wise sweeps: the QR/LQ sweeps of an MPS run sector by sector.

When every bond index carries a known charge and each site tensor is non-zero
only where q_right = q_left + q_phys, the tensor is a set of blocks keyed by
(q_left, q_phys), the bond matrices of both sweeps are block diagonal in the
charge, and each cut's Schmidt values are the union over sectors q of the
singular values of R_q L_q, already grouped by the left block's charge.

A site's blocks are given as a dict ``{(q_left, q_phys): (q_right, array)}``
with charge keys (tuples of ints) and arrays shaped
(chi_left(q_left), d(q_phys), chi_right(q_right)); the phys leg of a block
runs over the local basis states of charge q_phys in basis order.

Dense tensors are split into such blocks when their non-zero pattern allows
it: the charges of the bond indices are inferred from the pattern while the
right-to-left sweep reads the tensors (:func:`infer_left_charges`).
"""

from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager

import numpy as np

from .conditioning import block_norms, bond_norm
from .linalg import r_factor, svdvals
from .parallel import blas_threads

__all__ = ["NotBlockStructured", "infer_left_charges", "split_blocks", "block_chain",
           "dense_blocks", "charge_groups", "sector_pool"]


# Entries of a tensor examined at once when inferring bond charges (bounds the temporaries).
_CHUNK = 2**18


class NotBlockStructured(Exception):
    """A dense tensor's non-zero pattern admits no charges on its left bond."""


def infer_left_charges(a, right, known, phys, charges):
    """Charges of the left bond indices implied by the non-zeros of one tensor.

    Parameters
    ----------
    a : ndarray, shape (k, d, c)
        Site tensor (left, phys, right).
    right : ndarray, shape (c, n_q)
        Charges of the right bond indices.
    known : ndarray of bool, shape (c,)
        Right indices whose charge is known; the others carry no weight (the
        next tensor is zero on them) and are ignored.
    phys : ndarray, shape (d, n_q)
        Local charges.
    charges : ChainCharges
        Charge arithmetic (moduli).

    Returns
    -------
    left : ndarray, shape (k, n_q)
        q_left = q_right - q_phys of every non-zero entry.
    known : ndarray of bool, shape (k,)
        False for left indices with no non-zero entry on a known right index.

    Raises
    ------
    NotBlockStructured
        Two non-zero entries of one left index imply different charges.

    Notes
    -----
    Exact zeros count: an entry is in the pattern when it is not exactly 0.
    Vectorised masked min/max, a block of left indices at a time so that
    the integer temporaries stay near 2^18 entries: 7 to 10 ms for a
    1024 x 2 x 1024 tensor.  A numba loop takes 4 ms, but its first call
    (import and compile) takes about 1.6 s, far more than it saves on a
    64-site chain of that size, so numba is not used
    (measured: scripts/bench_sectors.py ``--pattern``).
    """
    has = np.zeros(a.shape[0], dtype=bool)
    out = np.zeros((a.shape[0], right.shape[1]), dtype=np.int64)
    implied = charges.sub(right[None, :, :], phys[:, None, :])        # (d, c, n_q)
    big = np.iinfo(np.int64).max
    step = max(1, _CHUNK // max(a.shape[1] * a.shape[2], 1))
    for start in range(0, a.shape[0], step):
        rows = slice(start, start + step)
        nz = (a[rows] != 0) & known[None, None, :]
        has[rows] = nz.any(axis=(1, 2))
        for j in range(right.shape[1]):
            vals = np.broadcast_to(implied[None, :, :, j], nz.shape)
            lo = np.where(nz, vals, big).min(axis=(1, 2))
            hi = np.where(nz, vals, -big).max(axis=(1, 2))
            if np.any(has[rows] & (lo != hi)):
                raise NotBlockStructured
            out[rows, j] = np.where(has[rows], lo, 0)
    return out, has


def _groups(labels, keep=None):
    """{key: index array} of the rows of an (n, n_q) charge array (those in ``keep``)."""
    index = np.arange(labels.shape[0]) if keep is None else np.flatnonzero(keep)
    return {k: index[rows] for k, rows in charge_groups(labels[index]).items()}


def charge_groups(labels):
    """{key: row indices} of an (n, n_q) charge array, keys (tuples) in sorted order."""
    keys, inverse = np.unique(labels, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    order = np.argsort(inverse, kind="stable")
    bounds = np.cumsum(np.bincount(inverse, minlength=len(keys)))
    return {tuple(int(v) for v in k): order[b - n:b]
            for k, b, n in zip(keys, bounds, np.diff(bounds, prepend=0))}


def split_blocks(a, left, phys, right, charges, keep_left=None, keep_right=None):
    """The blocks of a dense tensor whose non-zeros obey q_right = q_left + q_phys.

    Parameters
    ----------
    a : ndarray, shape (k, d, c)
    left, phys, right : ndarray, shapes (k, n_q), (d, n_q), (c, n_q)
        Charges of the indices of each leg.
    charges : ChainCharges
    keep_left, keep_right : ndarray of bool, optional
        Bond indices to keep (default all); the others carry no weight.

    Returns
    -------
    dict
        ``{(q_left, q_phys): (q_right, block)}``, blocks as C-contiguous copies.
    """
    rows, cols = _groups(left, keep_left), _groups(right, keep_right)
    out = {}
    for qp, states in _groups(phys).items():
        for ql, r in rows.items():
            qr = charges.key(charges.add(ql, qp))
            c = cols.get(qr)
            if c is None:
                continue
            out[(ql, qp)] = (qr, np.ascontiguousarray(a[np.ix_(r, states, c)]))
    return out


def dense_blocks(src, charges):
    """Per-site block readers for a dense chain, with bond charges inferred on the way.

    Returns ``(blocks_right_to_left, blocks_left_to_right, bond_charges)``:
    the first yields (i, blocks) for i = N-1..0 and raises NotBlockStructured
    as soon as a tensor's pattern admits no charges; the second yields (i,
    blocks) for i = 0..N-1 from the charges found by the first; the third is
    the list of bond charge arrays (filled by the first).  Bond charges are
    relative to the right end's charge 0.
    """
    n = src.sites
    bonds, known = [None] * (n + 1), [None] * (n + 1)
    bonds[n] = np.zeros((1, charges.quantities), dtype=np.int64)
    known[n] = np.ones(1, dtype=bool)

    def blocks(i, a):
        return split_blocks(a, bonds[i], charges.sites[i], bonds[i + 1], charges,
                            known[i], known[i + 1])

    def leftward():
        for i in range(n - 1, -1, -1):
            a = src.tensor(i)
            bonds[i], known[i] = infer_left_charges(a, bonds[i + 1], known[i + 1],
                                                    charges.sites[i], charges)
            yield i, blocks(i, a)

    def rightward():
        for i in range(n):
            yield i, blocks(i, src.tensor(i))
    return leftward(), rightward(), bonds


def _lq_sector(pairs):
    """L factor of one left sector: [A_(ql,qp) L_qr for each block] side by side = L Q."""
    width = sum(e.shape[1] * blk.shape[1] for blk, e in pairs)
    k = pairs[0][0].shape[0]
    m = np.empty((width, k), dtype=np.result_type(pairs[0][0], pairs[0][1]), order="F")
    at = 0
    for blk, e in pairs:                                # rows of m = columns of A L
        part = (blk.reshape(-1, blk.shape[2]) @ e).reshape(k, -1)
        m[at:at + part.shape[1]] = part.T
        at += part.shape[1]
    return r_factor(m).T


def _qr_sector(pairs):
    """R factor of one right sector: [R_ql A_(ql,qp) for each block] stacked = P R."""
    c = pairs[0][1].shape[2]
    height = sum(rq.shape[0] * blk.shape[1] for rq, blk in pairs)
    m = np.empty((height, c), dtype=np.result_type(pairs[0][0], pairs[0][1]), order="F")
    at = 0
    for rq, blk in pairs:
        part = (rq @ blk.reshape(blk.shape[0], -1)).reshape(-1, c)
        m[at:at + part.shape[0]] = part
        at += part.shape[0]
    return r_factor(m)


def _cut_values(pair):
    return svdvals(pair[0] @ pair[1])


def _by_sector(blocks, bond, left):
    """Blocks paired with the bond matrix they meet, grouped by the sector they produce."""
    groups = {}
    for (ql, _), (qr, blk) in blocks.items():
        m = bond.get(qr if left else ql)
        if m is not None:
            groups.setdefault(ql if left else qr, []).append((blk, m) if left else (m, blk))
    return groups


def _run(pool, task, groups):
    keys = list(groups)
    return dict(zip(keys, pool(task, [groups[k] for k in keys])))


@contextmanager
def sector_pool():
    """A map over sectors: one BLAS thread per sector, as many sectors at once as the BLAS
    had threads (small factorisations gain nothing from threads inside one call)."""
    from threadpoolctl import threadpool_limits

    workers = blas_threads()
    with threadpool_limits(limits=1, user_api="blas"):
        if workers < 2:
            yield lambda f, items: list(map(f, items))
            return
        with ThreadPoolExecutor(workers, thread_name_prefix="bondscope-sector") as ex:
            yield lambda f, items: list(ex.map(f, items))


def block_chain(leftward, rightward, first, last, n, store, tick, dtype, ledger, scales):
    """Charge-resolved Schmidt values of every cut from block-wise sweeps.

    Parameters
    ----------
    leftward, rightward : iterables of (i, blocks)
        Site blocks for i = N-1..0 and for i = 0..N-1 (each read when reached).
    first, last : callable
        ``first()`` / ``last()``: the charge key of the left end's / right
        end's single bond index (called after the right-to-left sweep).
    n : int
        Number of sites.
    store : BondStore
        Holds the right-to-left sweep's bond blocks until the other sweep needs them.
    tick : callable
        Called once per site tensor processed.
    dtype : numpy dtype
        Compute dtype.
    ledger : GaugeLedger
        Receives the norms of the blocks and bond matrices met
        (:mod:`.conditioning`), from which the floors are bounded.
    scales : SweepScales
        Balances every bond matrix (all its sectors by one power of two) and
        keeps the exponents (:mod:`.balance`).

    Returns
    -------
    cuts : list of list of (key, ndarray)
        Per cut (position 1..N-1), the raw singular values of each sector,
        keyed by the bond charge (not yet relative to the left end).
    first_key, last_key : tuple

    Notes
    -----
    Per site and sweep, one product with a bond block and one QR per sector:
    cost sum_q (rows_q chi_q^2) instead of d chi^3.  The sectors' small
    factorisations run side by side, each with one BLAS thread, as many at
    once as the BLAS had threads (threads inside a call of this size cost
    more than they gain, many times more on a loaded machine).  Memory: the
    site's blocks and the sector matrices in flight.  The bond blocks
    of the right-to-left sweep go to ``store`` (which spills past its budget),
    so the peak does not grow with N.

    References
    ----------
    I. P. McCulloch and M. Gulácsi, Europhys. Lett. 57, 852 (2002);
    S. Singh, R. N. C. Pfeifer and G. Vidal, Phys. Rev. B 83, 115125 (2011)
    -- block-sparse tensors of symmetric tensor networks.
    """
    env_keys = [None] * (n + 1)
    with sector_pool() as pool:
        env = None
        for i, blocks in leftward:
            if env is None:
                env = {last(): np.ones((1, 1), dtype=dtype)}
            env = scales.right(i, _run(pool, _lq_sector, _by_sector(blocks, env, left=True)))
            ledger.right_norms(i, block_norms(blocks)[1], bond_norm(env))
            if i > 0:
                env_keys[i] = list(env)
                for j, q in enumerate(env_keys[i]):
                    store.put(f"L{i}:{j}", env[q])
            tick()
        r = {first(): np.ones((1, 1), dtype=dtype)}
        cuts = []
        for i, blocks in rightward:
            r = scales.left(i, _run(pool, _qr_sector, _by_sector(blocks, r, left=False)))
            ledger.left_norms(i, block_norms(blocks)[0], bond_norm(r))
            tick()
            if i == n - 1:
                break
            met = {}
            for j, q in enumerate(env_keys[i + 1]):
                e = store.pop(f"L{i + 1}:{j}")
                if q in r:
                    met[q] = (r[q], e)
            cuts.append(sorted(_run(pool, _cut_values, met).items()))
    return cuts, first(), last()
