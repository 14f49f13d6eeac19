"""Compact two-site DMRG ground-state search for nearest-neighbour chains.

The Hamiltonian is a matrix product operator (MPO) with tensors shaped
(left, right, out, in): ``W[w, x, s, t] = <s| op |t>``. `chain_mpo` builds
it for H = sum_i h_i + sum_i sum_k c_k A_k(i) B_k(i+1) with a finite-state
construction (common practice; Schollwöck, Ann. Phys. 326, 96 (2011),
Sec. 6). The local two-site problem is solved with scipy's eigsh on a
LinearOperator, and the bond is split by SVD and truncated to ``bond_dim``.

Everything is deterministic: the start state comes from
numpy.random.default_rng(seed) and every Lanczos run starts from the current
two-site tensor.

Model conventions (Pauli matrices) match ``tests/reference/spin.py``::

    tfim_mpo:  H = -sum X X - g sum Z
    xx_mpo:    H = -1/2 sum (X X + Y Y)
    xxz_mpo:   H = J/4 sum (X X + Y Y + delta Z Z)

Example
-------
>>> import groundstate
>>> run = groundstate.two_site_ground_state(groundstate.xx_mpo(16), bond_dim=16)
>>> tensors = run.tensors          # list of (left, phys, right) arrays
"""

import math
from collections import namedtuple

import numpy as np
from scipy.sparse.linalg import LinearOperator, eigsh

__all__ = [
    "chain_mpo",
    "tfim_mpo",
    "xx_mpo",
    "xxz_mpo",
    "two_site_ground_state",
    "mpo_expectation",
    "GroundState",
]

_I2 = np.eye(2)
_X = np.array([[0.0, 1.0], [1.0, 0.0]])
_Z = np.diag([1.0, -1.0])
# X X + Y Y = 2 (S+ S- + S- S+) with S+ = |0><1| in the Z basis: real operators only
_SP = np.array([[0.0, 1.0], [0.0, 0.0]])
_SM = _SP.T

GroundState = namedtuple("GroundState", "tensors energy sweep_energies max_discarded")
GroundState.__doc__ = """Result of `two_site_ground_state`.

Attributes
----------
tensors : list of ndarray
    Normalised site tensors (left, phys, right), boundary bonds of size 1.
energy : float
    <psi|H|psi> of the returned (truncated) state.
sweep_energies : list of float
    Last local (Lanczos) energy of each full right-and-back sweep.
max_discarded : float
    Largest discarded weight of the final sweep.
"""


def chain_mpo(L, onsite, couplings):
    """MPO of H = sum_i onsite(i) + sum_i sum_k c_k A_k(i) B_k(i+1).

    Parameters
    ----------
    L : int
        Number of sites.
    onsite : ndarray, shape (d, d)
        Single-site term, the same on every site.
    couplings : list of (float, ndarray, ndarray)
        Bond terms (c_k, A_k, B_k) on every nearest-neighbour pair.

    Returns
    -------
    list of ndarray
        Tensors (left, right, out, in); bond 0 is "nothing placed yet", the
        last bond "Hamiltonian complete". Boundary bonds have size 1.
    """
    d = onsite.shape[0]
    K = len(couplings)
    w = K + 2
    W = np.zeros((w, w, d, d), dtype=np.result_type(onsite, *[a for _, a, _ in couplings]))
    W[0, 0] = W[-1, -1] = np.eye(d)
    W[0, -1] = onsite
    for k, (c, A, B) in enumerate(couplings, start=1):
        W[0, k] = c * A
        W[k, -1] = B
    return [W[:1]] + [W.copy() for _ in range(L - 2)] + [W[:, -1:]]


def tfim_mpo(L, g):
    """Transverse-field Ising chain H = -sum X X - g sum Z.

    Parameters
    ----------
    L : int
        Number of sites.
    g : float
        Transverse field (1: critical).

    Returns
    -------
    list of ndarray
    """
    return chain_mpo(L, -g * _Z, [(-1.0, _X, _X)])


def xxz_mpo(L, delta, J=1.0):
    """XXZ chain H = J/4 sum (X X + Y Y + delta Z Z).

    Parameters
    ----------
    L : int
        Number of sites.
    delta : float
        Anisotropy (1: Heisenberg).
    J : float
        Exchange constant.

    Returns
    -------
    list of ndarray
    """
    return chain_mpo(
        L,
        np.zeros((2, 2)),
        [(J / 2, _SP, _SM), (J / 2, _SM, _SP), (J * delta / 4, _Z, _Z)],
    )


def xx_mpo(L):
    """XX chain H = -1/2 sum (X X + Y Y).

    Parameters
    ----------
    L : int
        Number of sites.

    Returns
    -------
    list of ndarray
    """
    return chain_mpo(L, np.zeros((2, 2)), [(-1.0, _SP, _SM), (-1.0, _SM, _SP)])


def _left_env(E, A, W):
    # E[a', w, a] -> E[b', x, b]
    T = np.tensordot(E, A, axes=(2, 0))  # a' w s b
    T = np.tensordot(T, W, axes=([1, 2], [0, 3]))  # a' b x s'
    return np.tensordot(A.conj(), T, axes=([0, 1], [0, 3]))  # b' b x


def _right_env(E, B, W):
    # E[b', x, b] -> E[a', w, a]
    T = np.tensordot(B, E, axes=(2, 2))  # a s b' x
    T = np.tensordot(T, W, axes=([1, 3], [3, 1]))  # a b' w s'
    return np.tensordot(B.conj(), T, axes=([1, 2], [3, 1]))  # a' a w


def _as_env(E):
    # tensordot results come out (bra, ket, mpo); store as (bra, mpo, ket)
    return E.transpose(0, 2, 1)


def _two_site_operator(Lenv, W1, W2, Renv, shape, dtype):
    def matvec(v):
        theta = v.reshape(shape)  # a s t b
        T = np.tensordot(Lenv, theta, axes=(2, 0))  # a' w s t b
        T = np.tensordot(T, W1, axes=([1, 2], [0, 3]))  # a' t b x s'
        T = np.tensordot(T, W2, axes=([1, 3], [3, 0]))  # a' b s' y t'
        T = np.tensordot(T, Renv, axes=([1, 3], [2, 1]))  # a' s' t' b'
        return T.reshape(-1)

    n = int(np.prod(shape))
    return LinearOperator((n, n), matvec=matvec, dtype=dtype)


def _solve_local(op, theta, tol):
    n = theta.size
    if n <= 64:
        H = op.matmat(np.eye(n, dtype=op.dtype))
        w, v = np.linalg.eigh((H + H.conj().T) / 2)
        return w[0], v[:, 0]
    w, v = eigsh(op, k=1, which="SA", v0=theta.reshape(-1), tol=tol)
    return w[0], v[:, 0]


def _split(theta, bond_dim, cutoff):
    a, s, t, b = theta.shape
    U, S, Vh = np.linalg.svd(theta.reshape(a * s, t * b), full_matrices=False)
    weights = S**2 / np.sum(S**2)
    keep = max(1, min(bond_dim, int(np.sum(weights > cutoff))))
    discarded = float(weights[keep:].sum())
    S = S[:keep] / np.linalg.norm(S[:keep])
    return U[:, :keep].reshape(a, s, keep), S, Vh[:keep].reshape(keep, t, b), discarded


def _random_mps(dims, bond_dim, rng, dtype):
    L = len(dims)
    # exact Python integers: prod(dims) overflows int64 for long chains
    chis = [min(bond_dim, math.prod(dims[:i]), math.prod(dims[i:])) for i in range(L + 1)]
    tensors = []
    for i, d in enumerate(dims):
        shape = (chis[i], d, chis[i + 1])
        A = rng.standard_normal(shape)
        if np.issubdtype(dtype, np.complexfloating):
            A = A + 1j * rng.standard_normal(shape)
        tensors.append(A.astype(dtype))
    # right-canonicalise by QR from the right end
    for i in range(L - 1, 0, -1):
        a, d, b = tensors[i].shape
        Q, R = np.linalg.qr(tensors[i].reshape(a, d * b).T)
        tensors[i] = Q.T.reshape(-1, d, b)
        tensors[i - 1] = np.tensordot(tensors[i - 1], R.T, axes=(2, 0))
    tensors[0] = tensors[0] / np.linalg.norm(tensors[0])
    return tensors


def two_site_ground_state(
    mpo, bond_dim, *, sweeps=20, energy_tol=1e-11, cutoff=1e-14, lanczos_tol=1e-12, seed=0,
    warmup_dim=8,
):
    """Variational ground state of an MPO by two-site DMRG sweeps.

    Parameters
    ----------
    mpo : list of ndarray
        MPO tensors (left, right, out, in), boundary bonds of size 1.
    bond_dim : int
        Largest bond dimension kept.
    sweeps : int
        Maximum number of right-and-back sweeps.
    energy_tol : float
        Stop when the energy changes by less than this between sweeps.
    cutoff : float
        Schmidt weights (squared values, normalised) at or below this are
        dropped even when ``bond_dim`` would allow them.
    lanczos_tol : float
        eigsh tolerance of the local problem.
    seed : int
        Seed of the random start state.
    warmup_dim : int
        Bond dimension of the first sweep, doubled each sweep up to
        ``bond_dim``; cheap early sweeps leave Lanczos a good start vector.
        Convergence is only tested at the full bond dimension.

    Returns
    -------
    GroundState
    """
    L = len(mpo)
    dims = [W.shape[2] for W in mpo]
    dtype = np.result_type(np.float64, *mpo)
    mps = _random_mps(dims, bond_dim, np.random.default_rng(seed), dtype)
    one = np.ones((1, 1, 1), dtype=dtype)
    Lenv = [one] + [None] * (L - 1)
    Renv = [None] * (L - 1) + [one]
    for i in range(L - 1, 0, -1):
        Renv[i - 1] = _as_env(_right_env(Renv[i], mps[i], mpo[i]))

    history = []
    energy = np.inf
    for sweep in range(sweeps):
        chi = min(bond_dim, warmup_dim * 2**sweep)
        worst = 0.0
        for direction in ("right", "left"):
            order = range(L - 1) if direction == "right" else range(L - 2, -1, -1)
            for i in order:
                theta = np.tensordot(mps[i], mps[i + 1], axes=(2, 0))
                op = _two_site_operator(Lenv[i], mpo[i], mpo[i + 1], Renv[i + 1], theta.shape,
                                        dtype)
                e, vec = _solve_local(op, theta, lanczos_tol)
                A, S, B, disc = _split(vec.reshape(theta.shape), chi, cutoff)
                worst = max(worst, disc)
                if direction == "right":
                    mps[i] = A
                    mps[i + 1] = S[:, None, None] * B
                    Lenv[i + 1] = _as_env(_left_env(Lenv[i], A, mpo[i]))
                else:
                    mps[i] = A * S[None, None, :]
                    mps[i + 1] = B
                    Renv[i] = _as_env(_right_env(Renv[i + 1], B, mpo[i + 1]))
        history.append(float(e))
        converged = chi == bond_dim and abs(energy - e) < energy_tol
        energy = float(e)
        if converged:
            break
    return GroundState(mps, mpo_expectation(mps, mpo), history, worst)


def mpo_expectation(mps, mpo):
    """<psi|H|psi> / <psi|psi> of site tensors and an MPO, by environment contraction.

    Parameters
    ----------
    mps : list of ndarray
        Site tensors (left, phys, right).
    mpo : list of ndarray
        MPO tensors (left, right, out, in).

    Returns
    -------
    float
    """
    E = np.ones((1, 1, 1))
    N = np.ones((1, 1))
    for A, W in zip(mps, mpo):
        E = _as_env(_left_env(E, A, W))
        N = np.einsum("ab,asc,bsd->cd", N, A.conj(), A)
    return float((E[0, 0, 0] / N[0, 0]).real)
