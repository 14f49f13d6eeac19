"""Rényi-2 entropies of the physical state of a density-matrix MPO or a purification.

Kernels here trust their inputs: sources are validated at the boundary.

For every cut, with A the sites left of it and B the rest, the sweeps give
Tr rho_A^2, Tr rho_B^2 and Tr rho^2 (all relative to (Tr rho)^2), hence the
block Rényi-2 entropies S_2(A) = -ln Tr rho_A^2, S_2(B), the state's S_2 and
the Rényi-2 mutual information I_2 = S_2(A) + S_2(B) - S_2(AB).  Every
environment is rescaled to unit norm at each step and its logarithm carried,
so long chains neither overflow nor underflow.
"""

import math

import numpy as np

from .._errors import CheckpointError
from .._source import source_eps
from .store import BondStore
from .transfer import left_step as _gram_left

__all__ = ["renyi2_sweeps", "Renyi2", "mixed_cost", "HERMITIAN_TOLERANCE"]

# relative Hilbert-Schmidt distance ||rho - rho^dagger|| / ||rho|| above which an operator
# is refused (beyond the rounding floor of the check itself)
HERMITIAN_TOLERANCE = 1e-6
# headroom on the first-order rounding estimates (common practice)
_SAFETY = 10.0


class Renyi2:
    """Rényi-2 results of one state, as the sweeps return them.

    Attributes
    ----------
    left, right : list of float
        -ln Tr rho_A^2 and -ln Tr rho_B^2 per cut (nats, of the unit-trace state).
    errors : list of float
        Bound on the rounding error of each cut's two block entropies (nats).
    purity, purity_error : float
        Tr rho^2 / (Tr rho)^2 and its rounding bound.
    trace : float
        Tr rho of the stored operator (the squared norm for a purification).
    hermiticity : float or None
        ||rho - rho^dagger||_2 / ||rho||_2 (density matrices).
    """

    def __init__(self, left, right, errors, purity, purity_error, trace, hermiticity=None):
        self.left, self.right, self.errors = left, right, errors
        self.purity, self.purity_error = purity, purity_error
        self.trace, self.hermiticity = trace, hermiticity


def _scaled(x):
    """(x / ||x||, ln ||x||); a zero x gives (x, -inf)."""
    n = float(np.linalg.norm(x))
    if not n > 0:
        return x, -math.inf
    return x / n, math.log(n)


def _gram_right(g, w):
    """Right Gram step: out[l, l'] = sum conj(w[l, m, r]) g[r, r'] w[l', m, r']."""
    a, m, b = w.shape
    wg = (w.reshape(a * m, b) @ g.T).reshape(a, m * b)
    return w.reshape(a, m * b).conj() @ wg.T


# --- density-matrix MPO -----------------------------------------------------

def _dm_sweeps(src, store, tick):
    n = src.sites
    t = np.ones(1, dtype=src.compute_dtype)
    g = np.ones((1, 1), dtype=src.compute_dtype)
    lt = lg = 0.0
    for i in range(n - 1, 0, -1):
        w = src.tensor4(i)
        t, s = _scaled(np.einsum("lkkr,r->l", w, t))
        lt += s
        g, s = _scaled(_gram_right(g, w.reshape(w.shape[0], -1, w.shape[3])))
        lg += s
        store.put(f"t{i}", t)
        store.put(f"g{i}", g)
        store.put(f"s{i}", np.array([lt, lg]))
        tick()
    t = np.ones(1, dtype=src.compute_dtype)
    g = h = np.ones((1, 1), dtype=src.compute_dtype)
    lt = lg = lh = 0.0
    quads, trace_terms = [], []
    for i in range(n):
        w = src.tensor4(i)
        a, k, _, b = w.shape
        traced = np.einsum("lkkr->lr", w)
        before = lt
        t, s = _scaled(t @ traced)
        lt += s
        g, s = _scaled(_gram_left(g, w.reshape(a, k * k, b)))
        lg += s
        hw = (h @ w.transpose(0, 2, 1, 3).reshape(a, -1)).reshape(a * k * k, b)
        h, s = _scaled(w.reshape(a * k * k, b).T @ hw)
        lh += s
        ltr = 0.0
        if i < n - 1:
            tr, gr = store.pop(f"t{i + 1}"), store.pop(f"g{i + 1}")
            ltr, lgr = store.pop(f"s{i + 1}")
            quads.append(((tr.conj() @ g @ tr).real, lg + 2 * ltr,
                          (t.conj() @ gr @ t).real, lgr + 2 * lt))
        # this step's rounding (the partial trace's terms in magnitude), carried to Tr rho
        # by the right trace vector (unit norms)
        size = np.linalg.norm(np.einsum("lkkr->lr", np.abs(w)))
        trace_terms.append(before + math.log(max(size, 1e-300)) + ltr)
        tick()
    top = max(trace_terms)
    total = (complex(t[0]), lt, math.log(sum(math.exp(x - top) for x in trace_terms)) + top)
    hs, trsq = (float(g[0, 0].real), lg), (complex(h[0, 0]), lh)
    return quads, total, hs, trsq


def _dm_renyi2(src, store, tick):
    """Density matrix: Tr rho_A^2 from the left Gram G_A and the right trace vector."""
    quads, (tr, ltr, lscale), (hs, lhs), (sq, lsq) = _dm_sweeps(src, store, tick)
    chi = max(max(s[0], s[3]) for s in src.shapes4)
    d2 = max(s[1] * s[2] for s in src.shapes4)
    u = source_eps(src)
    n = src.sites
    gamma = _SAFETY * u * n * chi * d2
    if not hs > 0:
        raise CheckpointError(f"{src.name}: the operator is zero (||rho||_2 = 0); expected a "
                              "density matrix")
    defect = math.sqrt(max(0.0, 2.0 - 2.0 * (sq * math.exp(lsq - lhs)).real / hs))
    if defect > max(HERMITIAN_TOLERANCE, 10 * math.sqrt(4 * gamma / hs)):
        raise CheckpointError(f"{src.name}: the operator is not Hermitian (||rho - rho^dagger|| "
                              f"/ ||rho|| = {defect:.3g}); expected a density matrix with axes "
                              f"{','.join(src.axes)} (is it a purification, "
                              "left,phys,ancilla,right?)")
    # first order: |fl(Tr rho) - Tr rho| <= gamma sum_i ||t_A,i|| ||Tr |W_i| || ||t_B,i+1||
    # (the normwise bound on products, Higham, section 3.5, carried by the exact rest)
    log_floor = math.log(gamma) + lscale
    size = abs(tr.real)
    if size == 0 or math.log(size) + ltr <= log_floor:
        raise CheckpointError(f"{src.name}: Tr rho is zero to rounding (|Tr rho| <= "
                              f"{math.exp(log_floor):.3g}); a density matrix needs a positive "
                              "trace")
    if tr.real < 0:
        raise CheckpointError(f"{src.name}: Tr rho = {-math.exp(math.log(size) + ltr):.6g} is "
                              "negative; a density matrix needs a positive trace")
    rel_t = math.exp(log_floor - math.log(size) - ltr)
    return (*_assemble(quads, (size, ltr), (hs, lhs), 2 * gamma, rel_t, src.name), defect)


def _assemble(quads, trace, square, step_q, rel_t, name):
    """Entropies and error bounds from the per-cut scaled quadratic forms; ``rel_t`` is the
    relative rounding bound of the trace."""
    tr, ltr = trace
    log_tr = math.log(tr) + ltr
    left, right, errors = [], [], []
    for qa, la, qb, lb in quads:
        sa = -(math.log(max(qa, 1e-300)) + la - 2 * log_tr)
        sb = -(math.log(max(qb, 1e-300)) + lb - 2 * log_tr)
        left.append(max(sa, 0.0))
        right.append(max(sb, 0.0))
        errors.append(step_q / max(min(qa, qb), 1e-300) + 2 * rel_t)
    sq, lsq = square
    purity = math.exp(math.log(sq) + lsq - 2 * log_tr)
    purity_error = purity * (step_q / sq + 2 * rel_t)
    if purity > 1 + purity_error + 1e-12:
        raise CheckpointError(f"{name}: Tr rho^2 / (Tr rho)^2 = {purity:.12g} > 1, so the "
                              "operator has negative eigenvalues; expected a density matrix")
    return left, right, errors, min(purity, 1.0), purity_error, math.exp(log_tr)


# --- purification ---------------------------------------------------------------

def _replica_left(f, a):
    """Two replicas of the left block, physical legs crossed, ancillas traced per replica."""
    ac = a.conj()
    t = np.tensordot(f, a, ([0], [0]))              # y1 x2 y2 p al r1
    t = np.tensordot(t, ac, ([0, 4], [0, 2]))       # x2 y2 p r1 q r1'
    t = np.tensordot(t, a, ([0, 4], [0, 1]))        # y2 p r1 r1' be r2
    return np.tensordot(t, ac, ([0, 1, 4], [0, 1, 2]))  # r1 r1' r2 r2'


def _replica_right(f, a):
    """:func:`_replica_left` from the right end."""
    ac = a.conj()
    t = np.tensordot(a, f, ([3], [0]))              # l1 p al r1' r2 r2'
    t = np.tensordot(t, ac, ([2, 3], [2, 3]))       # l1 p r2 r2' l1' q
    t = np.tensordot(t, a, ([2, 5], [3, 1]))        # l1 p r2' l1' l2 be
    return np.tensordot(t, ac, ([1, 2, 5], [1, 3, 2]))  # l1 l1' l2 l2'


def _pair(f, gram):
    """sum F[a, a', b, b'] N[a', a] N[b', b]: the replicas closed by the other block."""
    return float(np.einsum("abcd,ba,dc->", f, gram, gram).real)


def _purified_renyi2(src, store, tick):
    """Purification: replica environments (chi^4) closed by the other block's Gram."""
    n = src.sites
    one = np.ones((1, 1), dtype=src.compute_dtype)
    g, lg = one, 0.0
    for i in range(n - 1, 0, -1):
        g, s = _scaled(_gram_right(g, src.tensor(i)))
        lg += s
        store.put(f"n{i}", g)
        store.put(f"s{i}", np.array([lg]))
        tick()
    f, lf = np.ones((1, 1, 1, 1), dtype=src.compute_dtype), 0.0
    g, lg = one, 0.0
    lefts = []
    for i in range(n):
        a = src.tensor4(i)
        f, s = _scaled(_replica_left(f, a))
        lf += s
        g, s = _scaled(_gram_left(g, src.tensor(i)))
        lg += s
        if i < n - 1:
            gr, (lgr,) = store.pop(f"n{i + 1}"), store.pop(f"s{i + 1}")
            lefts.append((_pair(f, gr), lf + 2 * lgr))
            store.put(f"n{i + 1}", g)
            store.put(f"s{i + 1}", np.array([lg]))
        tick()
    norm2, square = (float(g[0, 0].real), lg), (float(f.reshape(-1)[0].real), lf)
    if not norm2[0] > 0:
        raise CheckpointError(f"{src.name}: the purification has zero norm")
    f, lf = np.ones((1, 1, 1, 1), dtype=src.compute_dtype), 0.0
    rights = [None] * (n - 1)
    for i in range(n - 1, 0, -1):
        f, s = _scaled(_replica_right(f, src.tensor4(i)))
        lf += s
        gl, (lgl,) = store.pop(f"n{i}"), store.pop(f"s{i}")
        rights[i - 1] = (_pair(f, gl), lf + 2 * lgl)
        tick()
    chi = max(max(s[0], s[3]) for s in src.shapes4)
    dd = max(s[1] * s[2] for s in src.shapes4)
    u = source_eps(src)
    step_q = _SAFETY * u * n * 4 * chi * dd
    rel_t = _SAFETY * u * n * chi * dd / norm2[0]
    quads = [(qa, la, qb, lb) for (qa, la), (qb, lb) in zip(lefts, rights)]
    return (*_assemble(quads, norm2, square, step_q, rel_t, src.name), None)


def renyi2_sweeps(src, *, scratch=None, tick=None):
    """Block Rényi-2 entropies at every cut and the purity of a mixed state.

    Parameters
    ----------
    src : MixedSource
        kind "density-matrix" (sites (left, ket, bra, right)) or "purified"
        (sites (left, phys, ancilla, right)).
    scratch : str, optional
        Directory for spilled environments.
    tick : callable, optional
        Called once per site tensor processed.

    Returns
    -------
    Renyi2

    Raises
    ------
    CheckpointError
        A density matrix that is not Hermitian, has a trace that is zero or
        negative (to rounding), or Tr rho^2 > (Tr rho)^2 (negative
        eigenvalues); a purification of zero norm.

    Notes
    -----
    Density matrix, bond chi, local dimension d: a right-to-left sweep stores
    the trace vectors t_B (Tr over the right block, length chi) and Gram
    matrices G_B[a, a'] = Tr(Y_a^dagger Y_a') of the right block's operators;
    the left-to-right sweep builds t_A and G_A and at each cut reads
    Tr rho_A^2 = t_B^dagger G_A t_B, Tr rho_B^2 = t_A^dagger G_B t_A and
    Tr rho = t_A . t_B.  It also carries Tr(rho rho) without the dagger, so
    ||rho - rho^dagger||^2 = 2 ||rho||^2 - 2 Re Tr(rho rho) checks
    Hermiticity.  Time O(N d^2 chi^3), memory O(d^2 chi^2) plus the stored
    chi x chi matrices (spilled past the bond store's budget).

    Purification, bond chi, physical d, ancilla D: Tr rho_A^2 needs two
    replicas of psi and psi*, the physical legs of A crossed between them and
    each replica's ancillas traced: a left environment F[a1, a1', a2, a2'] of
    chi^4 numbers, closed at the cut by the right block's Gram matrix on both
    replicas.  Three sweeps (right Grams; left replicas and left Grams; right
    replicas).  Time O(N d^2 D chi^5), memory about 4 d^2 D^2 chi^4 numbers
    at the largest step (an intermediate, its transposed copies and the next).

    Error bounds are first-order rounding estimates (common practice): every
    environment is scaled to unit norm, each of the N transfer steps adds a
    relative error of about eps (of the compute dtype, or of the stored data
    when coarser, as for float32 checkpoints) times its inner dimension (the bound on
    floating-point products, Higham, *Accuracy and Stability of Numerical
    Algorithms*, 2nd ed., section 3.5), and a block purity far below the
    environment's norm loses that many digits; the bound grows accordingly.

    References
    ----------
    F. Verstraete, J. J. Garcia-Ripoll, J. I. Cirac, Phys. Rev. Lett. 93,
    207204 (2004) -- mixed states as matrix product density operators and
    purifications.
    """
    from .parallel import locked

    tick = locked(tick)
    with BondStore(scratch) as store:
        sweeps = _dm_renyi2 if src.kind == "density-matrix" else _purified_renyi2
        return Renyi2(*sweeps(src, store, tick))


def _replica_sizes(l, d, a, r):
    """(numbers held at once, flops) of one replica step of a site (l, d, a, r)."""
    sizes = (l ** 4, l ** 3 * d * a * r, l * l * d * d * r * r, l * d * a * r ** 3, r ** 4)
    # each contraction's input, its transposed copies and its output are alive at once
    # (twice their sum covers the peaks measured at chi = 16..48, docs/mixed.md)
    held = max(2 * (x + y) for x, y in zip(sizes, sizes[1:]))
    flops = 2 * d * a * (l ** 4 * r + l ** 3 * d * r * r + l * l * d * r ** 3 + l * r ** 4)
    return held, flops


def mixed_cost(src, disentangle=False):
    """(memory bytes, flops, detail) of :func:`renyi2_sweeps` (and the disentangler).

    See :func:`renyi2_sweeps` for the powers; the disentangler's cost is in
    :func:`bondscope._kernels.disentangle.disentangle_cost`.
    """
    item = np.dtype(src.compute_dtype).itemsize
    chi = max(max(s[0], s[3]) for s in src.shapes4)
    dd = max(s[1] * s[2] for s in src.shapes4)
    if src.kind == "density-matrix":
        memory = 8 * chi * chi * dd * item
        flops = sum(3 * 2 * 2 * s[0] * s[1] * s[2] * s[3] * (s[0] + s[3]) for s in src.shapes4)
        detail = {"environment_bytes": chi * chi * item}
    else:
        steps = [_replica_sizes(*s) for s in src.shapes4]
        memory = max(h for h, _ in steps) * item
        # left and right replica sweeps (their transposed copies keep the products well
        # below the multiply peak: measured near the estimate's factorisation rate)
        flops = 2 * sum(f for _, f in steps)
        detail = {"environment_bytes": chi ** 4 * item}
    if disentangle:
        from .disentangle import disentangle_cost

        m, fl = disentangle_cost(src)
        memory = max(memory, m)
        flops += fl
    return memory, flops, detail
