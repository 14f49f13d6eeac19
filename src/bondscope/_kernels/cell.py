"""Unit cells of infinite chains: Schmidt spectra on every bond from the transfer fixed points.

Kernels here trust their inputs: sources are validated at the boundary.
"""

import math

import numpy as np

from .._errors import CheckpointError
from .._measure import resolution_floor
from .linalg import SweepResult, svdvals
from .transfer import (
    DENSE_BOND,
    SPECTRUM_COUNT,
    correlation_length,
    fixed_point,
    left_step,
    right_step,
    transfer_spectrum,
)

__all__ = ["INJECTIVE_GAP", "CellResult", "cell_estimate", "cell_spectra"]

# a relative gap 1 - |lambda_2 / lambda_1| below this is a degenerate dominant eigenvalue
# (our choice: far below any finite-chi gap, far above the eigensolver's rounding)
INJECTIVE_GAP = 1e-8


class CellResult(SweepResult):
    """A :class:`SweepResult` with one spectrum per bond of the cell and the cell's
    top-level fields (``cell``: correlation length, transfer spectrum, injectivity)."""

    def __init__(self, spectra, floors, norm, cell):
        super().__init__(spectra, floors, norm, "transfer-fixed-points", None)
        self.cell = cell


def _square_root(m):
    """(X, ||m||_2) with X^dag X = m for a Hermitian positive m (negative rounding clipped)."""
    w, v = np.linalg.eigh(m)
    top = float(max(w[-1], 0.0))
    return np.sqrt(np.clip(w, 0.0, None))[:, None] * v.conj().T, top


def _check_positive(m, slack, side, where):
    w = np.linalg.eigvalsh(m)
    if w[0] < -slack * abs(w[-1]):
        raise CheckpointError(
            f"{where}: the {side} fixed point of the transfer matrix is not positive (eigenvalue "
            f"{w[0]:.3g} against {w[-1]:.3g}); the dominant eigenvalue is not unique, so the "
            "cell is not injective; profile an injective cell (one symmetry-broken state)")


def cell_spectra(src, *, bond_dim=None, weight_tol=None, maxiter=None, count=SPECTRUM_COUNT,
                 tick=None):
    """Schmidt spectra on every bond of a unit cell in any gauge, and its transfer spectrum.

    Parameters
    ----------
    src : CellSource
        The n site tensors (l, d, r) of the cell, the last right bond equal to
        the first left bond.
    bond_dim, weight_tol : optional
        Accepted for the per-cut truncation fields (computed from the spectra
        by the pipeline); the infidelity of an infinite state is not tracked.
    maxiter : int, optional
        Eigensolver iteration limit (see :func:`transfer_spectrum`).
    count : int
        Transfer eigenvalues reported.
    tick : callable, optional
        Called once per stage (read, spectrum, fixed point, each bond).

    Returns
    -------
    CellResult
        ``spectra[k-1]``: the normalised Schmidt values on the bond after cell
        site k (the last, k = n, is the bond between cells); ``norm``: sqrt(eta)
        with eta the dominant eigenvalue (the norm per cell); ``cell``: the
        top-level fields of the document.

    Raises
    ------
    CheckpointError
        A degenerate dominant eigenvalue (not injective) or fixed points that
        are not positive.
    ConvergenceError
        The eigensolver did not converge.

    Notes
    -----
    The dominant left and right eigenvectors l, r of the transfer matrix are
    the Gram matrices of the left and right half-infinite states at the bond
    between cells; l_k (r_k) follows by applying the first k (last n - k)
    sites.  With l_k = X^dag X and r_k = Y Y^dag the Schmidt values on bond k
    are the singular values of X Y, so no canonical form is assumed
    (Vidal, PRL 98, 070201 (2007); Orus & Vidal, PRB 78, 155117 (2008)).

    Resolution: an eigenvector error delta (the residual over the relative
    gap 1 - |lambda_2/lambda_1|, at least chi eps) perturbs X Y by about
    sqrt(delta) kappa with kappa = sqrt(||l|| ||r|| / tr(l r)) (lambda_max in a
    canonical gauge, large in an ill-conditioned one); the floor is that
    plus the SVD's eps chi lambda_max.  Values below sqrt(eps) are never
    resolved by this route.

    Cost: the spectrum and fixed points as :func:`transfer_spectrum`; then
    per bond two eigendecompositions and one SVD of chi x chi matrices.
    Memory: the whole cell (it is applied many times) plus the solver's
    O(count chi^2) vectors, or the chi^4 matrix for chi <= DENSE_BOND.
    """
    tick = tick or (lambda *_: None)
    cell = [src.tensor(i) for i in range(src.sites)]
    tick()
    n, chi = len(cell), cell[0].shape[0]
    values, left, res_l = transfer_spectrum(cell, count, maxiter, src.name)
    tick()
    right, res_r = fixed_point(cell, maxiter, src.name)
    tick()
    eta = abs(values[0])
    if not eta > 0:
        raise CheckpointError(f"{src.name}: the state has zero norm (the transfer matrix "
                              "has no nonzero eigenvalue)")
    ratio = float(abs(values[1]) / eta) if len(values) > 1 else 0.0
    gap = 1.0 - ratio
    if gap < INJECTIVE_GAP:
        raise CheckpointError(
            f"{src.name}: the dominant transfer eigenvalue is degenerate (|lambda_2/lambda_1| "
            f"= {ratio:.12f}); the cell is not injective - a superposition of symmetry-broken "
            "states, or several copies of a smaller cell; profile one symmetry-broken state "
            "or the smaller cell")
    eps = float(np.finfo(np.float64 if src.compute_dtype.itemsize >= 8 else np.float32).eps)
    delta_l = max(res_l / gap, chi * eps)
    delta_r = max(res_r / gap, chi * eps)
    slack = 10 * math.sqrt(max(delta_l, delta_r))
    _check_positive(left, slack, "left", src.name)
    _check_positive(right, slack, "right", src.name)
    lefts = [left]
    for a in cell[:-1]:
        m = left_step(lefts[-1], a)
        lefts.append(m / np.linalg.norm(m))
    rights = [right]
    for a in reversed(cell[1:]):
        m = right_step(rights[0], a)
        rights.insert(0, m / np.linalg.norm(m))
    # bond k (after site k) sees l after sites 1..k and r before sites k+1..n
    lefts = lefts[1:] + [lefts[0]]
    spectra, floors = [], []
    for k in range(n):
        x, top_l = _square_root(lefts[k])
        y, top_r = _square_root(rights[k])
        s = svdvals(x @ y.conj().T)
        total = float(np.linalg.norm(s))
        s = s / total
        kappa = math.sqrt(top_l * top_r) / total
        floor = (math.sqrt(delta_l) + math.sqrt(delta_r)) * kappa
        spectra.append(s)
        floors.append(floor + resolution_floor(s, "svd", s.size))
        tick()
    phases = [float(np.angle(v)) for v in values]
    xi = correlation_length(values, n)
    drift = max(res_l, chi * eps)
    xi_err = (n * drift / (ratio * math.log(ratio) ** 2)
              if 0 < ratio < 1 and math.isfinite(xi) else 0.0)
    top = {"cell_sites": n, "injective": True,
           "correlation_length": xi, "correlation_length_error": xi_err,
           "transfer_eigenvalues": [float(abs(v) / eta) for v in values],
           "transfer_phases": phases, "transfer_gap": gap,
           "transfer_route": "dense" if chi <= DENSE_BOND else "arnoldi",
           "fixed_point_residuals": [res_l, res_r]}
    return CellResult(spectra, floors, math.sqrt(eta), top)


def cell_estimate(src, count=SPECTRUM_COUNT):
    """(memory bytes, flops, detail) of :func:`cell_spectra` from the shapes alone.

    Notes
    -----
    Memory: the whole cell, the solver's 2 count + 1 vectors of chi^2 (complex),
    a few chi x chi matrices per bond, or the chi^4 dense matrix.  Work: about
    30 (2 count + 1) applications of the map (our estimate of a typical
    Arnoldi run), each sum 2 d l r (l + r); chi^6 for the dense route.
    """
    shapes = src.shapes
    item = np.dtype(src.compute_dtype).itemsize
    chi = shapes[0][0]
    cell = sum(math.prod(s) for s in shapes) * item
    bonds = 6 * max(s[2] for s in shapes) ** 2 * 16
    apply = sum(2 * 2 * s[0] * s[1] * s[2] * (s[0] + s[2]) for s in shapes)
    if chi <= DENSE_BOND:
        memory = cell + 3 * chi ** 4 * 16 + bonds
        flops = chi * chi * apply + 30 * chi ** 6
    else:
        ncv = 2 * count + 1
        memory = cell + 3 * ncv * chi * chi * 16 + bonds
        flops = 30 * ncv * apply * 2
    flops += sum(30 * s[2] ** 3 for s in shapes)
    return memory, flops, {"cell_bytes": cell, "transfer_route":
                           "dense" if chi <= DENSE_BOND else "arnoldi"}
