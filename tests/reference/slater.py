"""Exact MPS of free-fermion Slater determinants and their mode entropies (Peschel).

A Slater determinant prod_k b_k^dag |0>, b_k^dag = sum_i phi_ik c_i^dag, is
built as an MPS over modes in Jordan-Wigner order (basis |0>, |1>;
c_i^dag = Z_1 ... Z_{i-1} sigma_i^+): each b_k^dag is an MPO of bond
dimension 2 (W = [[Z, phi_i sigma^+], [0, 1]]), applied to the state and
followed by an SVD recompression that drops singular values below 1e-14 of
the largest (common practice; the dropped weight is recorded).  The reduced
density matrix of a set of modes of a Gaussian state is fixed by the
correlation matrix restricted to them, C_ij = <c_i^dag c_j>, and its entropy
is sum_k h(nu_k) over the eigenvalues nu_k of that block (Peschel,
J. Phys. A 36, L205 (2003)).
"""

import numpy as np

__all__ = [
    "block_entropy",
    "interleaved",
    "merge_pairs",
    "orbitals",
    "peschel_mutual",
    "slater_mps",
    "slater_vector",
    "vector_mps",
]

_Z = np.diag([1.0, -1.0])
_UP = np.array([[0.0, 0.0], [1.0, 0.0]])       # |1><0|


def orbitals(L, stagger=0.0, hopping=1.0, filling=None):
    """Lowest orbitals of H = -t sum (c_i^dag c_{i+1} + h.c.) + stagger sum (-1)^i n_i.

    Returns (phi, C): phi (L, N_F) real orbitals, C = phi phi^T (real symmetric).
    """
    h = np.diag(stagger * (-1.0) ** np.arange(L))
    idx = np.arange(L - 1)
    h[idx, idx + 1] = h[idx + 1, idx] = -hopping
    _, vectors = np.linalg.eigh(h)
    phi = vectors[:, :(L // 2 if filling is None else filling)]
    return phi, phi @ phi.T


def _apply(tensors, phi, lo, hi):
    """b^dag |psi> for b^dag = sum_{lo <= i <= hi} phi_i c_i^dag, as an MPS whose bonds
    double inside [lo, hi] (the string Z to the left, identity to the right)."""
    out = []
    for i, a in enumerate(tensors):
        if i < lo or i > hi:
            out.append(np.einsum("st,atb->asb", _Z, a) if i < lo else a)
            continue
        w = np.zeros((2, 2, 2, 2))               # (left, right, out, in)
        w[0, 0], w[0, 1], w[1, 1] = _Z, phi[i] * _UP, np.eye(2)
        if i == lo:
            w = w[:1]
        if i == hi:
            w = w[:, 1:]
        t = np.einsum("wxst,atb->awsbx", w, a)
        l, wl, d, r, wr = t.shape
        out.append(t.reshape(l * wl, d, r * wr))
    return out


def _compress(tensors, rel=1e-14):
    """Left-canonical QR sweep, then right-to-left SVDs dropping s < rel * s_max."""
    ts = [t.copy() for t in tensors]
    for i in range(len(ts) - 1):
        l, d, r = ts[i].shape
        q, rr = np.linalg.qr(ts[i].reshape(l * d, r))
        ts[i] = q.reshape(l, d, -1)
        ts[i + 1] = np.tensordot(rr, ts[i + 1], axes=(1, 0))
    dropped = 0.0
    for i in range(len(ts) - 1, 0, -1):
        l, d, r = ts[i].shape
        u, s, vh = np.linalg.svd(ts[i].reshape(l, d * r), full_matrices=False)
        keep = max(1, int(np.count_nonzero(s > rel * s[0])))
        dropped += float(np.sum(s[keep:] ** 2) / np.sum(s ** 2))
        ts[i] = vh[:keep].reshape(keep, d, r)
        ts[i - 1] = np.tensordot(ts[i - 1], u[:, :keep] * s[:keep], axes=(2, 0))
    return ts, dropped


def localized(phi):
    """An orthonormal basis of the occupied space made of localized orbitals, ordered by
    position: selected columns of the density matrix (pivoted QR of phi^T), Loewdin
    orthonormalised (Damle, Lin, Ying, J. Chem. Theory Comput. 11, 1463 (2015))."""
    from scipy.linalg import qr

    _, _, piv = qr(phi.T, pivoting=True, mode="economic")
    cols = np.sort(piv[:phi.shape[1]])
    psi = (phi @ phi.T)[:, cols]
    w, v = np.linalg.eigh(psi.T @ psi)
    return psi @ (v / np.sqrt(w)) @ v.T


def slater_mps(phi):
    """Site tensors (left, 2, right) of prod_k b_k^dag |0> and the total dropped weight.

    The state depends only on the occupied space; its localized basis keeps every
    partial product weakly entangled, so the bonds stay small for gapped chains.
    """
    phi = localized(phi)
    L = phi.shape[0]
    vac = np.zeros((1, 2, 1))
    vac[0, 0, 0] = 1.0
    tensors, dropped = [vac.copy() for _ in range(L)], 0.0
    for k in range(phi.shape[1]):
        # amplitudes below 1e-14 of the largest are left out (their weight is recorded)
        keep = np.nonzero(np.abs(phi[:, k]) > 1e-14 * np.abs(phi[:, k]).max())[0]
        outside = np.delete(phi[:, k], keep)
        dropped += float(outside @ outside)
        tensors, lost = _compress(_apply(tensors, phi[:, k], keep[0], keep[-1]))
        dropped += lost
    return tensors, dropped


def slater_vector(phi):
    """Amplitudes of prod_k b_k^dag |0>: psi(n) = det phi[occupied sites, :] for the
    configurations with N_F occupied modes (site 0 the slowest index)."""
    from itertools import combinations

    L, nf = phi.shape
    psi = np.zeros(2 ** L)
    occupied = np.array(list(combinations(range(L), nf)))
    index = (2 ** (L - 1 - occupied)).sum(axis=1)
    psi[index] = np.linalg.det(phi[occupied])
    return psi


def vector_mps(psi, L, rel=1e-14):
    """Successive SVDs of a small state, dropping singular values below ``rel`` of the
    largest at each cut; returns (tensors, dropped weight)."""
    tensors, dropped = [], 0.0
    rest = np.asarray(psi).reshape(1, -1)
    for _ in range(L - 1):
        a = rest.shape[0]
        u, s, vh = np.linalg.svd(rest.reshape(a * 2, -1), full_matrices=False)
        keep = max(1, int(np.count_nonzero(s > rel * s[0])))
        dropped += float(np.sum(s[keep:] ** 2) / np.sum(s ** 2))
        tensors.append(u[:, :keep].reshape(a, 2, keep))
        rest = s[:keep, None] * vh[:keep]
    tensors.append(rest.reshape(rest.shape[0], 2, 1))
    return tensors, dropped


def interleaved(phi_a, phi_b):
    """Orbitals of two species on 2L modes in the order (1a, 1b, 2a, 2b, ...)."""
    L = phi_a.shape[0]
    out = np.zeros((2 * L, phi_a.shape[1] + phi_b.shape[1]))
    out[0::2, :phi_a.shape[1]] = phi_a
    out[1::2, phi_a.shape[1]:] = phi_b
    return out


def _h(nu):
    nu = np.clip(np.asarray(nu, dtype=float), 0.0, 1.0)
    out = np.zeros_like(nu)
    inside = (nu > 0) & (nu < 1)
    p = nu[inside]
    out[inside] = -p * np.log(p) - (1 - p) * np.log(1 - p)
    return out


def block_entropy(C, modes):
    """von Neumann entropy (nats) of the modes ``modes`` of a Gaussian state."""
    return float(_h(np.linalg.eigvalsh(C[np.ix_(modes, modes)])).sum())


def peschel_mutual(C, groups):
    """(s, I): entropies of each group of modes and their mutual information matrix."""
    n = len(groups)
    s = np.array([block_entropy(C, g) for g in groups])
    mi = np.zeros((n, n))
    for i in range(n):
        for j in range(i + 1, n):
            mi[i, j] = mi[j, i] = s[i] + s[j] - block_entropy(C, list(groups[i]) + list(groups[j]))
    return s, mi


def merge_pairs(tensors):
    """Merge modes (2k, 2k + 1) into one site of dimension 4, basis index 2 n_a + n_b
    (empty, b, a, both: parities 0, 1, 1, 0)."""
    out = []
    for a, b in zip(tensors[::2], tensors[1::2]):
        t = np.tensordot(a, b, axes=(2, 0))
        out.append(t.reshape(a.shape[0], 4, b.shape[2]))
    return out
