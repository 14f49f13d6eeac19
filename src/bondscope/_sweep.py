"""Sweep engine: Schmidt spectra at every cut, with truncation tracking.

Kernels here trust their inputs: sources are validated at the boundary.
"""

import math
import os
import shutil
import tempfile
from math import prod

import numpy as np

from ._errors import CheckpointError
from ._measure import discarded_weight, kept_rank, resolution_floor

__all__ = ["SweepResult", "chain_spectra", "amplitude_spectra", "BondStore", "choose_route"]

# In-memory budget for bond matrices before they spill to the scratch directory.
_STORE_BYTES = 64 * 2**20
# Up to this many amplitudes the "auto" route takes per-cut SVDs (accurate, and cheap
# at this size); above it the Gram route is faster (measured: scripts/bench.py).
_SVD_AUTO_SIZE = 2**14


class SweepResult:
    """Spectra of every cut plus truncation tracking.

    Attributes
    ----------
    spectra : list of ndarray
        Normalised Schmidt values per cut (position 1..N-1), descending.
    floors : list of float
        Resolution floor per cut (on the normalised values).
    norm : float
        Norm of the stored state.
    route : str
    infidelity : float or None
        1 - |<psi|psi_trunc>|^2 of successive truncation, when asked.
    """

    def __init__(self, spectra, floors, norm, route, infidelity=None):
        self.spectra, self.floors, self.norm = spectra, floors, norm
        self.route, self.infidelity = route, infidelity


class BondStore:
    """Bond matrices keyed by cut, held in memory up to a budget, then spilled to disk.

    Parameters
    ----------
    scratch : str or None
        Directory for spilled matrices (a private subdirectory is made and removed).
    budget : int
        Bytes kept in memory before spilling.
    """

    def __init__(self, scratch=None, budget=None):
        self._mem, self._disk, self._used = {}, {}, 0
        self._budget = _STORE_BYTES if budget is None else budget
        self._scratch, self._dir = scratch, None

    def put(self, key, matrix):
        if self._used + matrix.nbytes <= self._budget:
            self._mem[key] = matrix
            self._used += matrix.nbytes
            return
        if self._dir is None:
            if self._scratch is not None:
                os.makedirs(self._scratch, exist_ok=True)
            self._dir = tempfile.mkdtemp(prefix="bondscope-", dir=self._scratch)
        path = os.path.join(self._dir, f"{key}.npy")
        np.save(path, matrix)
        self._disk[key] = path

    def pop(self, key):
        if key in self._mem:
            m = self._mem.pop(key)
            self._used -= m.nbytes
            return m
        path = self._disk.pop(key)
        m = np.load(path)
        os.unlink(path)
        return m

    @property
    def spilled(self):
        return self._dir is not None

    def close(self):
        self._mem.clear()
        if self._dir is not None:
            shutil.rmtree(self._dir, ignore_errors=True)
            self._dir = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def _r_factor(a):
    """R of the economic QR of a 2-D array (a may be overwritten); shape (min(m, n), n)."""
    from scipy.linalg import qr

    return qr(a, mode="raw", overwrite_a=True, check_finite=False)[1]


def _svdvals(a):
    from scipy.linalg import svdvals

    return svdvals(a, overwrite_a=True, check_finite=False)


def _normalised(s, where):
    total = math.sqrt(float(np.vdot(s, s).real))
    if not total > 0:
        raise CheckpointError(f"{where}: the state has zero norm")
    return s / total, total


def _truncation_step(block, bond_dim, weight_tol):
    """SVD one block of the running truncated state; return (kept left vectors, eps)."""
    from scipy.linalg import svd

    u, s, _ = svd(block, full_matrices=False, overwrite_a=True, check_finite=False)
    keep = kept_rank(s, bond_dim, weight_tol)
    return u[:, :keep], discarded_weight(s, keep)


def _infidelity(eps):
    """1 - prod(1 - eps_i), accurate for tiny eps."""
    return max(float(-np.expm1(np.sum(np.log1p(-np.minimum(eps, 1.0))))), 0.0)


def chain_spectra(src, *, bond_dim=None, weight_tol=None, scratch=None, tick=None):
    """Exact Schmidt spectra at every bond of an MPS in any gauge.

    Parameters
    ----------
    src : ChainSource
        Site tensors (left, phys, right), read one at a time.
    bond_dim, weight_tol : int, float, optional
        When given, also compress the state by successive truncation and
        return the exact infidelity of the result.
    scratch : str, optional
        Directory for spilled bond matrices.
    tick : callable, optional
        Called once per site tensor processed.

    Returns
    -------
    SweepResult

    Notes
    -----
    A right-to-left sweep of LQ factorisations gives bond matrices L_i with
    psi = [A_0 ... A_{i-1}] L_i Q_i, Q_i an isometry; a left-to-right sweep of
    QR factorisations gives R_i with psi = P_i R_i [...], P_i an isometry.  The
    Schmidt values at cut i are the singular values of R_i L_i, so no canonical
    form is assumed and any gauge gives the same spectra.  Every factorisation
    is orthogonal, hence backward stable: values are resolved to about
    eps * chi * lambda_max.

    Held in memory: one site tensor, its reshaped product (both O(d chi^2)),
    and a few chi x chi bond matrices; the L_i wait in a :class:`BondStore`
    that spills to ``scratch`` past 64 MiB.  Each tensor is read twice.
    Cost O(N d chi^3); with truncation a further SVD per site.

    Successive truncation keeps, at each cut from the left, the leading
    Schmidt vectors of the already-truncated state; its fidelity with the
    original is the product of the kept weights, exactly (the truncated state
    is an orthogonal projection of psi), and is bounded below by
    1 - sum of the per-cut discarded weights (Oseledets, SIAM J. Sci. Comput.
    33, 2295 (2011), Thm. 2.2).

    References
    ----------
    G. Vidal, Phys. Rev. Lett. 91, 147902 (2003) -- Schmidt decompositions along
    a chain from successive factorisations.
    """
    n = src.sites
    track = bond_dim is not None or weight_tol is not None
    with BondStore(scratch) as store:
        env = np.ones((1, 1), dtype=src.compute_dtype)
        for i in range(n - 1, 0, -1):
            a = src.tensor(i)
            left = a.shape[0]
            m = (a.reshape(-1, a.shape[2]) @ env).reshape(left, -1)
            env = _r_factor(m.T).T
            store.put(i, env)
            if tick:
                tick()
        spectra, floors, eps, norm = [], [], [], None
        r = np.ones((1, 1), dtype=src.compute_dtype)
        w = r
        for i in range(n - 1):
            a = src.tensor(i)
            a2 = a.reshape(a.shape[0], -1)
            env = store.pop(i + 1)
            m = (r @ a2).reshape(-1, a.shape[2])
            if track:
                block = (w @ a2).reshape(-1, a.shape[2])
                u, e = _truncation_step(block @ env, bond_dim, weight_tol)
                w = u.conj().T @ block
                eps.append(e)
            r = _r_factor(m)
            s, total = _normalised(_svdvals(r @ env), src.name)
            norm = total if norm is None else norm
            spectra.append(s)
            floors.append(resolution_floor(s, "svd", max(s.size, 1) * a.shape[1]))
            if tick:
                tick()
    return SweepResult(spectra, floors, norm, "qr-sweep", _infidelity(eps) if track else None)


def choose_route(size, route="auto"):
    """The state-vector route: per-cut SVDs for small states, Gram matrices for large ones."""
    if route == "auto":
        return "svd" if size <= _SVD_AUTO_SIZE else "gram"
    if route not in ("gram", "svd"):
        raise ValueError(f"route {route!r} is not one of auto, gram, svd")
    return route


def _middle(dims):
    """Largest cut position m whose left dimension is <= its right dimension (>= 1)."""
    total, left, m = prod(dims), 1, 1
    for pos in range(1, len(dims)):
        left *= dims[pos - 1]
        if left * left <= total:
            m = pos
    return m


def _gram(mat, side):
    """Reduced density matrix of one side of ``mat``, as a C-ordered array whose
    lower triangle is valid (BLAS rank-k update; the conjugate, same spectrum).

    ``side="left"``: M M^H (rows); ``side="right"``: M^T conj(M) (columns).
    """
    from scipy.linalg import blas

    name = "herk" if mat.dtype.kind == "c" else "syrk"
    rank_k = blas.get_blas_funcs(name, (mat,))
    if side == "left":
        trans = 2 if name == "herk" else 1
    else:
        trans = 0
    return rank_k(1.0, mat.T, trans=trans, lower=0).T


def _eig_spectrum(low, where):
    """Schmidt values from a reduced density matrix given by its lower triangle (destroyed)."""
    from scipy.linalg import eigvalsh

    w = eigvalsh(low.T, lower=False, overwrite_a=True, check_finite=False)
    return _normalised(np.sqrt(np.clip(w[::-1], 0.0, None)), where)[0]


def _gram_spectra(psi, dims, where):
    """All cuts from the two reduced density matrices at the middle and their partial traces.

    Partial traces keep the valid triangle: tracing a factor out of a matrix whose
    lower triangle is correct gives a matrix whose lower triangle is correct.
    """
    n, total, m = len(dims), prod(dims), _middle(dims)
    spectra, sizes = [None] * (n - 1), [0] * (n - 1)
    left = prod(dims[:m])
    rho = _gram(psi.reshape(left, total // left), "left")
    for pos in range(m, 0, -1):
        dim, d = prod(dims[:pos]), dims[pos - 1]
        nxt = np.einsum("axbx->ab", rho.reshape(dim // d, d, dim // d, d)) if pos > 1 else None
        spectra[pos - 1], sizes[pos - 1] = _eig_spectrum(rho, where), dim
        rho = nxt
    if m < n - 1:
        right = prod(dims[m + 1:])
        rho = _gram(psi.reshape(total // right, right), "right")
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
        spectra.append(_normalised(s, where)[0])
        sizes.append(max(mat.shape))
    return spectra, sizes


def _state_truncation(psi, dims, bond_dim, weight_tol):
    """Successive truncated SVDs from the left; the exact infidelity of the result."""
    total, eps = prod(dims), []
    rest = psi.reshape(1, total) / np.linalg.norm(psi)
    for pos in range(1, len(dims)):
        d = dims[pos - 1]
        block = rest.reshape(rest.shape[0] * d, -1)
        u, e = _truncation_step(block.copy(), bond_dim, weight_tol)
        rest = u.conj().T @ block
        eps.append(e)
    return _infidelity(eps)


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
    Memory: the amplitudes, plus for gram the two middle reduced density
    matrices (each about the size of the state for an even split) held one at a
    time; for svd one reshaped copy of the state.  Cost for D amplitudes in an
    even split: gram O(D^{3/2}), svd O(D^{3/2}) per cut near the middle with a
    larger constant.

    References
    ----------
    E. Schmidt, Math. Ann. 63, 433 (1907) -- the decomposition; spectra of a
    bipartition are the eigenvalues of either reduced density matrix.
    """
    psi = src.amplitudes()
    route = choose_route(psi.size, route)
    psi, norm = _normalised(psi, src.name)
    if route == "gram":
        spectra, sizes = _gram_spectra(psi, src.local_dims, src.name)
    else:
        spectra, sizes = _svd_spectra(psi, src.local_dims, src.name)
    floors = [resolution_floor(s, route, n) for s, n in zip(spectra, sizes)]
    if tick:
        tick(len(spectra))
    infid = None
    if bond_dim is not None or weight_tol is not None:
        infid = _state_truncation(psi, src.local_dims, bond_dim, weight_tol)
    return SweepResult(spectra, floors, norm, route, infid)
