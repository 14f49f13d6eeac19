"""MPS sweeps: exact Schmidt spectra at every bond of a chain in any gauge.

Kernels here trust their inputs: sources are validated at the boundary.

The two sweeps, independent until their bond matrices meet, run side by side
in two lanes when the BLAS may use two or more threads (each lane then gets
half of them); one BLAS thread means one lane, the plain sequential order.
"""

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from .._source import source_eps
from .balance import SweepScales, balanced
from .conditioning import GaugeLedger, gauge_floors
from .linalg import SweepResult, normalised, r_factor, svdvals
from .parallel import dask_client, gathered, lanes, locked
from .store import BondStore
from .truncation import infidelity, truncation_step

__all__ = ["chain_spectra", "lq_step", "qr_step"]


def _product_values(left, right):
    """Singular values of left @ right (the bond matrix of one cut)."""
    return svdvals(left @ right)


def _bond_values(client):
    """Where the per-cut SVDs run: inline, or as tasks of an active Dask client."""
    if client is None:
        return _product_values
    return lambda left, right: client.submit(_product_values, left, right, pure=False)


def lq_step(a, env):
    """Bond matrix of the right-to-left sweep: A_i L_{i+1}, reshaped (left, d right), = L_i Q_i.

    The product is C-ordered, so its transpose is Fortran-ordered and its QR
    (whose R is L_i transposed) needs no copy.
    """
    m = (a.reshape(-1, a.shape[2]) @ env).reshape(a.shape[0], -1)
    return r_factor(m.T).T


def qr_step(r, a):
    """Bond matrix of the left-to-right sweep: R_i A_i, reshaped (left d, right), = P R_{i+1}.

    The product is written straight into Fortran order with its rows ordered
    (phys, left) instead of (left, phys).  Permuting rows changes only the
    isometry P, not R, so LAPACK gets the matrix without the copy a C-ordered
    one would cost.
    """
    k, d, c = r.shape[0], a.shape[1], a.shape[2]
    out = np.empty((c, d, k), dtype=np.result_type(r.dtype, a.dtype))
    np.matmul(a.transpose(1, 2, 0), r.T, out=out.transpose(1, 0, 2))
    return r_factor(out.reshape(c, d * k).T)


def _sequential_chain(src, store, tick, values, ledger, scales, bond_dim=None,
                      weight_tol=None):
    """Singular values of R_i L_i per cut, right-to-left sweep then left-to-right sweep.

    With ``bond_dim`` or ``weight_tol``, the left-to-right sweep also compresses
    the state; returns (raw values per cut, discarded weights per cut).
    """
    n = src.sites
    track = bond_dim is not None or weight_tol is not None
    env = np.ones((1, 1), dtype=src.compute_dtype)
    for i in range(n - 1, 0, -1):
        a = src.tensor(i)
        env = scales.right(i, lq_step(a, env))
        ledger.right(i, a, env)
        store.put(f"L{i}", env)
        tick()
    raw, eps = [], []
    r = w = np.ones((1, 1), dtype=src.compute_dtype)
    for i in range(n - 1):
        a = src.tensor(i)
        env = store.pop(f"L{i + 1}")
        if track:
            block = (w @ a.reshape(a.shape[0], -1)).reshape(-1, a.shape[2])
            u, e = truncation_step(block @ env, bond_dim, weight_tol)
            w = balanced(u.conj().T @ block, src.name, src.labels[i])[0]
            eps.append(e)
        r = scales.left(i, qr_step(r, a))
        ledger.left(i, a, r)
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


def _concurrent_chain(src, store, tick, values, ledger, scales):
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
            a = src.tensor(i)
            env = scales.right(i, lq_step(a, env))
            ledger.right(i, a, env)
            waiting = meet(i, "L", env)
            if waiting is not None:
                raw[i - 1] = values(waiting, env)
            tick()

    def rightward():
        r = one
        for i in range(n - 1):
            if stop.is_set():
                return
            a = src.tensor(i)
            r = scales.left(i, qr_step(r, a))
            ledger.left(i, a, r)
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
    is orthogonal, hence backward stable, so in a near-canonical gauge values
    are resolved to about eps * chi * lambda_max; the products feeding them
    are not, and a gauge G far from canonical makes their rounding grow as
    eps cond(G)^2 at every cut.  The sweeps record the norms they multiply
    (:class:`.conditioning.GaugeLedger`, O(d chi^2) per site) and each cut's
    floor bounds that rounding too, at the coarser of the stored and compute
    precisions; a ResolutionWarning says when it exceeds sqrt(eps).  After
    every step the new bond matrix is divided by the power of two that brings
    its largest entry into [1/2, 1) (:class:`.balance.SweepScales`, exact), so
    a chain whose products leave the floating-point range is profiled as well;
    the exponents give the norm and the ledger's units.

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
    in a :class:`BondStore`, which spills to ``scratch`` past its budget
    (:data:`~bondscope._kernels.store.STORE_BYTES`); so the
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
    tick = locked(tick)
    values = _bond_values(dask_client())
    ledger, scales = GaugeLedger(src.sites), SweepScales(src.sites, src.name, src.labels)
    with BondStore(scratch) as store, lanes() as count:
        if track or count < 2:
            raw, eps = _sequential_chain(src, store, tick, values, ledger, scales, bond_dim,
                                         weight_tol)
        else:
            raw, eps = _concurrent_chain(src, store, tick, values, ledger, scales), []
    removed = scales.exponent(1, 1)             # the first cut's values: R_1 L_1
    scales.rescale(ledger, removed)
    raw = gathered(raw)
    spectra, norm = [], None
    for s in raw:
        s, total = normalised(s, src.name)
        norm = total if norm is None else norm
        spectra.append(s)
    sizes = [max(s.size, 1) * src.shapes[i][1] for i, s in enumerate(spectra)]
    floors = gauge_floors(spectra, sizes, ledger.factors(norm), source_eps(src), src.name)
    return SweepResult(spectra, floors, norm, "qr-sweep", infidelity(eps) if track else None,
                       norm_exponent=removed)
