"""Exact diagonalisation of small spin-1/2 chains (scipy.sparse + eigsh).

Basis order: site 0 is the most significant bit, so a state vector of length
2**L reshaped to ``(2,) * L`` has its axes in site order. Bit 0 is the Z = +1
state. Pauli matrices throughout; conventions match
`reference.freefermion`::

    tfim:  H = -sum_i X_i X_{i+1} - g sum_i Z_i
    xx:    H = -1/2 sum_i (X_i X_{i+1} + Y_i Y_{i+1})
    xxz:   H = J/4 sum_i (X_i X_{i+1} + Y_i Y_{i+1} + delta Z_i Z_{i+1})
           (J = 1, delta = 1 is the Heisenberg antiferromagnet sum S_i . S_{i+1})

``boundary="periodic"`` adds the bond (L-1, 0). Sizes up to L = 18 fit in a
few hundred MB.
"""

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import eigsh

__all__ = ["pauli_sum", "tfim", "xx", "xxz", "ground_state", "MODELS"]


def _bonds(L, boundary):
    if boundary not in ("open", "periodic"):
        raise ValueError(f"boundary must be 'open' or 'periodic', got {boundary!r}")
    bonds = [(i, i + 1) for i in range(L - 1)]
    if boundary == "periodic" and L > 2:
        bonds.append((L - 1, 0))
    return bonds


def pauli_sum(L, terms):
    """Sparse matrix of a sum of Pauli strings.

    Parameters
    ----------
    L : int
        Number of qubits.
    terms : iterable of (complex, dict)
        Coefficient and a map site -> "X", "Y" or "Z".

    Returns
    -------
    scipy.sparse.csr_matrix
        Real if every term is real, complex otherwise.
    """
    dim = 2**L
    states = np.arange(dim, dtype=np.int64)
    rows, cols, vals = [], [], []
    for coef, ops in terms:
        flip = 0
        amp = np.full(dim, complex(coef))
        for site, op in ops.items():
            bit = (states >> (L - 1 - site)) & 1
            if op in ("X", "Y"):
                flip |= 1 << (L - 1 - site)
            if op == "Z":
                amp *= 1 - 2 * bit
            elif op == "Y":
                # Y|0> = i|1>, Y|1> = -i|0>
                amp *= 1j * (1 - 2 * bit)
            elif op != "X":
                raise ValueError(f"unknown Pauli {op!r}")
        rows.append(states ^ flip)
        cols.append(states)
        vals.append(amp)
    vals = np.concatenate(vals)
    if np.abs(vals.imag).max() == 0:
        vals = vals.real
    H = sp.coo_matrix((vals, (np.concatenate(rows), np.concatenate(cols))), shape=(dim, dim))
    return H.tocsr()


def tfim(L, g, boundary="open"):
    """Transverse-field Ising chain H = -sum X X - g sum Z.

    Parameters
    ----------
    L : int
        Number of sites.
    g : float
        Transverse field; g = 1 is the critical point.
    boundary : {"open", "periodic"}
        Chain or ring.

    Returns
    -------
    scipy.sparse.csr_matrix
    """
    terms = [(-1.0, {i: "X", j: "X"}) for i, j in _bonds(L, boundary)]
    terms += [(-g, {i: "Z"}) for i in range(L)]
    return pauli_sum(L, terms)


def xx(L, boundary="open"):
    """XX chain H = -1/2 sum (X X + Y Y).

    Parameters
    ----------
    L : int
        Number of sites.
    boundary : {"open", "periodic"}
        Chain or ring.

    Returns
    -------
    scipy.sparse.csr_matrix
    """
    terms = []
    for i, j in _bonds(L, boundary):
        terms += [(-0.5, {i: "X", j: "X"}), (-0.5, {i: "Y", j: "Y"})]
    return pauli_sum(L, terms)


def xxz(L, delta, boundary="open", J=1.0):
    """XXZ chain H = J/4 sum (X X + Y Y + delta Z Z).

    Parameters
    ----------
    L : int
        Number of sites.
    delta : float
        Anisotropy; 1 is the isotropic Heisenberg point.
    boundary : {"open", "periodic"}
        Chain or ring.
    J : float
        Exchange constant (J > 0 antiferromagnetic).

    Returns
    -------
    scipy.sparse.csr_matrix
    """
    terms = []
    for i, j in _bonds(L, boundary):
        terms += [
            (J / 4, {i: "X", j: "X"}),
            (J / 4, {i: "Y", j: "Y"}),
            (J * delta / 4, {i: "Z", j: "Z"}),
        ]
    return pauli_sum(L, terms)


MODELS = {"tfim": tfim, "xx": xx, "xxz": xxz}


def ground_state(H, seed=0, tol=1e-13):
    """Lowest eigenpair of a sparse Hermitian matrix.

    Parameters
    ----------
    H : scipy.sparse matrix
        Hamiltonian.
    seed : int
        Seed of the Lanczos start vector (numpy.random.default_rng).
    tol : float
        eigsh tolerance.

    Returns
    -------
    energy : float
    psi : ndarray
        Normalised ground state, phase fixed so that its largest-magnitude
        amplitude is real positive.
    """
    rng = np.random.default_rng(seed)
    v0 = rng.standard_normal(H.shape[0]).astype(H.dtype)
    w, v = eigsh(H, k=1, which="SA", v0=v0, tol=tol)
    psi = v[:, 0]
    k = np.argmax(np.abs(psi))
    psi = psi * (abs(psi[k]) / psi[k])
    psi = psi / np.linalg.norm(psi)
    return float(w[0]), psi.real if np.isrealobj(H.data) else psi
