"""Dense references for mixed states: thermal density matrices, partial traces,
exact MPOs and purifications, and Gaussian (free-fermion) mixed states.

Density matrices are dense arrays of shape (d^N, d^N), site 0 the slowest
index.  An exact MPO is the operator Schmidt decomposition of rho (successive
SVDs of the vectorised operator; Zanardi, Phys. Rev. A 63, 040304 (2001));
a purification is the state sum_ij (rho^(1/2))_ij |i>|j>, the ancilla of
site k the k-th factor of |j>.
"""

from math import prod

import numpy as np
import scipy.linalg

__all__ = ["thermal", "partial_trace", "renyi2", "entropy", "mpo_from_dense",
           "purification_from_dense", "chain_from_vector", "operator_schmidt_values",
           "gaussian_mpo", "gaussian_renyi2"]


def thermal(H, beta):
    """exp(-beta H) / Z by dense diagonalisation (scipy.linalg.eigh)."""
    H = H.toarray() if hasattr(H, "toarray") else np.asarray(H)
    e, v = scipy.linalg.eigh(H)
    w = np.exp(-beta * (e - e.min()))
    return (v * (w / w.sum())) @ v.conj().T


def partial_trace(rho, dims, keep):
    """Reduced density matrix of the sites in ``keep`` (sorted) by dense partial trace."""
    n = len(dims)
    t = rho.reshape(*dims, *dims)
    drop = [i for i in range(n) if i not in keep]
    for k, i in enumerate(sorted(drop, reverse=True)):
        m = t.ndim // 2
        t = np.trace(t, axis1=i, axis2=i + m)
    dk = prod(dims[i] for i in keep)
    return t.reshape(dk, dk)


def renyi2(rho):
    """-ln Tr rho^2 of a unit-trace density matrix."""
    return float(-np.log(np.real(np.trace(rho @ rho))))


def entropy(rho):
    """von Neumann entropy -Tr rho ln rho (eigenvalues by scipy.linalg.eigvalsh)."""
    p = scipy.linalg.eigvalsh(rho)
    p = p[p > 1e-15]
    return float(-(p * np.log(p)).sum())


def chain_from_vector(psi, dims):
    """Exact site tensors (left, d, right) of a vector over sites with dims (successive SVDs)."""
    tensors, rest, left = [], np.asarray(psi).reshape(1, -1), 1
    for d in dims[:-1]:
        u, s, vh = np.linalg.svd(rest.reshape(left * d, -1), full_matrices=False)
        keep = max(1, int(np.count_nonzero(s > 1e-14 * s[0])))
        tensors.append(u[:, :keep].reshape(left, d, keep))
        rest, left = s[:keep, None] * vh[:keep], keep
    tensors.append(rest.reshape(left, dims[-1], 1))
    return tensors


def _interleave(op, dims, other):
    """Array (k_1..k_N, b_1..b_N) -> vector over sites (k_1 b_1), (k_2 b_2), ..."""
    n = len(dims)
    t = op.reshape(*dims, *other)
    order = [x for i in range(n) for x in (i, i + n)]
    return t.transpose(order).reshape(-1)


def mpo_from_dense(rho, dims):
    """Exact MPO site tensors (left, ket, bra, right) of a dense operator."""
    vec = _interleave(rho, dims, dims)
    pairs = chain_from_vector(vec, [d * d for d in dims])
    return [t.reshape(t.shape[0], d, d, t.shape[2]) for t, d in zip(pairs, dims)]


def purification_from_dense(rho, dims):
    """Site tensors (left, phys, ancilla, right) of the purification with amplitudes rho^(1/2)."""
    e, v = scipy.linalg.eigh(rho)
    root = (v * np.sqrt(np.clip(e, 0, None))) @ v.conj().T
    vec = _interleave(root, dims, dims)
    pairs = chain_from_vector(vec, [d * d for d in dims])
    return [t.reshape(t.shape[0], d, d, t.shape[2]) for t, d in zip(pairs, dims)]


def operator_schmidt_values(rho, dims, l):
    """Singular values of rho reshaped (ket_A bra_A) x (ket_B bra_B), over ||rho||_2."""
    n = len(dims)
    t = rho.reshape(*dims, *dims)
    a = list(range(l)) + [n + i for i in range(l)]
    b = list(range(l, n)) + [n + i for i in range(l, n)]
    da = prod(dims[:l]) ** 2
    s = scipy.linalg.svdvals(t.transpose(a + b).reshape(da, -1))
    return s / np.linalg.norm(s)


# --- Gaussian mixed states ------------------------------------------------------

def _hop_gate(theta):
    """exp(-i theta (s+ s- + s- s+)) on two sites, basis |n_j n_j+1>, occupied = 1.

    With the Jordan-Wigner map c_j = (prod_{k<j} Z_k) s-_j, s- = |0><1|, the
    nearest-neighbour hopping c_j^dagger c_j+1 + h.c. is exactly
    s+_j s-_j+1 + s-_j s+_j+1 (no string between neighbours).
    """
    g = np.eye(4, dtype=complex)
    c, s = np.cos(theta), -1j * np.sin(theta)
    g[1, 1] = g[2, 2] = c
    g[1, 2] = g[2, 1] = s
    return g


def _apply_gate(mpo, j, gate):
    """rho -> g rho g^dagger on sites j, j+1 of an MPO, split by an exact SVD."""
    a, b = mpo[j], mpo[j + 1]
    t = np.einsum("lkbm,mqcr->lkqbcr", a, b)
    lft, d1, d2, _, _, rgt = t.shape
    g = gate.reshape(d1, d2, d1, d2)
    t = np.einsum("xykq,lkqbcr->lxybcr", g, t)
    t = np.einsum("lxybcr,zwbc->lxyzwr", t, g.conj())
    m = t.transpose(0, 1, 3, 2, 4, 5).reshape(lft * d1 * d1, d2 * d2 * rgt)
    u, s, vh = np.linalg.svd(m, full_matrices=False)
    keep = max(1, int(np.count_nonzero(s > 1e-14 * s[0])))
    mpo[j] = u[:, :keep].reshape(lft, d1, d1, keep)
    mpo[j + 1] = (s[:keep, None] * vh[:keep]).reshape(keep, d2, d2, rgt)


def gaussian_mpo(occupations, layers):
    """Exact MPO and correlation matrix of a free-fermion Gaussian mixed state.

    rho = G (prod_j diag(1 - n_j, n_j)) G^dagger with G a brick-wall circuit of
    hopping gates exp(-i theta (c_j^dagger c_j+1 + h.c.)); ``layers`` is a list
    of (start, thetas) with gates on bonds start, start + 2, ...  rho is the
    thermal state exp(-H)/Z of the quadratic H = sum_k eps_k f_k^dagger f_k with
    f = V c, so it is Gaussian; its correlation matrix C_ij = Tr(rho c_i^dagger c_j)
    follows from the single-particle rotations.

    Returns
    -------
    mpo : list of ndarray (left, ket, bra, right)
    corr : ndarray (L, L)
    """
    n = np.asarray(occupations, dtype=float)
    L = n.size
    mpo = [np.diag([1 - x, x]).astype(complex).reshape(1, 2, 2, 1) for x in n]
    corr = np.diag(n).astype(complex)
    for start, thetas in layers:
        for j, theta in zip(range(start, L - 1, 2), thetas):
            _apply_gate(mpo, j, _hop_gate(theta))
            # single-particle form: c -> u c on (j, j+1) with u = exp(-i theta sigma_x)
            u = np.eye(L, dtype=complex)
            u[j:j + 2, j:j + 2] = [[np.cos(theta), -1j * np.sin(theta)],
                                   [-1j * np.sin(theta), np.cos(theta)]]
            corr = u.conj() @ corr @ u.T
    return mpo, corr


def gaussian_renyi2(corr, sites):
    """S_2 of a block of a Gaussian state from its correlation matrix restricted to the block.

    S_2 = -sum_k ln(nu_k^2 + (1 - nu_k)^2), nu_k the eigenvalues of C_A
    (Peschel, J. Phys. A 36, L205 (2003); the reduced state of a Gaussian
    state, pure or mixed, is Gaussian with correlation matrix C_A).
    """
    nu = scipy.linalg.eigvalsh(corr[np.ix_(sites, sites)])
    nu = np.clip(nu, 0, 1)
    return float(-np.log(nu ** 2 + (1 - nu) ** 2).sum())


def ancilla_gate(tensors, j, u):
    """Apply a unitary u (D_j D_j+1 square) to the ancillas of sites j, j+1 of a purification.

    The two sites are merged, rotated and split again by an exact SVD (no
    truncation beyond rounding), so the physical state is unchanged (HJW).
    """
    out = list(tensors)
    a, b = out[j], out[j + 1]
    t = np.einsum("lpar,rqbs->lpaqbs", a, b)
    l, d1, a1, d2, a2, r = t.shape
    t = np.einsum("xyab,lpaqbs->lpxqys", u.reshape(a1, a2, a1, a2), t)
    uu, s, vh = np.linalg.svd(t.reshape(l * d1 * a1, d2 * a2 * r), full_matrices=False)
    keep = max(1, int(np.count_nonzero(s > 1e-14 * s[0])))
    out[j] = uu[:, :keep].reshape(l, d1, a1, keep)
    out[j + 1] = (s[:keep, None] * vh[:keep]).reshape(keep, d2, a2, r)
    return out


def haar_unitary(rng, n):
    """Haar-random n x n unitary (QR of a complex Gaussian matrix with the phases fixed;
    Mezzadri, Notices AMS 54, 592 (2007))."""
    z = rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))
    q, r = np.linalg.qr(z)
    return q * (np.diagonal(r) / np.abs(np.diagonal(r)))


def dense_from_mpo(mpo):
    """The dense operator (prod d, prod d) of MPO site tensors (left, ket, bra, right)."""
    t = mpo[0]
    for w in mpo[1:]:
        t = np.tensordot(t, w, ([t.ndim - 1], [0]))
    t = t.reshape(t.shape[1:-1])
    n = len(mpo)
    kets, bras = list(range(0, 2 * n, 2)), list(range(1, 2 * n, 2))
    d = prod(w.shape[1] for w in mpo)
    return t.transpose(kets + bras).reshape(d, d)


def pure_mpo(tensors):
    """|psi><psi| as an MPO (left, ket, bra, right) from MPS site tensors (left, phys, right)."""
    out = []
    for a in tensors:
        w = np.einsum("lpr,mqs->lmpqrs", a, a.conj())
        l, m, p, q, r, s = w.shape
        out.append(w.reshape(l * m, p, q, r * s))
    return out


def jordan_wigner(L):
    """Dense annihilators c_j = (prod_{k<j} Z_k) s-_j with s- = |0><1| (occupied = 1)."""
    z, lower, eye = np.diag([1.0, -1.0]), np.array([[0.0, 1.0], [0.0, 0.0]]), np.eye(2)
    ops = []
    for j in range(L):
        m = np.ones((1, 1))
        for k in range(L):
            m = np.kron(m, z if k < j else lower if k == j else eye)
        ops.append(m)
    return ops
