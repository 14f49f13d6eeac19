"""Where the all-pairs work runs: in this process, local worker processes, or a Dask cluster.

Each task takes a group of first sites (balanced by work) and re-opens the
source itself, so only the source description and the options travel.
"""

import numpy as np

from .environments import SiteDensities, balanced_groups, chain_densities

__all__ = ["densities_task", "pair_estimate", "pair_spectra", "spectra_of"]


def spectra_of(dens):
    """The same densities with every matrix replaced by its eigenvalues (descending)."""
    from scipy.linalg import eigvalsh

    def values(rho):
        return eigvalsh(rho, check_finite=False)[::-1]

    return SiteDensities({k: values(v) for k, v in dens.one.items()},
                         {k: values(v) for k, v in dens.two.items()},
                         dens.errors, dens.total_parity, dens.growth)


def densities_task(source, options, first_sites, threads=None):
    """Open ``source`` with ``options`` and return the spectra of its reduced density
    matrices for ``first_sites`` (a worker's unit of work)."""
    from threadpoolctl import threadpool_limits

    from .._pipeline import open_any

    with threadpool_limits(limits=threads) if threads else _nothing(), \
            open_any(source, options) as src:
        return spectra_of(chain_densities(src, options.parity, first_sites, options.scratch))


class _nothing:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def _pairs(group, sites):
    """Pairs whose first site is in ``group``."""
    return sum(sites - 1 - i for i in group)


def _local(source, options, groups, workers, tick, sites):
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed

    from .parallel import blas_threads

    threads = max(1, blas_threads() // workers)
    context = multiprocessing.get_context("spawn")
    out = SiteDensities()
    with ProcessPoolExecutor(max_workers=workers, mp_context=context) as pool:
        futures = {pool.submit(densities_task, source, options, g, threads): g for g in groups}
        for future in as_completed(futures):
            out.update(future.result())
            tick(_pairs(futures[future], sites))
    return out


def _dask(source, options, groups, scheduler, tick, sites):
    from dask.distributed import Client, as_completed

    own = not isinstance(scheduler, Client)
    client = Client(scheduler) if own else scheduler
    try:
        futures = {client.submit(densities_task, source, options, g, None, pure=False): g
                   for g in groups}
        out = SiteDensities()
        for future in as_completed(futures):
            out.update(future.result())
            tick(_pairs(futures[future], sites))
        return out
    finally:
        if own:
            client.close()


def pair_spectra(src, source, options, *, workers=None, scheduler=None, tick=None):
    """Spectra of every one- and two-site reduced density matrix of ``src``.

    Parameters
    ----------
    src : ChainSource or AmplitudeSource
        The opened source.
    source : path, ndarray or list of ndarray
        What ``src`` was opened from, re-opened by each worker.
    options : ProfileOptions
        Layout, ``parity``, ``scratch``.
    workers : int, optional
        Local worker processes (MPS only), each with an equal share of the
        BLAS threads; default: this process with all of them.
    scheduler : str or dask.distributed.Client, optional
        Run on a Dask cluster instead (the source must be readable there).
    tick : callable, optional
        ``tick(k)``: k more pairs done.

    Returns
    -------
    SiteDensities
        Holding eigenvalues (descending) instead of matrices.

    Notes
    -----
    The first sites are split in groups of equal work
    (:func:`~bondscope._kernels.environments.balanced_groups`), four per
    worker so that a slow worker holds up little; each task re-reads the
    tensors it needs and recomputes the right blocks (O(N d chi^3), small
    against its O(N^2 d^3 chi^3 / tasks) pairs).
    """
    from .partialtrace import state_densities

    tick = tick or (lambda k=1: None)
    if src.kind == "state-vector":
        return spectra_of(state_densities(src.amplitudes(), src.local_dims, options.parity,
                                          tick))
    if scheduler is None and (workers is None or workers <= 1):
        return spectra_of(chain_densities(src, options.parity, None, options.scratch, tick))
    n = src.sites
    if scheduler is not None:
        return _dask(source, options, balanced_groups(n, min(n - 1, 16)), scheduler, tick, n)
    groups = balanced_groups(n, min(n - 1, 4 * workers))
    return _local(source, options, groups, workers, tick, n)


def pair_estimate(src, *, workers=None, reorder_cap=None):
    """Memory and work of all-pairs reduced density matrices of ``src`` (plus, with
    ``reorder_cap``, of reordering an MPS by swap gates under that cap).

    Notes
    -----
    MPS, per process: the site tensor as read and converted, W and G
    (tensor-sized), the stack X and its product Z with the copy the closing
    takes (2 m chi^2 + 2 m d chi^2 entries, m = d (d + 1) / 2), and the
    shelf's resident part; local workers each hold their own.  Work per pair
    step: Z (2 m d chi^3), the transfer (2 m d chi^3, again for the odd blocks
    with parities) and the closing (2 m d^2 chi^2).  Reordering holds the
    chain at bonds <= cap and a two-site block with its SVD (5 (d cap)^2),
    and does at most N (N - 1) / 2 swaps of about 22 (d cap)^3 flops each
    (the worst case; the count is that of the order found).  State vectors:
    the state, its normalised copy, a moved copy and a signed one; pairs
    cost 2 D d_i d_j each.
    """
    from math import prod

    from .._estimate import Estimate
    from .environments import SHELF_BYTES

    item = np.dtype(src.compute_dtype).itemsize
    cplx = 4.0 if np.dtype(src.compute_dtype).kind == "c" else 1.0
    n = src.sites
    if src.kind == "state-vector":
        total = prod(src.local_dims)
        dims = src.local_dims
        flops = sum(4 * total * dims[i] * dims[j] for i in range(n) for j in range(i + 1, n))
        memory = 5 * total * item
        return Estimate(memory, flops * cplx, {"state_bytes": total * item, "pairs":
                                               n * (n - 1) // 2})
    shapes = src.shapes
    tensor = max(a * d * b for a, d, b in shapes) * item
    chi = max(max(a, b) for a, _, b in shapes)
    d = max(src.local_dims)
    m = d * (d + 1) // 2
    stacks = (2 * m * chi * chi + 2 * m * d * chi * chi) * item
    shelf = min(sum(a * d * b for a, d, b in shapes) * item, SHELF_BYTES)
    memory = (5 * tensor + stacks + shelf + 2 * chi * chi * item) * max(workers or 1, 1)
    flops = 0.0
    for i in range(n - 1):
        for j in range(i + 1, n):
            a, dj, b = shapes[j]
            flops += m * (4 * a * a * dj * b + 2 * dj * dj * a * b + 2 * a * dj * b * b)
    detail = {"pairs": n * (n - 1) // 2, "stack_bytes": stacks, "largest_tensor_bytes": tensor}
    if reorder_cap:
        capped = [(min(a, reorder_cap), dd, min(b, reorder_cap)) for a, dd, b in shapes]
        chain = sum(a * dd * b for a, dd, b in capped) * item
        block = 5 * (d * reorder_cap) ** 2 * item
        memory = max(memory, chain + block + 2 * tensor)
        flops += n * (n - 1) / 2 * 22 * (d * reorder_cap) ** 3
        detail["reorder_bytes"] = chain + block
    return Estimate(memory, flops * cplx, detail)
