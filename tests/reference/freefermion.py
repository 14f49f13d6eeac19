"""Exact block entropies of free-fermion chains from correlation matrices.

The reduced density matrix of a block of a Gaussian (free-fermion) state is
fixed by the two-point correlations restricted to the block (Peschel,
J. Phys. A 36, L205 (2003); Peschel & Eisler, J. Phys. A 42, 504003 (2009)).
For number-conserving chains the block matrix is C_ij = <c_i^dag c_j>; for
the transverse-field Ising chain it is the Majorana covariance matrix.

Hamiltonian conventions (Pauli matrices, sites 0..L-1)::

    H_XX    = -1/2 sum_i (X_i X_{i+1} + Y_i Y_{i+1})
            = -sum_i (c_i^dag c_{i+1} + h.c.)            (bulk, after Jordan-Wigner)
    H_Ising = -sum_i X_i X_{i+1} - g sum_i Z_i

Periodic boundaries add the bond (L-1, 0). Under Jordan-Wigner that bond
picks up the factor -(-1)^N_F (Lieb, Schultz, Mattis, Ann. Phys. 16, 407
(1961)): fermions are periodic in a sector of odd fermion number and
antiperiodic in an even one. The XX ring is taken at half filling
N_F = L/2 with L even; for L = 2 mod 4 the periodic orbitals k = 2 pi n / L
close a shell and the ground state is non-degenerate (L = 0 mod 4 also closes
a shell, with antiperiodic orbitals). The Ising ring ground state lies in
the even-parity (antiperiodic) sector for g > 0.

The open Ising chain with g < 1 has a quasi-degenerate doublet (splitting of
order g^L); the functions here return the true ground state, the
even-parity member, and raise ValueError once the splitting is below float64
resolution (e.g. g = 0.5 beyond L ~ 40).

All entropies are in nats. `tests/reference/spin.py` builds the same
Hamiltonians for exact diagonalisation.
"""

import numpy as np

__all__ = [
    "xx_entropies",
    "xx_ground_energy",
    "xx_correlation",
    "xx_spectrum",
    "ising_entropies",
    "ising_ground_energy",
    "ising_covariance",
    "ising_spectrum",
    "entropy_from_occupations",
    "spectrum_from_occupations",
]

_BOUNDARIES = ("open", "periodic")


def _check(L, boundary):
    if boundary not in _BOUNDARIES:
        raise ValueError(f"boundary must be one of {_BOUNDARIES}, got {boundary!r}")
    if L < 2:
        raise ValueError(f"need at least two sites, got L={L}")


def _xx_hopping(L, boundary):
    """Single-particle matrix h with H = sum_ij h_ij c_i^dag c_j at half filling."""
    _check(L, boundary)
    if L % 2:
        raise ValueError(f"half filling needs an even L, got L={L}")
    h = np.zeros((L, L))
    idx = np.arange(L - 1)
    h[idx, idx + 1] = h[idx + 1, idx] = -1.0
    if boundary == "periodic":
        # JW boundary factor -(-1)^N_F with N_F = L/2: bond term is -t_b (c^dag c + h.c.)
        t_b = -((-1) ** (L // 2))
        h[L - 1, 0] = h[0, L - 1] = -t_b
    return h


def _xx_orbitals(L, boundary):
    h = _xx_hopping(L, boundary)
    energies, vectors = np.linalg.eigh(h)
    n = L // 2
    gap = energies[n] - energies[n - 1]
    if gap < 1e-12 * max(1.0, abs(energies).max()):
        raise ValueError(f"half-filled shell is degenerate for L={L}, boundary={boundary!r}")
    return energies, vectors


def xx_correlation(L, boundary="open"):
    """Ground-state correlation matrix C_ij = <c_i^dag c_j> of the XX chain.

    Parameters
    ----------
    L : int
        Number of sites (even).
    boundary : {"open", "periodic"}
        Chain or ring.

    Returns
    -------
    ndarray, shape (L, L)
        Real symmetric matrix, projector onto the L/2 occupied orbitals.
    """
    _, vectors = _xx_orbitals(L, boundary)
    occ = vectors[:, : L // 2]
    return occ @ occ.T


def xx_ground_energy(L, boundary="open"):
    """Ground-state energy of H_XX (module convention), sum of occupied levels.

    Parameters
    ----------
    L : int
        Number of sites (even).
    boundary : {"open", "periodic"}
        Chain or ring.

    Returns
    -------
    float
    """
    energies, _ = _xx_orbitals(L, boundary)
    return float(energies[: L // 2].sum())


def _binary_entropy(p, alpha):
    p = np.clip(p, 0.0, 1.0)
    q = 1.0 - p
    if alpha == 1:
        with np.errstate(divide="ignore", invalid="ignore"):
            terms = -np.where(p > 0, p * np.log(p), 0.0) - np.where(q > 0, q * np.log(q), 0.0)
        return terms.sum()
    if np.isinf(alpha):
        return -np.log(np.maximum(p, q)).sum()
    return np.log(p**alpha + q**alpha).sum() / (1.0 - alpha)


def entropy_from_occupations(occupations, alpha=1):
    """Entropy of a Gaussian block from its mode occupations.

    Parameters
    ----------
    occupations : array_like
        Eigenvalues zeta_k in [0, 1] of the block correlation matrix; each
        mode contributes a two-level factor (zeta_k, 1 - zeta_k).
    alpha : float
        Rényi order; 1 is von Neumann, ``np.inf`` the min-entropy.

    Returns
    -------
    float
        Entropy in nats.
    """
    return float(_binary_entropy(np.asarray(occupations, dtype=float), alpha))


def xx_entropies(L, boundary="open", alpha=1):
    """Exact block entropies S(l), l = 1..L-1, of the XX ground state.

    Parameters
    ----------
    L : int
        Number of sites (even).
    boundary : {"open", "periodic"}
        Chain or ring; blocks are sites 0..l-1.
    alpha : float
        Rényi order (1: von Neumann).

    Returns
    -------
    ndarray, shape (L-1,)
        Entropies in nats.
    """
    C = xx_correlation(L, boundary)
    return np.array(
        [entropy_from_occupations(np.linalg.eigvalsh(C[:l, :l]), alpha) for l in range(1, L)]
    )


def spectrum_from_occupations(occupations, cutoff=1e-14, max_values=None):
    """Eigenvalues of a Gaussian reduced density matrix (Schmidt values squared).

    The eigenvalues are all products prod_k (p_k or 1 - p_k). Partial
    products below ``cutoff`` are pruned as they are built, which is exact
    for every eigenvalue >= cutoff because further factors are <= 1.

    Parameters
    ----------
    occupations : array_like
        Mode probabilities p_k in [0, 1].
    cutoff : float
        Smallest eigenvalue kept.
    max_values : int, optional
        Keep only the largest this many.

    Returns
    -------
    ndarray
        Descending eigenvalues >= cutoff.
    """
    p = np.clip(np.asarray(occupations, dtype=float), 0.0, 1.0)
    values = np.ones(1)
    for pk in p:
        values = np.concatenate([values * pk, values * (1.0 - pk)])
        values = values[values >= cutoff]
    values = np.sort(values)[::-1]
    return values if max_values is None else values[:max_values]


def xx_spectrum(L, l, boundary="open", cutoff=1e-14, max_values=None):
    """Entanglement spectrum of sites 0..l-1 in the XX ground state.

    Parameters
    ----------
    L : int
        Number of sites (even).
    l : int
        Block length, 1 <= l <= L-1.
    boundary : {"open", "periodic"}
        Chain or ring.
    cutoff, max_values
        See `spectrum_from_occupations`.

    Returns
    -------
    ndarray
        Descending squared Schmidt values.
    """
    C = xx_correlation(L, boundary)
    return spectrum_from_occupations(np.linalg.eigvalsh(C[:l, :l]), cutoff, max_values)


def _ising_majorana_matrix(L, g, boundary):
    """Real antisymmetric A with H_Ising = (i/4) sum_mn A_mn a_m a_n.

    Majoranas a_{2j} = (prod_{k<j} Z_k) X_j and a_{2j+1} = (prod_{k<j} Z_k) Y_j,
    so Z_j = -i a_{2j} a_{2j+1} and X_j X_{j+1} = -i a_{2j+1} a_{2j+2}.
    """
    _check(L, boundary)
    A = np.zeros((2 * L, 2 * L))
    j = np.arange(L)
    # -g Z_j = i g a_{2j} a_{2j+1}: coefficient c of i a_m a_n gives A_mn = 2c
    A[2 * j, 2 * j + 1] = 2.0 * g
    jb = np.arange(L - 1)
    # -X_j X_{j+1} = i a_{2j+1} a_{2j+2}
    A[2 * jb + 1, 2 * jb + 2] = 2.0
    if boundary == "periodic":
        # -X_{L-1} X_0 = -i P a_{2L-1} a_0 with P = prod Z = +1 in the ground-state sector
        A[2 * L - 1, 0] = -2.0
    return A - A.T


def ising_covariance(L, g, boundary="open"):
    """Ground-state Majorana covariance Gamma with <a_m a_n> = delta_mn + i Gamma_mn.

    Parameters
    ----------
    L : int
        Number of sites.
    g : float
        Transverse field (g = 1 is critical).
    boundary : {"open", "periodic"}
        Chain or ring (even-parity sector).

    Returns
    -------
    ndarray, shape (2L, 2L)
        Real antisymmetric covariance matrix.
    """
    M = 1j * _ising_majorana_matrix(L, g, boundary)
    w, v = np.linalg.eigh(M)
    if np.abs(w).min() < 1e3 * np.finfo(float).eps * np.abs(w).max():
        # an (exponentially) soft mode: the ground state is not resolved in float64
        raise ValueError(f"Ising chain L={L}, g={g}, {boundary}: quasi-degenerate ground state "
                         f"(smallest mode energy {np.abs(w).min():.1e}); use a shorter chain "
                         "or a larger field")
    # ground state: <a a^T> = 1 + sign(iA) (checked on a single mode)
    sign = (v * np.sign(w)) @ v.conj().T
    return (sign / 1j).real


def ising_ground_energy(L, g, boundary="open"):
    """Ground-state energy of H_Ising (module convention).

    Parameters
    ----------
    L : int
        Number of sites.
    g : float
        Transverse field.
    boundary : {"open", "periodic"}
        Chain or ring (even-parity sector, the ground state for g > 0).

    Returns
    -------
    float
        -1/4 sum |eig(iA)|, the filled Fermi sea of Bogoliubov modes.
    """
    w = np.linalg.eigvalsh(1j * _ising_majorana_matrix(L, g, boundary))
    return float(-0.25 * np.abs(w).sum())


def _ising_mode_probabilities(L, g, l, boundary):
    G = ising_covariance(L, g, boundary)[: 2 * l, : 2 * l]
    nu = np.linalg.eigvalsh(1j * G)
    # eigenvalues come in pairs +-nu_k; keep one per mode
    return (1.0 + np.sort(np.abs(nu))[::2]) / 2.0


def ising_entropies(L, g, boundary="open", alpha=1):
    """Exact block entropies S(l), l = 1..L-1, of the transverse-field Ising ground state.

    Parameters
    ----------
    L : int
        Number of sites.
    g : float
        Transverse field (g = 1 critical).
    boundary : {"open", "periodic"}
        Chain or ring; blocks are sites 0..l-1.
    alpha : float
        Rényi order (1: von Neumann).

    Returns
    -------
    ndarray, shape (L-1,)
        Entropies in nats.
    """
    return np.array(
        [
            entropy_from_occupations(_ising_mode_probabilities(L, g, l, boundary), alpha)
            for l in range(1, L)
        ]
    )


def ising_spectrum(L, g, l, boundary="open", cutoff=1e-14, max_values=None):
    """Entanglement spectrum of sites 0..l-1 in the Ising ground state.

    Parameters
    ----------
    L : int
        Number of sites.
    g : float
        Transverse field.
    l : int
        Block length.
    boundary : {"open", "periodic"}
        Chain or ring.
    cutoff, max_values
        See `spectrum_from_occupations`.

    Returns
    -------
    ndarray
        Descending squared Schmidt values.
    """
    return spectrum_from_occupations(
        _ising_mode_probabilities(L, g, l, boundary), cutoff, max_values
    )
