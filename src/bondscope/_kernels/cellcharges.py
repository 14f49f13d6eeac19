"""Unit cells with conserved charges: transfer eigenvalues per charge sector.

When the cell's state conserves a U(1) charge built from one-site charges q_s,
every bond k carries a charge operator Q_k with

    A_k^s Q_{k+1} - Q_k A_k^s = (q_s + g_k) A_k^s          for every s

(g_k a constant per site; Q_n = Q_0).  In a basis of definite bond charges
Q_k is diagonal and A_k^s is non-zero only where q_right = q_left + q_s; in any
other gauge Q_k = G_k diag(q) G_k^-1.  The transfer matrix is then block
diagonal in the charge difference dq = q(ket) - q(bra) of a bond matrix.

Kernels here trust their inputs: sources are validated at the boundary.
"""

import math

import numpy as np

from .._errors import CheckpointError
from .blocksweep import charge_groups
from .cell import bond_grams, cell_spectra, square_root
from .linalg import svdvals
from .sectors import add_sector_fields
from .transfer import SPECTRUM_COUNT, fixed_point, left_step, transfer_spectrum

__all__ = ["CHARGE_UNKNOWNS", "bond_charges", "bond_sectors", "cell_sector_document",
           "charge_estimate", "charge_gauge", "charged_cell_spectra", "sector_spectra"]

# largest n chi^2 (unknowns of the charge equations) solved densely: 2048 is a
# two-site cell at chi 32, about 70 MB and a few seconds (our limit)
CHARGE_UNKNOWNS = 2048
# a bond charge further than this from an integer is not a charge (our choice: far
# above the rounding of a well-conditioned gauge, far below a unit of charge)
CHARGE_TOLERANCE = 1e-4
# relative residual of the charge equations above which the cell mixes charges (our
# choice: rounding of a well-conditioned gauge stays far below)
RESIDUAL_TOLERANCE = 1e-8
# irrational weights combining several quantities into one operator to diagonalise
_WEIGHTS = (1.0, math.sqrt(2.0), math.sqrt(3.0), math.sqrt(5.0), math.sqrt(7.0))


def charge_estimate(src):
    """(memory bytes, flops) of the bond charges (one quantity at a time) and sectors.

    Notes
    -----
    The dense system: n d chi^2 rows of n chi^2 + n unknowns (complex, 16 bytes), its
    copy inside LAPACK, and a least-squares solve of rows x unknowns^2 work; the fixed
    points again (counted by the caller as a second cell run) and the sectors' matrices,
    at most chi^4 entries together.
    """
    shapes = src.shapes
    unknowns = sum(s[0] ** 2 for s in shapes) + len(shapes)
    rows = sum(s[0] * s[1] * s[2] for s in shapes)
    chi = shapes[0][0]
    memory = 2 * rows * unknowns * 16 + chi ** 4 * 16
    flops = 4 * rows * unknowns ** 2 + 30 * chi ** 6
    return memory, flops


def _charge_operators(cell, local, where):
    """The Q_k (chi_k, chi_k) solving the charge equations for one quantity, and the
    relative residual."""
    n = len(cell)
    sizes = [a.shape[0] ** 2 for a in cell]
    offsets = np.concatenate([[0], np.cumsum(sizes)])
    unknowns = int(offsets[-1]) + n
    dtype = np.result_type(*cell)
    rows, rhs = [], []
    for k, a in enumerate(cell):
        l, d, r = a.shape
        nxt = (k + 1) % n
        for s in range(d):
            m = a[:, s, :]
            block = np.zeros((l * r, unknowns), dtype=dtype)
            block[:, offsets[nxt]:offsets[nxt + 1]] += np.kron(m, np.eye(r))
            block[:, offsets[k]:offsets[k + 1]] -= np.kron(np.eye(l), m.T)
            block[:, offsets[-1] + k] = -m.reshape(-1)
            rows.append(block)
            rhs.append(local[k][s] * m.reshape(-1))
    system, target = np.concatenate(rows), np.concatenate(rhs)
    solution = np.linalg.lstsq(system, target, rcond=None)[0]
    residual = np.linalg.norm(system @ solution - target) / max(np.linalg.norm(target), 1e-300)
    ops = [solution[offsets[k]:offsets[k + 1]].reshape(cell[k].shape[0], -1) for k in range(n)]
    return ops, float(residual)


def bond_charges(cell, charges, where="unit cell"):
    """Charges of the bond basis at the bond between cells, and the gauge that shows them.

    Parameters
    ----------
    cell : list of ndarray
        Site tensors (l, d, r) of the cell, in any gauge.
    charges : ChainCharges
        Local charges of the n cell sites; every quantity U(1) (modulus 0).
    where : str
        Name for messages.

    Returns
    -------
    labels : list of ndarray of int64, shapes (chi_k, n_q)
        Per bond k = 0..n-1 (before site k + 1), the charge of each column of
        G_k, the lowest 0 (one offset per quantity and bond: only differences
        have meaning on an infinite chain).
    gauge : list of ndarray
        G_k (chi_k, chi_k) per bond k = 0..n-1 whose columns have definite
        charges; ``G_k^-1 A_k^s G_{k+1}`` is block sparse.
    residual : float
        Largest relative residual of the charge equations.

    Raises
    ------
    ValueError
        A Z_M quantity, or a cell too large for the dense solve.
    CheckpointError
        The cell does not conserve the charge (the equations have no
        solution, or the bond charges are not integers).

    Notes
    -----
    One dense least-squares solve of n d chi^2 equations in n chi^2 + n
    unknowns per quantity (LAPACK gelsd), O(n^3 d chi^6) time and
    O(n^2 d chi^4) memory, hence ``CHARGE_UNKNOWNS``; then one
    eigendecomposition per bond of a weighted sum of the Q_k.  For an
    injective cell the solution is unique up to Q_k -> Q_k + c_k
    (Perez-Garcia, Wolf, Sanz, Verstraete, Cirac, PRL 100, 167202 (2008):
    a symmetry acts on the bond of an injective MPS by a unique gauge).
    """
    if any(charges.cyclic):
        raise ValueError(f"{where}: charge sectors of unit cells need U(1) charges; Z_M "
                         "charges (modulus) are not implemented for cells")
    unknowns = sum(a.shape[0] ** 2 for a in cell) + len(cell)
    if unknowns > CHARGE_UNKNOWNS:
        raise ValueError(f"{where}: charge sectors of a unit cell solve {unknowns} unknowns "
                         f"densely, more than the limit {CHARGE_UNKNOWNS} (n chi^2 + n; a "
                         "two-site cell at chi 32); profile without charges")
    per = []
    worst = 0.0
    for j in range(charges.quantities):
        local = [t[:, j] for t in charges.sites]
        ops, residual = _charge_operators(cell, local, where)
        worst = max(worst, residual)
        per.append(ops)
    if worst > RESIDUAL_TOLERANCE:
        raise CheckpointError(
            f"{where}: the cell does not conserve the charges {charges.spec_text()} (relative "
            f"residual {worst:.2g} of the bond charge equations); the tensors mix charge "
            "sectors: profile without charges, or check the local charge list")
    gauge, labels = [], []
    for k in range(len(cell)):
        mix = sum(w * ops[k] for w, ops in zip(_WEIGHTS, per))
        _, g = np.linalg.eig(mix)
        inv = np.linalg.inv(g)
        diag = np.stack([np.diag(inv @ ops[k] @ g) for ops in per], axis=1)
        off = np.abs(diag.imag).max() if np.iscomplexobj(diag) else 0.0
        real = diag.real - diag.real.min(axis=0)
        gap = np.abs(real - np.round(real)).max()
        if max(gap, off) > CHARGE_TOLERANCE:
            raise CheckpointError(
                f"{where}: bond {k} charges are not integers (off by {max(gap, off):.2g}); the "
                "cell does not conserve the charges, or its gauge is too ill-conditioned to "
                "resolve them; profile without charges")
        gauge.append(g)
        labels.append(np.round(real).astype(np.int64))
    return labels, gauge, worst


def charge_gauge(cell, gauge):
    """The cell in the gauge of definite bond charges, G_k^-1 A_k^s G_{k+1}."""
    n = len(cell)
    return [np.einsum("ij,jsk,kl->isl", np.linalg.inv(gauge[k]), a, gauge[(k + 1) % n])
            for k, a in enumerate(cell)]


def _sector_map(cell, rows, cols, chi):
    """E_L of the cell restricted to bond matrices supported on (rows, cols)."""
    dtype = np.result_type(*cell, np.complex128)

    def apply(v):
        x = np.zeros((chi, chi), dtype=dtype)
        x[rows, cols] = v
        for a in cell:
            x = left_step(x, a)
        return x[rows, cols]
    return apply


def sector_spectra(turned, labels, eta, count):
    """Leading transfer eigenvalues in each charge-difference sector.

    Parameters
    ----------
    turned : list of ndarray
        Site tensors (l, d, r) in the charge gauge (:func:`charge_gauge`).
    labels : ndarray, shape (chi, n_q)
        Charges of the bond before site 1 (``bond_charges(...)[0][0]``).
    eta : float
        Modulus of the dominant eigenvalue of the whole transfer matrix.
    count : int
        Eigenvalues per sector.

    Returns
    -------
    list of (dq, values)
        dq a tuple of ints (q(ket) - q(bra), one per quantity), values the
        complex eigenvalues divided by eta, descending by modulus; sectors in
        ascending dq.

    Notes
    -----
    Each sector's map is built densely from its m = #{(i, j): q_j - q_i = dq}
    applications, O(m n d chi^3), and diagonalised by LAPACK, O(m^3): the
    sectors together cost at most chi^2 applications, as the dense route
    of the whole matrix.
    """
    chi = labels.shape[0]
    diff = labels[None, :, :] - labels[:, None, :]              # (bra i, ket j, n_q)
    keys = np.unique(diff.reshape(-1, labels.shape[1]), axis=0)
    out = []
    for key in keys:
        rows, cols = np.nonzero(np.all(diff == key, axis=2))
        apply = _sector_map(turned, rows, cols, chi)
        m = rows.size
        matrix = np.stack([apply(e) for e in np.eye(m)], axis=1)
        w = np.linalg.eigvals(matrix)
        w = w[np.argsort(-np.abs(w), kind="stable")][:count]
        out.append((tuple(int(v) for v in key), w / eta))
    return out


def charged_cell_spectra(src, charges, *, maxiter=None, count=SPECTRUM_COUNT, tick=None):
    """:func:`~bondscope._kernels.cell.cell_spectra` plus the transfer spectrum per sector.

    Returns
    -------
    CellResult
        As ``cell_spectra``; ``cell`` gains ``transfer_sectors`` (one entry per
        charge difference dq = q(ket) - q(bra): ``charge``, ``eigenvalues``
        (moduli over the largest of the whole matrix, descending), ``phases``,
        ``correlation_length`` and its error, ``eigenvalue_error``) and
        ``charge_residual``.

    Raises
    ------
    As :func:`bond_charges` and ``cell_spectra``.

    Notes
    -----
    Sector correlation lengths: -n / ln |lambda_1(dq)| for dq != 0 (the decay
    of a correlator of charge dq), -n / ln |lambda_2(0)| for dq = 0.
    ``eigenvalue_error`` is chi eps cond(G)^2 (plus the charge equations'
    residual): the rounding of the similarity G^-1 (.) G, a Bauer-Fike
    estimate for a diagonalisable sector (Bauer & Fike, Numer. Math. 2, 137
    (1960)); checked against the dense matrix at chi 8 (error 1e-13).
    """
    result = cell_spectra(src, maxiter=maxiter, count=count, tick=tick)
    cell = [src.tensor(i) for i in range(src.sites)]
    labels, gauge, residual = bond_charges(cell, charges, src.name)
    turned = charge_gauge(cell, gauge)
    n, chi = len(cell), cell[0].shape[0]
    eps = float(np.finfo(np.float64 if src.compute_dtype.itemsize >= 8 else np.float32).eps)
    cond = max(np.linalg.cond(g) for g in gauge)
    error = chi * eps * cond ** 2 + residual
    eta = result.norm ** 2
    sectors = []
    for key, values in sector_spectra(turned, labels[0], eta, count):
        mod = np.abs(values)
        lead = mod[1] if all(k == 0 for k in key) and mod.size > 1 else mod[0]
        xi, xi_err = _decay(lead, n, error)
        sectors.append({"charge": charges.label(key), "eigenvalues": mod.tolist(),
                        "phases": np.angle(values).tolist(), "correlation_length": xi,
                        "correlation_length_error": xi_err, "eigenvalue_error": error})
    result.cell.update({"transfer_sectors": sectors, "charge_residual": residual})
    result.cell_sectors, leaks = bond_sectors(turned, labels, maxiter, src.name)
    result.floors = [f + math.sqrt(leak + error) for f, leak in zip(result.floors, leaks)]
    return result


def bond_sectors(turned, labels, maxiter=None, where="unit cell"):
    """Schmidt values per charge sector on every bond of a cell in the charge gauge.

    Returns
    -------
    sectors : list of list of (tuple, ndarray)
        Per bond k = 1..n (after site k): (bond charge, the sector's values of
        the normalised state, descending), sectors in ascending charge.
    leaks : list of float
        Per bond, the relative weight of the fixed points outside the charge
        blocks (rounding of the gauge; zero for an exact symmetry).

    Notes
    -----
    In the charge gauge l_k and r_k are block diagonal, so X_k Y_k is too
    and its singular values split by sector: one eigendecomposition pair
    and SVD per block, sum_q chi_q^3 work after the fixed points (found
    again in this gauge, as :func:`~bondscope._kernels.cell.cell_spectra`).
    """
    _, left, _ = transfer_spectrum(turned, 2, maxiter, where)
    right, _ = fixed_point(turned, maxiter, where)
    lefts, rights = bond_grams(turned, left, right)
    n = len(turned)
    out, leaks = [], []
    for k in range(n):
        groups = charge_groups(labels[(k + 1) % n])
        blocks, inside = [], 0.0
        for key, idx in groups.items():
            lq, rq = lefts[k][np.ix_(idx, idx)], rights[k][np.ix_(idx, idx)]
            inside += np.linalg.norm(lq) ** 2 + np.linalg.norm(rq) ** 2
            x, _ = square_root(lq)
            y, _ = square_root(rq)
            blocks.append((key, svdvals(x @ y.conj().T)))
        total = math.sqrt(sum(float(np.sum(v * v)) for _, v in blocks))
        out.append([(key, v / total) for key, v in blocks])
        leaks.append(max(0.0, 1.0 - inside / 2.0))
    return out, leaks


def cell_sector_document(result, charges, opts, cuts):
    """Add each bond's charge-resolved fields (as for finite chains) to its cut entry;
    return the top-level ``charges`` field (``total`` None: an infinite chain has no
    total charge; ``residual``: of the bond charge equations)."""
    add_sector_fields(cuts, result.cell_sectors, result.floors, charges, opts)
    return {"local": charges.spec_text(), "moduli": list(charges.moduli),
            "quantities": charges.quantities, "total": None,
            "residual": result.cell["charge_residual"]}


def _decay(ratio, n, error):
    """(-n / ln ratio, its error for an eigenvalue error ``error``); 0 for ratio 0."""
    if ratio <= 0:
        return 0.0, 0.0
    if ratio >= 1:
        return math.inf, math.inf
    return -n / math.log(ratio), n * error / (ratio * math.log(ratio) ** 2)
