"""How far a gauge's conditioning inflates the rounding of the QR/LQ sweeps.

Every factorisation of the sweeps is backward stable, but the products that
feed them are not taken in an orthonormal frame: forming R_j A_j rounds by
about eps ||R_j|| ||A_j||, which in an ill-conditioned gauge is far above
eps ||R_j A_j||.  That error is an error of the left block of the state, so
it reaches every later cut through the exact right block, whose norm is
||L_{j+1}||; the right-to-left sweep's errors reach every earlier cut through
||R_j|| in the same way.  :class:`GaugeLedger` records the norms as the
sweeps meet them and turns them into a first-order bound on each cut's
absolute error, relative to the state's norm.

With a gauge G on a bond this grows as cond(G)^2 (cond(G) from the product
that straddles the bond and cond(G) from the bond matrices'); in a canonical
gauge every norm is about 1 and the bound is about the number of sites.
"""

import numpy as np

__all__ = [
    "GaugeLedger",
    "block_norms",
    "bond_norm",
    "gauge_floors",
    "spectral_norm",
    "warn_large_floor",
]

# Power steps on M^H M: the estimate converges to ||M||_2 from below, and after this
# many steps is within a few per cent for the bond and site matrices of a sweep
# (measured against scipy's svdvals on random, canonical and ill-conditioned ones;
# tests/test_floors.py checks the bound they give).
_POWER_STEPS = 4
# up to this many entries the exact norm (one values-only SVD) costs less than the steps
_EXACT_SIZE = 2048


def spectral_norm(m):
    """Estimate of ||m||_2 for a 2-D array: a few power steps, at most ||m||_F.

    Small matrices (up to :data:`_EXACT_SIZE` entries) get the exact norm from
    their singular values.  Otherwise the power steps start from the largest
    row, so the estimate is never below ||m||_F / sqrt(rows).  Cost
    O(steps * m.size), no copy of ``m``.
    """
    if not m.size:
        return 0.0
    if m.size <= _EXACT_SIZE:
        from scipy.linalg import svdvals

        return float(svdvals(m, check_finite=False)[0])
    rows = np.einsum("ij,ij->i", m, m.conj()).real if m.dtype.kind == "c" \
        else np.einsum("ij,ij->i", m, m)
    frob = float(np.sqrt(rows.sum()))
    if not frob > 0:
        return 0.0
    v = m[int(np.argmax(rows))]
    v = v.conj() if m.dtype.kind == "c" else v
    est = 0.0
    for _ in range(_POWER_STEPS):
        w = m @ v
        est = float(np.linalg.norm(w) / np.linalg.norm(v))
        v = w.conj() @ m
        v = v.conj() if m.dtype.kind == "c" else v
    return min(max(est, frob / np.sqrt(m.shape[0])), frob)


class GaugeLedger:
    """Norms met by the two sweeps of an N-site chain, and the per-cut bounds they give.

    The left-to-right sweep calls :meth:`left` with R_j and A_j (the product
    giving R_{j+1}) and the result R_{j+1}; the right-to-left sweep calls
    :meth:`right` with A_j, L_{j+1} and the result L_j.  Entries are written
    by one sweep each, so the two may run in different threads.
    """

    def __init__(self, sites):
        n = sites
        self.r = np.ones(n + 1)              # ||R_j||, R_0 = 1
        self.l = np.ones(n + 1)              # ||L_j||, L_N = 1
        self.a_rows = np.zeros(n)            # ||A_j|| as (left, phys right)
        self.a_cols = np.zeros(n)            # ||A_j|| as (left phys, right)

    def left(self, j, a, r_next):
        """Step j of the left-to-right sweep: R_{j+1} from R_j A_j (dense arrays)."""
        self.left_norms(j, spectral_norm(a.reshape(a.shape[0], -1)), spectral_norm(r_next))

    def right(self, j, a, l_here):
        """Step j of the right-to-left sweep: L_j from A_j L_{j+1} (dense arrays)."""
        self.right_norms(j, spectral_norm(a.reshape(-1, a.shape[2])), spectral_norm(l_here))

    def left_norms(self, j, a_rows, r_next):
        """:meth:`left` from the norms: ||A_j|| as (left, phys right), ||R_{j+1}||."""
        self.a_rows[j], self.r[j + 1] = a_rows, r_next

    def right_norms(self, j, a_cols, l_here):
        """:meth:`right` from the norms: ||A_j|| as (left phys, right), ||L_j||."""
        self.a_cols[j], self.l[j] = a_cols, l_here

    def factors(self, norm):
        """Per cut position p = 1..N-1, the bound on its rounding in units of eps * ||psi||.

        Own product R_p L_p, plus every left step j < p, (||R_j|| ||A_j|| +
        ||R_{j+1}||) ||L_{j+1}||, plus every right step j >= p, (||A_j||
        ||L_{j+1}|| + ||L_j||) ||R_j||, all over ``norm``.
        """
        n = self.a_rows.size
        r, l = self.r, self.l
        j = np.arange(n)
        left = (r[j] * self.a_rows + r[j + 1]) * l[j + 1]
        right = (self.a_cols * l[j + 1] + l[j]) * r[j]
        left[n - 1] = 0.0                   # the last site is not swept from the left
        right[0] = 0.0                      # nor the first from the right
        before = np.cumsum(left)            # before[p - 1]: left steps 0..p-1
        after = np.cumsum(right[::-1])[::-1]  # after[p]: right steps p..N-1
        p = np.arange(1, n)
        return (r[p] * l[p] + before[p - 1] + after[p]) / norm


def block_norms(blocks):
    """(||A|| as (left, phys right), ||A|| as (left phys, right)) of a block-sparse site
    ``{(q_left, q_phys): (q_right, block)}``: each is block diagonal after grouping its
    rows by q_left (columns by q_right), so its norm is the largest group's, and a
    group's is at most the root sum of squares of its blocks' norms."""
    rows, cols = {}, {}
    for (ql, _), (qr, blk) in blocks.items():
        rows[ql] = rows.get(ql, 0.0) + spectral_norm(blk.reshape(blk.shape[0], -1)) ** 2
        cols[qr] = cols.get(qr, 0.0) + spectral_norm(blk.reshape(-1, blk.shape[2])) ** 2
    return (float(np.sqrt(max(rows.values(), default=0.0))),
            float(np.sqrt(max(cols.values(), default=0.0))))


def bond_norm(sectors):
    """||M|| of a block-diagonal bond matrix given as ``{q: block}``."""
    return max((spectral_norm(m) for m in sectors.values()), default=0.0)


def gauge_floors(spectra, sizes, factors, eps, where):
    """Per-cut floors max(eps n lambda_max, eps sqrt(n) factor); warns when large.

    Parameters
    ----------
    spectra : list of ndarray
        Normalised values per cut, descending.
    sizes : list of int
        The size factor n of each cut (as :func:`~bondscope._measure.resolution_floor`).
    factors : ndarray
        :meth:`GaugeLedger.factors` (or ones, for an orthonormal frame).
    eps : float
        The source's precision (:func:`bondscope._source.source_eps`).
    where : str
        The source's name, for the warning.

    Warns
    -----
    ResolutionWarning
        Some floor exceeds sqrt(eps): half the digits are lost to the gauge.

    Notes
    -----
    The factors are a first-order worst-case bound in units of the rounding of
    one operation; rounding errors of sums of n terms grow as sqrt(n) eps with
    high probability (Higham & Mary, SIAM J. Sci. Comput. 41, A2815 (2019)),
    hence sqrt(n).  Measured against exact references (tests/test_floors.py,
    docs/validation.md) the floor exceeds the error made by 25x or more in an
    ordinary gauge and by 140x or more in gauges with cond from 1e2 to 1e10.
    """
    from .._measure import resolution_floor

    floors = [max(resolution_floor(s, "svd", n, eps=eps), eps * np.sqrt(n) * float(f))
              for s, n, f in zip(spectra, sizes, factors)]
    warn_large_floor(floors, eps, where)
    return floors


def warn_large_floor(floors, eps, where):
    """Warn (ResolutionWarning) when some cut's floor exceeds sqrt(eps)."""
    import warnings

    from .._measure import ResolutionWarning

    worst = int(np.argmax(floors)) if len(floors) else 0
    if len(floors) and floors[worst] > np.sqrt(eps):
        warnings.warn(f"{where}: Schmidt values are resolved only to {floors[worst]:.1e} "
                      f"(cut {worst + 1}; see resolution_floor): the stored gauge is "
                      "ill-conditioned, its rounding grows as eps cond(G)^2; store the chain "
                      "in a canonical form for full precision", ResolutionWarning,
                      stacklevel=2)
