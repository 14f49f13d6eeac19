"""One- and two-site reduced density matrices of an MPS in any gauge, from cached environments.

Kernels here trust their inputs: sources and parities are validated at the boundary.
"""

import math

import numpy as np

from .store import BondStore

__all__ = [
    "SHELF_BYTES",
    "THREADED_BOND",
    "EnvironmentShelf",
    "SiteDensities",
    "assemble",
    "balanced_groups",
    "chain_densities",
    "components",
]

# In-memory budget of the right-side blocks before they spill to the scratch directory.
SHELF_BYTES = 64 * 2**20
# Below this bond dimension the pair products run with one BLAS thread: threads inside
# products this small cost more than they gain (measured, d = 4, two cores shared with
# other work: chi = 128 took 4.1 s with one thread and 41 s with two; chi = 256 took
# 8.3 s and 3.9 s; docs/performance.md figure 6).
THREADED_BOND = 256


class EnvironmentShelf(BondStore):
    """A :class:`~bondscope._kernels.store.BondStore` whose arrays are read many times:
    ``get`` leaves them in place (spilled ones are read back memory-mapped)."""

    def __init__(self, scratch=None, budget=SHELF_BYTES):
        super().__init__(scratch, budget)

    def get(self, key):
        with self._lock:
            if key in self._mem:
                return self._mem[key]
            return np.load(self._disk[key], mmap_mode="r")


class SiteDensities:
    """Reduced density matrices as the kernels return them (sites numbered from 0).

    Attributes
    ----------
    one : dict int -> ndarray (d, d)
    two : dict (i, j) -> ndarray (d_i d_j, d_i d_j), i < j, basis (s_i, s_j)
    errors : dict, keys as ``one`` and ``two``
        Bound on the absolute error of each matrix entry (normalised state).
    total_parity : float or None
        <P> of the whole state when parities are given.
    growth : float
        Gauge growth factor of the error bound (1 for a state vector).
    """

    def __init__(self, one=None, two=None, errors=None, total_parity=None, growth=1.0):
        self.one, self.two = dict(one or {}), dict(two or {})
        self.errors, self.total_parity = dict(errors or {}), total_parity
        self.growth = growth

    def update(self, other):
        self.one.update(other.one)
        self.two.update(other.two)
        self.errors.update(other.errors)
        if other.total_parity is not None:
            self.total_parity = other.total_parity
        self.growth = max(self.growth, other.growth)


def components(d, parity=None):
    """Index pairs (s, s') with s <= s' carried from the first site, and which are odd
    (their operator |s><s'| changes the fermion parity)."""
    pairs = [(s, t) for s in range(d) for t in range(s, d)]
    odd = np.array([parity is not None and parity[s] != parity[t] for s, t in pairs])
    return pairs, odd


def assemble(blocks, pairs, d_first, d_second):
    """Full rho[(s, t), (s', t')] from the blocks rho_{s s'}[t, t'] with s <= s'."""
    rho = np.empty((d_first, d_second, d_first, d_second), dtype=blocks.dtype)
    for k, (s, u) in enumerate(pairs):
        rho[s, :, u, :] = blocks[k]
        if s != u:
            rho[u, :, s, :] = blocks[k].conj().T
    rho = rho.reshape(d_first * d_second, -1)
    return rho / np.trace(rho).real


def balanced_groups(n, parts):
    """Split first sites 0..n-2 into ``parts`` lists of about equal work (site i: n-1-i pairs).

    Examples
    --------
    >>> balanced_groups(6, 2)
    [[0, 3, 4], [1, 2]]
    """
    groups, work = [[] for _ in range(parts)], [0] * parts
    for i in range(n - 1):
        k = work.index(min(work))
        groups[k].append(i)
        work[k] += n - 1 - i
    return [g for g in groups if g]


def _signed(a, signs):
    return a * signs[None, :, None]


def _right_blocks(src, shelf, signs):
    """Shelve G_j = A_j E_{j+1} (the site tensor with everything right of it contracted)
    for every site; return the log scales of the E_j and, with signs, <P> of the state.

    E_j[c, c'] = sum A_j[c, t, e] E_{j+1}[e, e'] conj(A_j[c', t, e']), rescaled to unit
    Frobenius norm at every step; ``log_scale[j]`` is the log of what was taken out of E_j.
    """
    n = src.sites
    env = np.ones((1, 1), dtype=src.compute_dtype)
    penv = env if signs is not None else None
    log_scale, total = [0.0] * (n + 1), 0.0
    for j in range(n - 1, -1, -1):
        a = src.tensor(j)
        bra = a.conj().reshape(a.shape[0], -1).T
        g = (a.reshape(-1, a.shape[2]) @ env).reshape(a.shape)
        shelf.put(f"G{j}", g)
        env = g.reshape(a.shape[0], -1) @ bra
        if penv is not None:
            gp = (a.reshape(-1, a.shape[2]) @ penv).reshape(a.shape)
            penv = _signed(gp, signs[j]).reshape(a.shape[0], -1) @ bra
        scale = float(np.linalg.norm(env)) or 1.0
        env = env / scale
        if penv is not None:
            penv = penv / scale
        total += math.log(scale)
        log_scale[j] = total
    parity = float(penv.real[0, 0] / env.real[0, 0]) if penv is not None else None
    return log_scale, parity


def _close(z, g):
    """rho_m[t, t'] = sum_{b, c'} G[b, t, c'] Z_m[b, t', c'] for the stack Z (m, b, t', c')."""
    m, chi_l, d_z, chi_r = z.shape
    d = g.shape[1]
    lhs = g.transpose(1, 0, 2).reshape(d, chi_l * chi_r)
    rhs = z.transpose(0, 2, 1, 3).reshape(m * d_z, chi_l * chi_r)
    return (lhs @ rhs.T).reshape(d, m, d_z).transpose(1, 0, 2)


def _transfer_left(left, a):
    """L'[b, b'] = sum A[a, s, b] L[a, a'] conj(A[a', s, b'])."""
    t = (left @ a.conj().reshape(a.shape[0], -1)).reshape(-1, a.shape[2])
    return a.reshape(-1, a.shape[2]).T @ t


def _pairs_from(i, a, left, src, shelf, signs, parity, out):
    """rho_i and every rho_ij, j > i, from the left environment ``left`` at bond i;
    returns the per-entry error factors (before the gauge growth)."""
    n, eps = src.sites, _eps(src)
    d = a.shape[1]
    pairs, odd = components(d, parity)
    w = (left @ a.conj().reshape(a.shape[0], -1)).reshape(a.shape)
    rho = np.einsum("asc,atc->st", np.asarray(shelf.get(f"G{i}")), w)
    out.one[i] = rho / np.trace(rho).real
    factors = {i: eps * 4 * (a.shape[0] * d + a.shape[2])}
    # X_{s s'}[b, b'] = sum A[a, s, b] L[a, a'] conj(A[a', s', b'])
    x = np.stack([a[:, s, :].T @ w[:, u, :] for s, u in pairs])
    for j in range(i + 1, n):
        b = src.tensor(j)
        m, chi_l = x.shape[0], x.shape[1]
        z = (x.reshape(m * chi_l, chi_l) @ b.conj().reshape(chi_l, -1)).reshape(
            m, chi_l, b.shape[1], b.shape[2])
        out.two[i, j] = assemble(_close(z, np.asarray(shelf.get(f"G{j}"))), pairs, d, b.shape[1])
        factors[i, j] = eps * 4 * (j - i + 2) * (chi_l * b.shape[1] + b.shape[2])
        if j < n - 1:
            flat = b.reshape(chi_l * b.shape[1], b.shape[2])
            zf = z.reshape(m, chi_l * b.shape[1], b.shape[2])
            signed = _signed(b, signs[j]).reshape(flat.shape).T if odd.any() else None
            # one BLAS product per block (a stacked matmul with a transposed factor
            # would not reach the BLAS)
            x = np.stack([(signed if flip else flat.T) @ zf[k] for k, flip in enumerate(odd)])
            x /= float(np.linalg.norm(x)) or 1.0
        yield
    out.errors.update(factors)


def _eps(src):
    """Unit roundoff that bounds the data and the arithmetic: the larger of the stored
    and the compute precision's."""
    def eps(dtype):
        dtype = np.dtype(dtype)
        return float(np.finfo(dtype).eps) if dtype.kind in "fc" else 0.0
    return max(eps(src.compute_dtype), eps(src.dtype))


def chain_densities(src, parity=None, first_sites=None, scratch=None, tick=None):
    """One- and two-site reduced density matrices of an MPS in any gauge.

    Parameters
    ----------
    src : ChainSource
    parity : sequence of int, optional
        Fermion parity of each local basis state (the same for every site);
        the sites are then fermionic modes in Jordan-Wigner order and each
        two-site matrix carries the parity string of the sites between.
    first_sites : iterable of int, optional
        Compute rho_i and rho_ij (j > i) for these i only (default: all);
        the last site's rho is always returned.
    scratch : str, optional
        Directory for right-side blocks past :data:`SHELF_BYTES`.
    tick : callable, optional
        Called once per pair.

    Returns
    -------
    SiteDensities

    Notes
    -----
    One right-to-left sweep shelves G_j = A_j E_{j+1} for every site, where
    E_{j+1} is the right environment (everything right of site j contracted
    with its conjugate).  Then, with the left environment L_i carried along
    one left-to-right sweep, the d_i (d_i + 1) / 2 blocks
    X_{s s'} = A_i^s^T L_i conj(A_i^{s'}) (s <= s'; the others are their
    adjoints) are carried rightwards through the transfer matrix of each
    site; at site j one product Z = X conj(A_j) serves both the closing
    rho_ij[s t, s' t'] = sum G_j[b, t, c'] Z_{s s'}[b, t', c'] and the next
    transfer A_j^T Z.  No canonical form is assumed.

    Cost: per pair step about 2 d_i (d_i + 1) d_j chi^3 multiply-adds, so
    O(N^2 d^3 chi^3) for all pairs.  k = 3 is the smallest: the d^2
    operators of the first site must each be carried through every transfer
    matrix between the two sites, and each costs d chi^3 (hermiticity halves
    their number).  Memory: one site tensor, the stack X and its product Z
    ((d + 1) d^2 chi^2 / 2 entries), the left environment, and the shelf of
    G_j (spilled to ``scratch`` past its budget), so it does not grow as
    N^2 chi^2.

    With parities, the blocks whose operator |s><s'| is odd use the signed
    transfer sum_t (-1)^{p_t} A^t^T X conj(A^t) at the sites between i and
    j: the Jordan-Wigner string.  This equals moving mode i next to mode j
    with fermionic swaps, so the matrix is the fermionic two-mode reduced
    density matrix (for a state of definite parity).

    Error bound per entry: the products are backward stable,
    |fl(AB) - AB| <= gamma_n |A| |B| (Higham, *Accuracy and Stability of
    Numerical Algorithms*, 2nd ed., section 3.5), taken relative to the norm
    through the gauge growth max_k ||L_k|| ||E_k|| / <psi|psi> (>= 1; large
    for an ill-conditioned gauge).

    References
    ----------
    S. R. White, Phys. Rev. Lett. 69, 2863 (1992) -- reduced density matrices from
    contracted blocks of a variational state.
    """
    from threadpoolctl import threadpool_limits

    from .parallel import locked

    if max(max(a, b) for a, _, b in src.shapes) < THREADED_BOND:
        with threadpool_limits(limits=1, user_api="blas"):
            return _densities(src, parity, first_sites, scratch, locked(tick))
    return _densities(src, parity, first_sites, scratch, locked(tick))


def _densities(src, parity, first_sites, scratch, tick):
    """:func:`chain_densities` with the BLAS threads set."""
    n = src.sites
    signs = None
    if parity is not None:
        signs = [np.where(np.asarray(parity)[:d] == 1, -1.0, 1.0) for d in src.local_dims]
    wanted = set(range(n - 1)) if first_sites is None else set(first_sites)
    out = SiteDensities()
    with EnvironmentShelf(scratch) as shelf:
        log_right, out.total_parity = _right_blocks(src, shelf, signs)
        left, log_left, growth = np.ones((1, 1), dtype=src.compute_dtype), 0.0, 1.0
        for i in range(n):
            growth = max(growth, math.exp(log_left + log_right[i] - log_right[0]))
            a = src.tensor(i)
            if i in wanted or i == n - 1:
                for _ in _pairs_from(i, a, left, src, shelf, signs, parity, out):
                    tick()
            left = _transfer_left(left, a)
            scale = float(np.linalg.norm(left)) or 1.0
            left, log_left = left / scale, log_left + math.log(scale)
    out.errors = {k: min(v * growth, 1.0) for k, v in out.errors.items()}
    out.growth = growth
    return out
