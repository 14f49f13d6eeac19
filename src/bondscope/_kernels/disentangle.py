"""Ancilla disentangling: the purification's cut entropy after a unitary on the two ancillas
next to the cut, chosen to minimise it.

Kernels here trust their inputs: sources are validated at the boundary.

Every purification of a state is related to every other by a unitary on the
ancillas (Hughston, Jozsa, Wootters, Phys. Lett. A 183, 14 (1993)); a unitary
on ancillas of one side of a cut leaves that cut's entropy unchanged, so the
freedom that matters acts across the cut.  Here it is a D^2 x D^2 unitary U on
the ancillas of the two sites beside the cut, optimised cut by cut from the
stored purification.
"""

import math

import numpy as np

from .._measure import resolution_floor
from .chain import lq_step, qr_step
from .linalg import svdvals
from .store import BondStore

__all__ = ["disentangle_cuts", "optimise_cut", "disentangle_cost", "Disentangled",
           "MAX_ITERATIONS", "TOLERANCE"]

MAX_ITERATIONS = 200
# random starting unitaries per cut besides the identity
RANDOM_STARTS = 2
# change of the Rényi-2 entropy (nats) between iterations that counts as converged
TOLERANCE = 1e-10


class Disentangled:
    """One cut's disentangling result.

    Attributes
    ----------
    values : ndarray
        Normalised Schmidt values of the best purification found, descending.
    floor : float
        Their resolution floor.
    start : float
        von Neumann entropy (nats) of the stored purification at the cut.
    iterations : int
    converged : bool
        The Rényi-2 objective changed by less than :data:`TOLERANCE` before
        :data:`MAX_ITERATIONS`.
    """

    def __init__(self, values, floor, start, iterations, converged):
        self.values, self.floor, self.start = values, floor, start
        self.iterations, self.converged = iterations, converged


def _probabilities(x):
    """Eigenvalues of the smaller Gram matrix of x, normalised to sum 1 (descending)."""
    g = x @ x.conj().T if x.shape[0] <= x.shape[1] else x.conj().T @ x
    p = np.clip(np.linalg.eigvalsh(g)[::-1], 0, None)
    return p / p.sum(), g


def _entropies(p):
    nz = p[p > 0]
    return float(-(nz * np.log(nz)).sum()), float(-math.log((p * p).sum()))


def _random_unitary(rng, n, dtype):
    """Haar-random unitary (orthogonal for real dtypes) by QR with phase fix (Mezzadri,
    Notices AMS 54, 592 (2007))."""
    z = rng.standard_normal((n, n))
    if np.dtype(dtype).kind == "c":
        z = z + 1j * rng.standard_normal((n, n))
    q, r = np.linalg.qr(z)
    return (q * (np.diagonal(r) / np.abs(np.diagonal(r)))).astype(dtype)


def _descend(t, tc, state, shape, u, max_iterations, tol):
    """Polar iterations from ``u``: (best entropy, its unitary, iterations, converged)."""
    k, d1, a1, d2, a2, m = shape
    x = state(u)
    p, g = _probabilities(x)
    best, best_u = _entropies(p)[0], u
    prev = _entropies(p)[1]
    for iterations in range(1, max_iterations + 1):
        grad = g @ x if x.shape[0] <= x.shape[1] else x @ g
        grad = grad.reshape(k, d1, a1, d2, a2, m).transpose(0, 1, 3, 5, 2, 4)
        w, _, vh = np.linalg.svd(grad.reshape(-1, a1 * a2).T @ tc)
        u = w @ vh
        x = state(u)
        p, g = _probabilities(x)
        s1, s2 = _entropies(p)
        if s1 < best:
            best, best_u = s1, u
        if abs(s2 - prev) < tol:
            return best, best_u, iterations, True
        prev = s2
    return best, best_u, max_iterations, False


def optimise_cut(theta, max_iterations=MAX_ITERATIONS, tol=TOLERANCE, starts=RANDOM_STARTS,
                 seed=0):
    """Minimise the middle-cut entropy of a two-site purification over ancilla unitaries.

    Parameters
    ----------
    theta : ndarray, shape (k, d1, D1, d2, D2, m)
        Two sites of a purification between orthonormal outer bases
        (left bond, physical, ancilla, physical, ancilla, right bond).
    max_iterations : int
        Per start.
    tol : float
        Convergence threshold on the Rényi-2 entropy change (nats).
    starts : int
        Random starting unitaries tried besides the identity.
    seed : int
        Seed of the random starts.

    Returns
    -------
    values : ndarray
        Normalised Schmidt values at the middle cut of the best U theta found.
    iterations : int
        Summed over the starts.
    converged : bool
        The start that gave the result converged.

    Notes
    -----
    Each iteration maximises the linearisation of Tr rho_A^2 in U: with
    X = U theta as a (k d1 D1) x (d2 D2 m) matrix, the environment
    E = d Tr(X X^dagger)^2 / d conj(U) = 2 (X X^dagger X) contracted with
    conj(theta) over all but the ancillas, and U <- W V^dagger from the SVD
    E = W S V^dagger (the unitary maximising Re Tr(U^dagger E)).  The identity
    is a stationary point for states symmetric under exchanging physical and
    ancilla legs (the rho^(1/2) purification), hence the random starts.  The
    von Neumann entropy of every iterate, the unrotated state included, is
    evaluated and the smallest kept, so the result is never above the
    starting entropy.  Cost per iteration O(K_l K_r min(K_l, K_r)) with
    K_l = k d1 D1, K_r = d2 D2 m, plus a D1 D2 x D1 D2 SVD.

    References
    ----------
    J. Hauschild, E. Leviatan, J. H. Bardarson, E. Altman, M. P. Zaletel,
    F. Pollmann, Phys. Rev. B 98, 235163 (2018) -- Rényi-2 disentangling by
    iterated polar decompositions.
    C. Karrasch, J. H. Bardarson, J. E. Moore, Phys. Rev. Lett. 108, 227206
    (2012) -- ancilla unitaries to keep purifications weakly entangled.
    """
    k, d1, a1, d2, a2, m = theta.shape
    t = theta.transpose(0, 1, 3, 5, 2, 4).reshape(-1, a1 * a2)
    tc = t.conj()

    def state(u):
        x = (t @ u.T).reshape(k, d1, d2, m, a1, a2)
        return x.transpose(0, 1, 4, 2, 5, 3).reshape(k * d1 * a1, d2 * a2 * m)

    rng = np.random.default_rng(seed)
    first = [np.eye(a1 * a2, dtype=theta.dtype)]
    first += [_random_unitary(rng, a1 * a2, theta.dtype) for _ in range(starts)]
    best = None
    total = 0
    for u in first:
        found = _descend(t, tc, state, theta.shape, u, max_iterations, tol)
        total += found[2]
        if best is None or found[0] < best[0]:
            best = found
    values = svdvals(state(best[1]))
    return values / np.linalg.norm(values), total, best[3]


def disentangle_cuts(src, *, scratch=None, tick=None):
    """Disentangled Schmidt spectra at every cut of a purification.

    Parameters
    ----------
    src : MixedSource
        kind "purified".
    scratch : str, optional
        Directory for spilled bond matrices.
    tick : callable, optional
        Called once per site tensor processed.

    Returns
    -------
    list of Disentangled

    Notes
    -----
    A right-to-left sweep stores the LQ bond matrices L_i and a left-to-right
    sweep carries the QR factor R_i (as in
    :func:`bondscope._kernels.chain.chain_spectra`), so the two sites beside
    cut i, R_{i-1} A_{i-1} A_i L_{i+1}, sit between orthonormal outer bases and
    their middle cut has the state's Schmidt values; :func:`optimise_cut`
    then works on that chi x (d D)^2 x chi block alone.  Each cut is optimised
    from the stored purification, independently of the others (a gate for
    one cut overlaps its neighbours' ancillas).
    """
    from .parallel import locked

    tick = locked(tick)
    n = src.sites
    one = np.ones((1, 1), dtype=src.compute_dtype)
    out = []
    with BondStore(scratch) as store:
        env = one
        for i in range(n - 1, 1, -1):
            env = lq_step(src.tensor(i), env)
            store.put(f"L{i}", env)
            tick()
        r = one
        a = src.tensor(0)
        for i in range(n - 1):
            b = src.tensor(i + 1)
            right = store.pop(f"L{i + 2}") if i + 2 <= n - 1 else one
            theta = _two_site(r, a, b, right)
            k, m = theta.shape[0], theta.shape[-1]
            _, d1, a1, _ = src.shapes4[i]
            _, d2, a2, _ = src.shapes4[i + 1]
            theta = theta.reshape(k, d1, a1, d2, a2, m)
            start = svdvals(theta.reshape(k * d1 * a1, -1).copy())
            start = start / np.linalg.norm(start)
            values, its, ok = optimise_cut(theta, seed=i)
            size = min(k * d1 * a1, d2 * a2 * m)
            out.append(Disentangled(values, resolution_floor(values, "svd", size),
                                    _entropies(start ** 2)[0], its, ok))
            r = qr_step(r, a)
            a = b
            tick()
    return out


def _two_site(r, a, b, right):
    """R A_i A_{i+1} L as an array (k, d D, d D, m)."""
    left = (r @ a.reshape(a.shape[0], -1)).reshape(-1, a.shape[2])
    rest = (b.reshape(-1, b.shape[2]) @ right).reshape(b.shape[0], -1)
    return (left @ rest).reshape(r.shape[0], a.shape[1], b.shape[1], right.shape[1])


def disentangle_cost(src):
    """(memory bytes, flops) of :func:`disentangle_cuts` at the iteration limit."""
    item = np.dtype(np.complex128 if np.dtype(src.compute_dtype).kind == "c"
                    else src.compute_dtype).itemsize
    memory, flops = 0, 0.0
    for (k, d1, a1, _), (_, d2, a2, m) in zip(src.shapes4, src.shapes4[1:]):
        kl, kr = k * d1 * a1, d2 * a2 * m
        memory = max(memory, 6 * kl * kr * item + 2 * min(kl, kr) ** 2 * item)
        flops += (1 + RANDOM_STARTS) * MAX_ITERATIONS * (6 * kl * kr * min(kl, kr) + 10 * min(kl, kr) ** 3)
    return memory, flops
