"""Sweep engine: Schmidt spectra at every cut, with truncation tracking.

Kernels here trust their inputs: sources are validated at the boundary.

The two MPS sweeps, independent until their bond matrices meet, run side by
side in two lanes when the BLAS may use two or more threads (each lane then
gets half of them); one BLAS thread means one lane, the plain sequential order.
State vectors take one large BLAS/LAPACK call at a time with all the threads.
"""

import math
import os
import shutil
import tempfile
import threading
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from math import prod

import numpy as np

from ._errors import CheckpointError
from ._measure import discarded_weight, kept_rank, resolution_floor

__all__ = ["SweepResult", "chain_spectra", "amplitude_spectra", "BondStore", "choose_route"]

# In-memory budget for bond matrices before they spill to the scratch directory.
_STORE_BYTES = 32 * 2**20
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
    """Bond matrices keyed by name, held in memory up to a budget, then spilled to disk.

    Parameters
    ----------
    scratch : str or None
        Directory for spilled matrices (a private subdirectory is made and removed).
    budget : int, optional
        Bytes kept in memory before spilling (default 32 MiB).

    Notes
    -----
    Safe to share between threads: ``put`` and ``pop`` hold a lock.
    """

    def __init__(self, scratch=None, budget=None):
        self._mem, self._disk, self._used = {}, {}, 0
        self._budget = _STORE_BYTES if budget is None else budget
        self._scratch, self._dir = scratch, None
        self._lock = threading.Lock()

    def put(self, key, matrix):
        with self._lock:
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
        with self._lock:
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


def _blas_threads():
    """Threads the loaded BLAS may use right now (threadpoolctl), else the core count."""
    from threadpoolctl import threadpool_info

    counts = [lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"]
    return max(counts) if counts else (os.cpu_count() or 1)


@contextmanager
def _lanes():
    """Yield how many lanes run at once (1 or 2); with 2, each gets half the BLAS threads."""
    total = _blas_threads()
    if total < 2:
        yield 1
        return
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=total // 2, user_api="blas"):
        yield 2


def _r_factor(a):
    """R of the economic QR of a 2-D array (a may be overwritten); shape (min(m, n), n).

    A Fortran-ordered ``a`` reaches LAPACK without a copy.
    """
    from scipy.linalg import qr

    return qr(a, mode="raw", overwrite_a=True, check_finite=False)[1]


def _svdvals(a):
    from scipy.linalg import svdvals

    return svdvals(a, overwrite_a=True, check_finite=False)


def _product_values(left, right):
    """Singular values of left @ right (the bond matrix of one cut)."""
    return _svdvals(left @ right)


def _dask_client():
    """The active dask.distributed client of this process, or None.

    Only a client the caller already made counts (dask is never imported here),
    and not inside a Dask worker, whose task is already one unit of parallel work.
    """
    import sys

    if "distributed" not in sys.modules:
        return None
    from distributed import get_client, get_worker

    try:
        get_worker()
        return None
    except ValueError:
        pass
    try:
        return get_client()
    except ValueError:
        return None


def _bond_values(client):
    """Where the per-cut SVDs run: inline, or as tasks of an active Dask client."""
    if client is None:
        return _product_values
    return lambda left, right: client.submit(_product_values, left, right, pure=False)


def _gathered(raw):
    """Per-cut values, waiting for any that are Dask futures."""
    return [v.result() if hasattr(v, "result") else v for v in raw]


def _lq_step(a, env):
    """Bond matrix of the right-to-left sweep: A_i L_{i+1}, reshaped (left, d right), = L_i Q_i.

    The product is C-ordered, so its transpose is Fortran-ordered and its QR
    (whose R is L_i transposed) needs no copy.
    """
    m = (a.reshape(-1, a.shape[2]) @ env).reshape(a.shape[0], -1)
    return _r_factor(m.T).T


def _qr_step(r, a):
    """Bond matrix of the left-to-right sweep: R_i A_i, reshaped (left d, right), = P R_{i+1}.

    The product is written straight into Fortran order with its rows ordered
    (phys, left) instead of (left, phys).  Permuting rows changes only the
    isometry P, not R, so LAPACK gets the matrix without the copy a C-ordered
    one would cost.
    """
    k, d, c = r.shape[0], a.shape[1], a.shape[2]
    out = np.empty((c, d, k), dtype=np.result_type(r.dtype, a.dtype))
    np.matmul(a.transpose(1, 2, 0), r.T, out=out.transpose(1, 0, 2))
    return _r_factor(out.reshape(c, d * k).T)


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


def _locked(tick):
    """``tick`` callable from several threads (None stays a no-op)."""
    if tick is None:
        return lambda: None
    lock = threading.Lock()

    def call():
        with lock:
            tick()
    return call


def _sequential_chain(src, store, tick, values, bond_dim=None, weight_tol=None):
    """Singular values of R_i L_i per cut, right-to-left sweep then left-to-right sweep.

    With ``bond_dim`` or ``weight_tol``, the left-to-right sweep also compresses
    the state; returns (raw values per cut, discarded weights per cut).
    """
    n = src.sites
    track = bond_dim is not None or weight_tol is not None
    env = np.ones((1, 1), dtype=src.compute_dtype)
    for i in range(n - 1, 0, -1):
        env = _lq_step(src.tensor(i), env)
        store.put(f"L{i}", env)
        tick()
    raw, eps = [], []
    r = w = np.ones((1, 1), dtype=src.compute_dtype)
    for i in range(n - 1):
        a = src.tensor(i)
        env = store.pop(f"L{i + 1}")
        if track:
            block = (w @ a.reshape(a.shape[0], -1)).reshape(-1, a.shape[2])
            u, e = _truncation_step(block @ env, bond_dim, weight_tol)
            w = u.conj().T @ block
            eps.append(e)
        r = _qr_step(r, a)
        raw.append(values(r, env))
        tick()
    return raw, eps


class _Rendezvous:
    """Pairs the two sweeps' bond matrices by cut: the first to arrive waits in a store."""

    def __init__(self, store):
        self._store, self._lock, self._waiting = store, threading.Lock(), set()

    def meet(self, cut, side, matrix):
        """Leave ``matrix`` for cut ``cut``; return the other side's one if it is waiting."""
        with self._lock:
            if cut not in self._waiting:
                self._waiting.add(cut)
                self._store.put(f"{side}{cut}", matrix)
                return None
            self._waiting.discard(cut)
            return self._store.pop(f"{'R' if side == 'L' else 'L'}{cut}")


def _until_failure(job, stop):
    """Run ``job``; on any failure tell the other lane to stop, then re-raise."""
    try:
        job()
    except BaseException:
        stop.set()
        raise


def _concurrent_chain(src, store, tick, values):
    """The two sweeps of :func:`_sequential_chain` run side by side, one per thread.

    Neither sweep needs the other's results, so both start at once, the
    right-to-left one from the last site and the left-to-right one from the
    first.  Each cut's values are taken by whichever sweep reaches that cut
    second; the first one's bond matrix waits in the store.  Each thread does
    one sweep and about half of the bond SVDs.
    """
    n = src.sites
    raw = [None] * (n - 1)
    meet = _Rendezvous(store).meet
    stop = threading.Event()
    one = np.ones((1, 1), dtype=src.compute_dtype)

    def leftward():
        env = one
        for i in range(n - 1, 0, -1):
            if stop.is_set():
                return
            env = _lq_step(src.tensor(i), env)
            waiting = meet(i, "L", env)
            if waiting is not None:
                raw[i - 1] = values(waiting, env)
            tick()

    def rightward():
        r = one
        for i in range(n - 1):
            if stop.is_set():
                return
            r = _qr_step(r, src.tensor(i))
            waiting = meet(i + 1, "R", r)
            if waiting is not None:
                raw[i] = values(r, waiting)
            tick()

    with ThreadPoolExecutor(1, thread_name_prefix="bondscope-sweep") as pool:
        other = pool.submit(_until_failure, leftward, stop)
        _until_failure(rightward, stop)
        other.result()
    return raw


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

    Work per site: two products with a bond matrix, two QR factorisations and
    one values-only SVD of a chi x chi matrix; O(N d chi^3) in all.  Every
    factorisation gets its input in Fortran order without a copy.  When the
    BLAS may use two or more threads the two sweeps run at once in two threads
    (each with half the BLAS threads), since neither needs the other's results;
    each cut's SVD is done by the sweep that reaches the cut second.  With
    truncation tracking, or one BLAS thread, they run one after the other.
    When the calling process has an active dask.distributed client (and is
    not itself a Dask worker), the per-cut SVDs are submitted as tasks of that
    client instead, each shipping two chi x chi matrices.

    Memory: per running sweep one site tensor and its product with a bond
    matrix (O(d chi^2) each), plus the bond matrices waiting for their partner
    in a :class:`BondStore`, which spills to ``scratch`` past 32 MiB; so the
    peak does not grow with N.  Each tensor is read twice, once per sweep.

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
    track = bond_dim is not None or weight_tol is not None
    tick = _locked(tick)
    values = _bond_values(_dask_client())
    with BondStore(scratch) as store, _lanes() as lanes:
        if track or lanes < 2:
            raw, eps = _sequential_chain(src, store, tick, values, bond_dim, weight_tol)
        else:
            raw, eps = _concurrent_chain(src, store, tick, values), []
    raw = _gathered(raw)
    spectra, floors, norm = [], [], None
    for i, s in enumerate(raw):
        s, total = _normalised(s, src.name)
        norm = total if norm is None else norm
        spectra.append(s)
        floors.append(resolution_floor(s, "svd", max(s.size, 1) * src.shapes[i][1]))
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
    return _normalised(np.sqrt(np.clip(w[::-1], 0.0, None)), where)[0]


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
    n, total, m = len(dims), prod(dims), _middle(dims)
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
    floors = [resolution_floor(s, route, n) for s, n in zip(spectra, sizes)]
    if tick:
        tick(len(spectra))
    infid = None
    if bond_dim is not None or weight_tol is not None:
        infid = _state_truncation(psi, src.local_dims, bond_dim, weight_tol)
    return SweepResult(spectra, floors, norm, route, infid)
