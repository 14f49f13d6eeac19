"""States with exactly known Schmidt spectra, as site tensors or vectors.

Site tensors are shaped (left, phys, right) with boundary bonds of size 1.
`to_vector` contracts them to a state vector with site 0 most significant.

Sources for the spectra:

- AKLT valence-bond solid (Affleck, Kennedy, Lieb, Tasaki, PRL 59, 799
  (1987)): every cut breaks one singlet, so with the two spin-1/2 edge spins
  kept as sites the spectrum is exactly (1/2, 1/2) at every cut; with fixed
  boundary vectors it approaches (1/2, 1/2) as (-1/3)^distance, the
  subleading eigenvalue of the AKLT transfer matrix (Fannes, Nachtergaele,
  Werner, Commun. Math. Phys. 144, 443 (1992)).
- GHZ on qudits: d equal weights 1/d at every cut (common practice).
- W state on N qubits: weights l/N and (N-l)/N at cut l (common practice).
- 1-D cluster state: one ebit across every cut of a path graph, the
  GF(2) rank of the cut adjacency block (Hein, Eisert, Briegel, PRA 69,
  062311 (2004)).
- Haar-random states: mean entropy `page_entropy` (Page, PRL 71, 1291
  (1993); proved by Foong & Kanno, PRL 72, 1148 (1994) and Sen, PRL 77, 1
  (1996)), variance `page_variance` (Vivo, Pato, Oshanin, PRE 83, 052106
  (2011)), mean purity `lubkin_purity` (Lubkin, J. Math. Phys. 19, 1028
  (1978)).
"""

import numpy as np
from scipy.special import polygamma

__all__ = [
    "to_vector",
    "from_vector",
    "overlap",
    "aklt",
    "ghz",
    "w_state",
    "cluster",
    "product",
    "haar_state",
    "page_entropy",
    "page_variance",
    "lubkin_purity",
]


def to_vector(tensors):
    """Contract (left, phys, right) site tensors into a state vector.

    Parameters
    ----------
    tensors : list of ndarray
        Rank-3 site tensors with boundary bonds of size 1.

    Returns
    -------
    ndarray
        Vector of length prod(phys), site 0 most significant.
    """
    psi = np.ones((1, 1), dtype=np.result_type(*tensors))
    for A in tensors:
        psi = np.tensordot(psi, A, axes=(1, 0)).reshape(-1, A.shape[2])
    return psi[:, 0]


def from_vector(psi, dims):
    """Exact left-canonical site tensors of a state vector (successive SVDs).

    Parameters
    ----------
    psi : ndarray
        State vector, site 0 most significant.
    dims : sequence of int
        Local dimensions.

    Returns
    -------
    list of ndarray
        Tensors (left, phys, right); no Schmidt value is dropped.  Each left
        singular vector's phase is fixed (largest-magnitude entry real positive),
        so the tensors do not depend on the LAPACK build's sign choices.
    """
    tensors = []
    rest = np.asarray(psi).reshape(1, -1)
    for d in dims[:-1]:
        a = rest.shape[0]
        U, S, Vh = np.linalg.svd(rest.reshape(a * d, -1), full_matrices=False)
        top = U[np.argmax(np.abs(U), axis=0), np.arange(U.shape[1])]
        phase = np.where(top == 0, 1.0, top / np.abs(top))
        U, Vh = U / phase, phase[:, None] * Vh
        tensors.append(U.reshape(a, d, -1))
        rest = S[:, None] * Vh
    tensors.append(rest.reshape(rest.shape[0], dims[-1], 1))
    return tensors


def aklt(L, edge_spins=True):
    """AKLT spin-1 chain as an MPS of bond dimension 2.

    Parameters
    ----------
    L : int
        Number of spin-1 sites.
    edge_spins : bool
        True: add a spin-1/2 site at each end (L + 2 sites, local dims
        2, 3, ..., 3, 2), the exact valence-bond solid with spectrum
        (1/2, 1/2) at every cut. False: close the bonds with the boundary
        vectors (1, 0) on both ends (L >= 2 sites).

    Returns
    -------
    list of ndarray
        Normalised site tensors.
    """
    sp_ = np.array([[0.0, 1.0], [0.0, 0.0]])
    sz = np.diag([1.0, -1.0])
    # A^s for m = +1, 0, -1; sum_s A^s A^s^dag = 1 (right-normalised bulk)
    bulk = np.stack([np.sqrt(2 / 3) * sp_, -np.sqrt(1 / 3) * sz, -np.sqrt(2 / 3) * sp_.T], axis=1)
    if edge_spins:
        first = (np.eye(2) / np.sqrt(2)).reshape(1, 2, 2)
        last = np.eye(2).reshape(2, 2, 1)
        return [first] + [bulk.copy() for _ in range(L)] + [last]
    if L < 2:
        raise ValueError(f"need L >= 2 spin-1 sites without edge spins, got {L}")
    e0 = np.array([1.0, 0.0])
    tensors = [bulk.copy() for _ in range(L)]
    tensors[0] = np.einsum("a,asb->sb", e0, bulk)[None]
    tensors[-1] = np.einsum("asb,b->as", bulk, e0)[..., None]
    tensors[0] = tensors[0] / np.sqrt(overlap(tensors, tensors).real)
    return tensors


def overlap(bra, ket):
    """<bra|ket> of two chains by transfer-matrix contraction (no state vector).

    Parameters
    ----------
    bra, ket : list of ndarray
        Site tensors (left, phys, right) with equal physical dimensions.

    Returns
    -------
    complex
    """
    E = np.ones((1, 1))
    for A, B in zip(bra, ket):
        E = np.einsum("ab,asc,bsd->cd", E, A.conj(), B)
    return complex(E[0, 0])


def ghz(N, d=2):
    """GHZ state sum_k |k...k> / sqrt(d) on N qudits, bond dimension d.

    Parameters
    ----------
    N : int
        Number of sites.
    d : int
        Local dimension.

    Returns
    -------
    list of ndarray
    """
    delta = np.zeros((d, d, d))
    delta[np.arange(d), np.arange(d), np.arange(d)] = 1.0
    tensors = [delta.copy() for _ in range(N)]
    tensors[0] = delta.sum(axis=0, keepdims=True) / np.sqrt(d)
    tensors[-1] = (tensors[-1] if N > 1 else tensors[0]).sum(axis=2, keepdims=True)
    return tensors


def w_state(N):
    """W state sum_j |0..1_j..0> / sqrt(N), bond dimension 2.

    Parameters
    ----------
    N : int
        Number of qubits, N >= 2.

    Returns
    -------
    list of ndarray
    """
    A = np.zeros((2, 2, 2))
    A[0, 0, 0] = A[1, 0, 1] = 1.0  # no excitation passed / already placed
    A[0, 1, 1] = 1.0  # place the excitation here
    first = A[:1] / np.sqrt(N)
    last = A[:, :, 1:]
    return [first] + [A.copy() for _ in range(N - 2)] + [last]


def cluster(N):
    """1-D cluster state prod CZ_{i,i+1} |+>^N, bond dimension 2.

    Parameters
    ----------
    N : int
        Number of qubits, N >= 2.

    Returns
    -------
    list of ndarray
        Tensor A[a, s, b] = (-1)^(a s) delta_{b s} / sqrt(2); the bond
        carries the previous qubit's value.
    """
    a = np.arange(2)[:, None, None]
    s = np.arange(2)[None, :, None]
    b = np.arange(2)[None, None, :]
    A = ((-1.0) ** (a * s)) * (b == s) / np.sqrt(2)
    first = A[:1]
    # b == s already fixes the last bond: summing it closes the chain
    last = A.sum(axis=2, keepdims=True)
    return [first] + [A.copy() for _ in range(N - 2)] + [last]


def product(dims, rng, dtype=complex):
    """Random product state (bond dimension 1).

    Parameters
    ----------
    dims : sequence of int
        Local dimensions.
    rng : numpy.random.Generator
        Source of randomness.
    dtype : dtype
        ``float`` or ``complex``.

    Returns
    -------
    list of ndarray
    """
    tensors = []
    for d in dims:
        v = rng.standard_normal(d)
        if np.issubdtype(np.dtype(dtype), np.complexfloating):
            v = v + 1j * rng.standard_normal(d)
        tensors.append((v / np.linalg.norm(v)).astype(dtype).reshape(1, d, 1))
    return tensors


def haar_state(dim, rng, dtype=np.complex128):
    """Haar-random pure state as a normalised complex Gaussian vector.

    Parameters
    ----------
    dim : int
        Hilbert-space dimension.
    rng : numpy.random.Generator
        Source of randomness.
    dtype : dtype
        Complex dtype of the result.

    Returns
    -------
    ndarray
    """
    v = rng.standard_normal(dim) + 1j * rng.standard_normal(dim)
    return (v / np.linalg.norm(v)).astype(dtype)


def page_entropy(dA, dB):
    """Average entanglement entropy of a Haar-random state on C^dA x C^dB.

    Page's exact formula, m = min, n = max:
    S = sum_{k=n+1}^{mn} 1/k - (m - 1) / (2 n).

    Parameters
    ----------
    dA, dB : int
        Dimensions of the two parts.

    Returns
    -------
    float
        Mean entropy in nats.
    """
    m, n = sorted((int(dA), int(dB)))
    k = np.arange(n + 1, m * n + 1, dtype=float)
    return float(np.sum(1.0 / k) - (m - 1) / (2.0 * n))


def page_variance(dA, dB):
    """Variance of the entanglement entropy of a Haar-random state.

    Vivo, Pato, Oshanin, PRE 83, 052106 (2011), m = min, n = max:
    Var = -psi1(mn+1) + (m+n)/(mn+1) psi1(n) - (m+1)(m+2n+1) / (4 n^2 (mn+1)),
    psi1 the trigamma function.

    Parameters
    ----------
    dA, dB : int
        Dimensions of the two parts.

    Returns
    -------
    float
    """
    m, n = sorted((int(dA), int(dB)))
    psi1 = lambda x: float(polygamma(1, x))  # noqa: E731
    return (
        -psi1(m * n + 1)
        + (m + n) / (m * n + 1) * psi1(n)
        - (m + 1) * (m + 2 * n + 1) / (4.0 * n**2 * (m * n + 1))
    )


def lubkin_purity(dA, dB):
    """Average purity Tr rho_A^2 of a Haar-random state: (dA + dB) / (dA dB + 1).

    Parameters
    ----------
    dA, dB : int
        Dimensions of the two parts.

    Returns
    -------
    float
    """
    return (dA + dB) / (dA * dB + 1.0)
