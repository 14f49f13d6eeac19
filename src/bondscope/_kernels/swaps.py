"""Reordering the sites of an MPS with swap gates under a bond-dimension cap."""

import numpy as np

__all__ = ["Reordered", "reorder_chain", "swap_count"]


class Reordered:
    """Site tensors in the new order and what the swaps cost.

    Attributes
    ----------
    tensors : list of ndarray (left, phys, right)
    swaps : int
    discarded : list of float
        Weight discarded by each truncated swap (relative to the state at that step).
    distance_bound : float
        Bound on || psi_exact - psi_result || (normalised, phase aligned):
        the sum over the swaps of sqrt(2 - 2 sqrt(1 - discarded)), the
        distance each renormalised truncation moves the state (the swaps
        between are unitary, so the distances add by the triangle inequality),
        plus the rounding of every QR and SVD (backward error about 4 n eps per
        factorisation of an n-column matrix; Higham, *Accuracy and Stability of
        Numerical Algorithms*, 2nd ed., chapter 19).
    infidelity_bound : float
        min(1, distance_bound^2) >= 1 - |<psi_exact|psi_result>|^2.
    """

    def __init__(self, tensors, swaps, discarded, rounding=0.0):
        self.tensors, self.swaps, self.discarded = tensors, swaps, discarded
        steps = [np.sqrt(max(2.0 - 2.0 * np.sqrt(max(1.0 - e, 0.0)), 0.0)) for e in discarded]
        self.distance_bound = float(sum(steps) + rounding)
        self.infidelity_bound = float(min(1.0, self.distance_bound ** 2))


def swap_count(order):
    """Adjacent swaps needed to put sites in ``order``: its number of inversions.

    Examples
    --------
    >>> swap_count([2, 0, 1]), swap_count([0, 1, 2])
    (2, 0)
    """
    order = list(order)
    return sum(1 for a in range(len(order)) for b in range(a + 1, len(order))
               if order[a] > order[b])


def _qr_right(ts, c):
    """Move the orthogonality centre from site c to c + 1."""
    from scipy.linalg import qr

    a = ts[c]
    q, r = qr(a.reshape(-1, a.shape[2]), mode="economic", check_finite=False)
    ts[c] = q.reshape(a.shape[0], a.shape[1], -1)
    ts[c + 1] = np.tensordot(r, ts[c + 1], axes=(1, 0))


def _lq_left(ts, c):
    """Move the orthogonality centre from site c to c - 1."""
    from scipy.linalg import qr

    a = ts[c]
    q, r = qr(a.reshape(a.shape[0], -1).T, mode="economic", check_finite=False)
    ts[c] = q.T.reshape(-1, a.shape[1], a.shape[2])
    ts[c - 1] = np.tensordot(ts[c - 1], r.T, axes=(2, 0))


def _swap(ts, k, cap, parity):
    """Exchange sites k and k + 1 (the centre is at one of them); the centre ends at k.

    Returns the discarded weight (the kept Schmidt values are renormalised).
    """
    from scipy.linalg import svd

    a, b = ts[k], ts[k + 1]
    theta = np.tensordot(a, b, axes=(2, 0)).transpose(0, 2, 1, 3)
    if parity is not None:
        odd_a = np.asarray(parity)[:a.shape[1]] == 1
        odd_b = np.asarray(parity)[:b.shape[1]] == 1
        theta = theta * np.where(odd_b[:, None] & odd_a[None, :], -1.0, 1.0)[None, :, :, None]
    left, d_new, d_old, right = theta.shape
    try:
        u, s, vh = svd(theta.reshape(left * d_new, d_old * right), full_matrices=False,
                       check_finite=False)
    except np.linalg.LinAlgError:
        u, s, vh = svd(theta.reshape(left * d_new, d_old * right), full_matrices=False,
                       check_finite=False, lapack_driver="gesvd")
    total = float(np.sum(s * s))
    keep = max(1, min(cap, int(np.count_nonzero(s > 0))))
    dropped = float(np.sum(s[keep:] ** 2)) / total if total > 0 else 0.0
    s = s[:keep] / np.sqrt(np.sum(s[:keep] ** 2) / total)
    ts[k] = (u[:, :keep] * s).reshape(left, d_new, keep)
    ts[k + 1] = vh[:keep].reshape(keep, d_old, right)
    return dropped


def reorder_chain(tensors, order, cap, parity=None):
    """The MPS with its sites put in ``order`` by adjacent swap gates.

    Parameters
    ----------
    tensors : list of ndarray (left, phys, right)
        Any gauge (copied; not changed).
    order : sequence of int
        New site k is old site order[k] (from 0).
    cap : int
        Largest bond dimension kept after a swap.
    parity : sequence of int, optional
        Fermion parities of the local basis states: each swap then is a
        fermionic swap, with sign -1 when both exchanged states are odd.

    Returns
    -------
    Reordered

    Notes
    -----
    The chain is put in right-canonical form (LQ sweep), then site order[k]
    is brought to position k, k = 0, 1, ..., by adjacent swaps with the
    orthogonality centre moved along by QR steps; each swap is one SVD of
    the (chi d) x (d chi) two-site matrix truncated to ``cap`` at the
    centre, so every truncation is the optimal projection for that swap
    (Schollwöck, Ann. Phys. 326, 96 (2011), section 4.5) and the
    accumulated error is bounded as in :class:`Reordered`.  Work: the
    number of inversions of ``order`` (at most N (N - 1) / 2) SVDs of
    O(d^3 cap^3); memory: the whole chain at bonds <= cap.
    """
    ts = [np.array(t) for t in tensors]
    n = len(ts)
    for c in range(n - 1, 0, -1):
        _lq_left(ts, c)
    current, centre, swaps, discarded = list(range(n)), 0, 0, []
    for k, site in enumerate(order):
        q = current.index(site)
        while centre < q:
            _qr_right(ts, centre)
            centre += 1
        while centre > q:
            _lq_left(ts, centre)
            centre -= 1
        for p in range(q - 1, k - 1, -1):
            discarded.append(_swap(ts, p, cap, parity))
            current[p], current[p + 1] = current[p + 1], current[p]
            centre, swaps = p, swaps + 1
    eps = float(np.finfo(ts[0].dtype).eps)
    width = max(max(t.shape[0], t.shape[2]) * t.shape[1] for t in ts)
    # every swap is one SVD and each centre move one QR; the initial sweep n - 1 QRs
    rounding = 4 * eps * width * (2 * swaps + n)
    return Reordered(ts, swaps, discarded, rounding)
