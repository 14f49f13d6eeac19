"""State vectors: Schmidt spectra at every cut by Gram matrices or per-cut SVDs.

Each step is one large BLAS/LAPACK call that uses all the BLAS threads.
"""

import math
from math import prod

import numpy as np

from .._errors import CheckpointError
from .._measure import resolution_floor
from .._source import source_eps
from .linalg import SweepResult, normalised
from .truncation import state_truncation

__all__ = ["amplitude_spectra", "choose_route", "middle_cut", "gram_matrix_sizes",
           "SVD_AUTO_SIZE"]

# Up to this many amplitudes the "auto" route takes per-cut SVDs (accurate, and cheap
# at this size); above it the Gram route is faster (measured: scripts/bench.py).
SVD_AUTO_SIZE = 2**14


def choose_route(size, route="auto"):
    """The state-vector route: per-cut SVDs for small states, Gram matrices for large ones."""
    if route == "auto":
        return "svd" if size <= SVD_AUTO_SIZE else "gram"
    if route not in ("gram", "svd"):
        raise ValueError(f"route {route!r} is not one of auto, gram, svd")
    return route


def middle_cut(dims):
    """Largest cut position m whose left dimension is <= its right dimension (>= 1)."""
    total, left, m = prod(dims), 1, 1
    for pos in range(1, len(dims)):
        left *= dims[pos - 1]
        if left * left <= total:
            m = pos
    return m


def gram_matrix_sizes(dims):
    """Entries of the reduced density matrices the gram route forms, in the order formed:
    the left middle one and its partial traces, then the right ones."""
    n, m = len(dims), middle_cut(dims)
    left = [prod(dims[:pos]) ** 2 for pos in range(m, 0, -1)]
    right = [prod(dims[pos:]) ** 2 for pos in range(m + 1, n)]
    return left, right


def _gram(mat, side, alpha):
    """alpha times the reduced density matrix of one side of ``mat``, as a C-ordered
    array whose lower triangle is valid (BLAS rank-k update; the conjugate, same spectrum).

    ``side="left"``: M M^H (rows); ``side="right"``: M^T conj(M) (columns).
    ``mat`` is C-ordered, so ``mat.T`` reaches BLAS without a copy.
    """
    from scipy.linalg import blas

    name = "herk" if mat.dtype.kind == "c" else "syrk"
    rank_k = blas.get_blas_funcs(name, (mat,))
    if side == "left":
        trans = 2 if name == "herk" else 1
    else:
        trans = 0
    return rank_k(alpha, mat.T, trans=trans, lower=0).T


def _eig_spectrum(low, where):
    """Schmidt values from a reduced density matrix given by its lower triangle (destroyed)."""
    from scipy.linalg import eigvalsh

    w = eigvalsh(low.T, lower=False, overwrite_a=True, check_finite=False)
    return normalised(np.sqrt(np.clip(w[::-1], 0.0, None)), where)[0]


def _gram_spectra(psi, dims, where, scale):
    """All cuts from the two reduced density matrices at the middle and their partial traces.

    Partial traces keep the valid triangle: tracing a factor out of a matrix whose
    lower triangle is correct gives a matrix whose lower triangle is correct.
    The next partial trace is always taken before a matrix goes to the
    eigensolver, which destroys it, so at most two reduced density matrices are
    alive at once.  Every step is one large BLAS/LAPACK call that uses all the
    BLAS threads (measured faster than splitting them over concurrent
    eigenproblems: scripts/bench.py state).
    """
    n, total, m = len(dims), prod(dims), middle_cut(dims)
    spectra, sizes = [None] * (n - 1), [0] * (n - 1)
    left = prod(dims[:m])
    rho = _gram(psi.reshape(left, total // left), "left", scale)
    for pos in range(m, 0, -1):
        dim, d = prod(dims[:pos]), dims[pos - 1]
        nxt = np.einsum("axbx->ab", rho.reshape(dim // d, d, dim // d, d)) if pos > 1 else None
        spectra[pos - 1], sizes[pos - 1] = _eig_spectrum(rho, where), dim
        rho = nxt
    if m < n - 1:
        right = prod(dims[m + 1:])
        rho = _gram(psi.reshape(total // right, right), "right", scale)
        for pos in range(m + 1, n):
            dim, d = prod(dims[pos:]), dims[pos]
            nxt = np.einsum("xaxb->ab", rho.reshape(d, dim // d, d, dim // d)) \
                if pos < n - 1 else None
            spectra[pos - 1], sizes[pos - 1] = _eig_spectrum(rho, where), dim
            rho = nxt
    return spectra, sizes


def _svd_spectra(psi, dims, where):
    """Singular values of every cut's reshaped matrix (psi is left intact)."""
    from scipy.linalg import svdvals

    total, left = prod(dims), 1
    spectra, sizes = [], []
    for pos in range(1, len(dims)):
        left *= dims[pos - 1]
        mat = psi.reshape(left, total // left)
        s = svdvals(mat.T, overwrite_a=False, check_finite=False)
        spectra.append(normalised(s, where)[0])
        sizes.append(max(mat.shape))
    return spectra, sizes


def amplitude_spectra(src, *, route="auto", bond_dim=None, weight_tol=None, tick=None):
    """Schmidt spectra at all N-1 cuts of a state vector.

    Parameters
    ----------
    src : AmplitudeSource
    route : {"auto", "gram", "svd"}
        ``"gram"``: reduced density matrices of the two halves at the middle cut
        (one BLAS rank-k update each), the smaller cuts' ones by partial traces,
        and Hermitian eigenvalues; weights lambda^2 are resolved to about
        eps * lambda_max^2, so lambda only to sqrt(eps) * lambda_max.
        ``"svd"``: singular values of every cut's reshaped matrix; resolves
        lambda to about eps * lambda_max (the accurate tail).
        ``"auto"``: svd up to 2^14 amplitudes, gram above.
    bond_dim, weight_tol : optional
        Also compress by successive truncated SVDs and report the exact infidelity.
    tick : callable, optional
        Called once per cut.

    Returns
    -------
    SweepResult

    Notes
    -----
    The amplitudes are never copied for normalisation: the norm scales the
    reduced density matrices (gram) or the values (svd).  Memory for D
    amplitudes of the compute dtype, in units of the state's size: gram holds
    the state, the left middle reduced density matrix (about 1 for an even
    split) while it is diagonalised, and the next two partial traces (1/4 and
    1/16), about 2.3 in all; svd holds the state and one reshaped copy, 2.
    Cost for an even split: gram is two rank-k updates, O(D^{3/2}), and one
    Hermitian eigenproblem of size sqrt(D) plus smaller ones, each with all the
    BLAS threads; svd is a values-only SVD of the same size per cut near the middle.

    References
    ----------
    E. Schmidt, Math. Ann. 63, 433 (1907) -- the decomposition; spectra of a
    bipartition are the eigenvalues of either reduced density matrix.
    """
    psi = src.amplitudes()
    route = choose_route(psi.size, route)
    norm = math.sqrt(float(np.vdot(psi, psi).real))
    if not norm > 0:
        raise CheckpointError(f"{src.name}: the state has zero norm")
    if route == "gram":
        spectra, sizes = _gram_spectra(psi, src.local_dims, src.name, 1.0 / norm**2)
    else:
        spectra, sizes = _svd_spectra(psi, src.local_dims, src.name)
    eps = float(np.finfo(src.compute_dtype).eps)
    floors = [resolution_floor(s, route, n, eps=eps, data_eps=source_eps(src))
              for s, n in zip(spectra, sizes)]
    if tick:
        tick(len(spectra))
    infid = None
    if bond_dim is not None or weight_tol is not None:
        infid = state_truncation(psi, src.local_dims, bond_dim, weight_tol)
    return SweepResult(spectra, floors, norm, route, infid)
