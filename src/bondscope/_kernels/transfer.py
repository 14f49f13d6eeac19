"""Transfer maps of a unit cell: dominant fixed points and the leading spectrum.

A unit cell of n site tensors A_k shaped (left, phys, right), with the last
right bond equal to the first left bond, repeats forever.  Its left transfer
map sends a matrix X on the bond before site 1 to

    E_L(X) = sum_s A_n^s^dag ... (A_1^s^dag X A_1^s) ... A_n^s

and the right map E_R(Y) = sum_s A_1^s ( ... (A_n^s Y A_n^s^dag) ... ) A_1^s^dag.
Both are the chi^2 x chi^2 transfer matrix (and its adjoint) applied to a
vectorised matrix; they are only ever applied, never built, beyond small chi.

Kernels here trust their inputs: sources are validated at the boundary.
"""

import math

import numpy as np

from .._errors import ConvergenceError

__all__ = [
    "DENSE_BOND",
    "SPECTRUM_COUNT",
    "fixed_point",
    "left_map",
    "right_map",
    "transfer_spectrum",
]

# bond dimensions up to this build the chi^2 x chi^2 matrix and diagonalise it densely
# (the crossover measured by scripts/bench_cells.py, docs/performance.md)
DENSE_BOND = 10
# how many leading transfer eigenvalues are reported
SPECTRUM_COUNT = 6


def left_step(x, a):
    """One site of E_L: sum_s A^s^dag X A^s, for A shaped (l, d, r) and X (l, l)."""
    l, d, r = a.shape
    xa = (x @ a.reshape(l, d * r)).reshape(l * d, r)
    return a.reshape(l * d, r).conj().T @ xa


def right_step(y, a):
    """One site of E_R: sum_s A^s Y A^s^dag, for A shaped (l, d, r) and Y (r, r)."""
    l, d, r = a.shape
    ay = (a.reshape(l * d, r) @ y).reshape(l, d * r)
    return ay @ a.reshape(l, d * r).conj().T


def left_map(cell, x):
    """E_L of the whole cell applied to X (chi, chi)."""
    for a in cell:
        x = left_step(x, a)
    return x


def right_map(cell, y):
    """E_R of the whole cell applied to Y (chi, chi)."""
    for a in reversed(cell):
        y = right_step(y, a)
    return y


def _dense(cell, apply):
    """The chi^2 x chi^2 matrix of a map, column by column (small chi only)."""
    chi = cell[0].shape[0]
    dtype = np.result_type(*cell)
    cols = [apply(cell, e.reshape(chi, chi)).reshape(-1)
            for e in np.eye(chi * chi, dtype=dtype)]
    return np.stack(cols, axis=1)


def _operator(cell, apply):
    from scipy.sparse.linalg import LinearOperator

    chi = cell[0].shape[0]
    dtype = np.result_type(*cell)
    return LinearOperator((chi * chi, chi * chi), dtype=dtype,
                          matvec=lambda v: apply(cell, v.reshape(chi, chi)).reshape(-1))


def _leading(cell, apply, count, maxiter, where):
    """(eigenvalues, eigenvectors) of largest modulus, descending by modulus."""
    chi = cell[0].shape[0]
    n = chi * chi
    if chi <= DENSE_BOND:
        w, v = np.linalg.eig(_dense(cell, apply))
    else:
        from scipy.sparse.linalg import ArpackNoConvergence, eigs

        dtype = np.result_type(*cell)
        start = np.eye(chi, dtype=dtype).reshape(-1)
        try:
            w, v = eigs(_operator(cell, apply), k=min(count, n - 2), which="LM", v0=start,
                        maxiter=maxiter, tol=0)
        except ArpackNoConvergence as exc:
            raise ConvergenceError(
                f"{where}: the transfer-matrix eigensolver did not converge in {maxiter} "
                f"iterations ({len(exc.eigenvalues)} of {min(count, n - 2)} eigenvalues "
                "found); raise transfer_iterations (--transfer-iterations) or check that the "
                "cell is injective") from None
    order = np.argsort(-np.abs(w), kind="stable")[:count]
    return w[order], v[:, order]


def transfer_spectrum(cell, count=SPECTRUM_COUNT, maxiter=None, where="unit cell"):
    """Leading eigenvalues of the cell's transfer matrix and its dominant left fixed point.

    Parameters
    ----------
    cell : list of ndarray
        Site tensors (l, d, r); the last right bond equals the first left bond chi.
    count : int
        Eigenvalues wanted (fewer when chi^2 is smaller).
    maxiter : int, optional
        Arnoldi restarts allowed (scipy's ``eigs``; default 10 chi^2).
    where : str
        Name for messages.

    Returns
    -------
    values : ndarray of complex, shape (k,)
        Eigenvalues, descending by modulus.
    fixed : ndarray, shape (chi, chi)
        Hermitian, positive left fixed point of the dominant eigenvalue.
    residual : float
        ||E_L(X) - eta X|| / (|eta| ||X||) of the returned fixed point.

    Raises
    ------
    ConvergenceError
        The eigensolver did not converge within ``maxiter``.

    Notes
    -----
    chi <= ``DENSE_BOND``: the matrix is built (chi^2 applications of the map)
    and diagonalised by LAPACK, O(chi^6).  Larger chi: implicitly restarted
    Arnoldi (ARPACK through scipy.sparse.linalg.eigs) on a LinearOperator, each
    application O(n d chi^3) time and O(d chi^2) memory; the start vector is
    the identity, so runs are reproducible.
    """
    values, vectors = _leading(cell, left_map, count, maxiter, where)
    chi = cell[0].shape[0]
    x = _hermitian(vectors[:, 0].reshape(chi, chi))
    eta = values[0]
    res = np.linalg.norm(left_map(cell, x) - eta * x) / (abs(eta) * np.linalg.norm(x))
    return values, x, float(res)


def fixed_point(cell, maxiter=None, where="unit cell"):
    """Dominant right fixed point of the cell (Hermitian, positive) and its residual.

    See :func:`transfer_spectrum`; the same solver on E_R with one eigenvalue.
    """
    count = 1 if cell[0].shape[0] <= DENSE_BOND else 2
    values, vectors = _leading(cell, right_map, count, maxiter, where)
    chi = cell[0].shape[0]
    y = _hermitian(vectors[:, 0].reshape(chi, chi))
    res = np.linalg.norm(right_map(cell, y) - values[0] * y) / \
        (abs(values[0]) * np.linalg.norm(y))
    return y, float(res)


def _hermitian(x):
    """The eigenvector as a Hermitian matrix with positive trace (its phase is free)."""
    tr = np.trace(x)
    x = x * (abs(tr) / tr if abs(tr) > 0 else 1.0)
    x = 0.5 * (x + x.conj().T)
    return x / np.linalg.norm(x)


def correlation_length(values, cell_sites):
    """-n / ln |lambda_2 / lambda_1| in sites (0 for a single eigenvalue or lambda_2 = 0)."""
    if len(values) < 2 or abs(values[1]) == 0:
        return 0.0
    ratio = abs(values[1]) / abs(values[0])
    return math.inf if ratio >= 1 else -cell_sites / math.log(ratio)
