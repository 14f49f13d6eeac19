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
from .linalg import svdvals

__all__ = ["disentangle_cuts", "optimise_cut", "disentangle_cost", "Disentangled",
           "MAX_ITERATIONS", "TOLERANCE", "RANDOM_STARTS", "SWEEPS"]

MAX_ITERATIONS = 200
# polar iterations per start and visit assumed by the estimate (thermal chains: 5-40)
TYPICAL_ITERATIONS = 20
# most back-and-forth sweeps over the cuts
SWEEPS = 4
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
        Their resolution floor: the SVD's, or sqrt(:data:`TOLERANCE`) times the
        largest value when higher (weights the optimisation does not resolve).
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
    rotated : ndarray, shape (k d1 D1, d2 D2 m)
        The best U theta found, as the matrix of its middle cut.
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
    return state(best[1]), total, best[3]


def _right_canonical(tensors):
    """Bring site tensors (left, m, right) to right-canonical form in place (QR from the
    right); returns the norm, divided out of the first site."""
    for i in range(len(tensors) - 1, 0, -1):
        a = tensors[i]
        q, r = np.linalg.qr(a.reshape(a.shape[0], -1).T)
        tensors[i] = q.T.reshape(-1, a.shape[1], a.shape[2])
        tensors[i - 1] = np.tensordot(tensors[i - 1], r.T, ([2], [0]))
    norm = float(np.linalg.norm(tensors[0]))
    tensors[0] = tensors[0] / norm
    return norm


def _visit(tensors, c, rightward, shapes, first):
    """Optimise the gate of cut c (between sites c-1 and c, the centre on one of them),
    apply it and move the centre across; returns (values, floor, iterations, converged)."""
    a, b = tensors[c - 1], tensors[c]
    _, d1, a1, _ = shapes[c - 1]
    _, d2, a2, _ = shapes[c]
    k, m = a.shape[0], b.shape[2]
    theta = np.tensordot(a, b, ([2], [0])).reshape(k, d1, a1, d2, a2, m)
    starts = RANDOM_STARTS if first else 0
    x, its, ok = optimise_cut(theta, starts=starts, seed=c)
    u, s, vh = np.linalg.svd(x, full_matrices=False)
    norm = float(np.linalg.norm(s))
    s = s / norm
    keep = max(1, int(np.count_nonzero(s > resolution_floor(s, "svd", min(x.shape)))))
    # weights below the objective's tolerance are not pursued by the optimisation
    floor = max(resolution_floor(s, "svd", min(x.shape)), math.sqrt(TOLERANCE) * s[0])
    u, s, vh = u[:, :keep], s[:keep], vh[:keep]
    if rightward:
        tensors[c - 1] = u.reshape(k, d1 * a1, keep)
        tensors[c] = (s[:, None] * vh).reshape(keep, d2 * a2, m)
    else:
        tensors[c - 1] = (u * s).reshape(k, d1 * a1, keep)
        tensors[c] = vh.reshape(keep, d2 * a2, m)
    return s, floor, its, ok


def disentangle_cuts(src, *, tick=None, sweeps=SWEEPS, tol=TOLERANCE):
    """Disentangled Schmidt spectra at every cut of one purification, optimised in sweeps.

    Parameters
    ----------
    src : MixedSource
        kind "purified".
    tick : callable, optional
        Called once per cut visited.
    sweeps : int
        Most back-and-forth sweeps.
    tol : float
        Stop when a sweep lowers the summed cut entropies by less than this (nats).

    Returns
    -------
    cuts : list of Disentangled
    sweeps_done : int
    settled : bool
        The last sweep lowered the summed entropies by less than ``tol``.

    Notes
    -----
    The purification is brought to right-canonical form and swept like a
    two-site update: at each cut the two sites beside it, between orthonormal
    outer bases, get the ancilla unitary of :func:`optimise_cut` (random
    starts on the first visit, the identity after), are split by an SVD that
    keeps the values above the resolution floor (exact to rounding), and the
    orthogonality centre moves on.  A gate straddles only its own cut; gates
    elsewhere act within one side of it and leave its entropy alone, so every
    cut's entropy can only fall from visit to visit, and the result is one
    purification of the same state (the HJW freedom, composed over the
    sweeps) with those entropies at every cut at once.

    Memory: all site tensors, as the bonds evolve (at most d D times the
    stored bond at a cut in the worst case).  Time per visit: the optimisation
    (see :func:`optimise_cut`) and one SVD of the (k d D) x (d D m) block.
    """
    from .parallel import locked

    tick = locked(tick)
    n = src.sites
    shapes = src.shapes4
    tensors = [src.tensor(i) for i in range(n)]
    _right_canonical(tensors)
    found = [None] * (n - 1)
    starts = [None] * (n - 1)
    total = [0] * (n - 1)
    done, settled = 0, False
    previous = None
    for sweep in range(sweeps):
        order = [(c, True) for c in range(1, n)] + [(c, False) for c in range(n - 1, 0, -1)]
        for c, rightward in order:
            if starts[c - 1] is None:
                x = np.tensordot(tensors[c - 1], tensors[c], ([2], [0]))
                v = svdvals(x.reshape(x.shape[0] * x.shape[1], -1))
                starts[c - 1] = _entropies((v / np.linalg.norm(v)) ** 2)[0]
            s, floor, its, ok = _visit(tensors, c, rightward, shapes, found[c - 1] is None)
            total[c - 1] += its
            found[c - 1] = (s, floor, ok)
            tick()
        done = sweep + 1
        now = sum(_entropies(f[0] ** 2)[0] for f in found)
        if previous is not None and previous - now < tol:
            settled = True
            break
        previous = now
    return [Disentangled(s, floor, start, its, ok)
            for (s, floor, ok), start, its in zip(found, starts, total)], done, settled


def disentangle_cost(src):
    """(memory bytes, flops) of :func:`disentangle_cuts`.

    Memory: all site tensors plus the working arrays of the largest two-site
    block.  Work: :data:`TYPICAL_ITERATIONS` polar iterations per start and
    visit (the limit is :data:`MAX_ITERATIONS`), over the random starts and
    the most sweeps.
    """
    item = np.dtype(src.compute_dtype).itemsize
    memory, flops = sum(a * m * b for a, m, b in src.shapes) * item, 0.0
    block = 0
    for (k, d1, a1, _), (_, d2, a2, m) in zip(src.shapes4, src.shapes4[1:]):
        kl, kr = k * d1 * a1, d2 * a2 * m
        block = max(block, (6 * kl * kr + 2 * min(kl, kr) ** 2) * item)
        visits = RANDOM_STARTS + 1 + 2 * SWEEPS
        flops += visits * TYPICAL_ITERATIONS * (6 * kl * kr * min(kl, kr)
                                                + 10 * min(kl, kr) ** 3)
    return memory + block, flops
