"""Unit cells of infinite chains: dense transfer matrices and finite chains built from cells.

The dense transfer matrix T = prod_k sum_s A_k^s (x) conj(A_k^s) is built
with numpy.einsum and diagonalised with numpy.linalg.eig (LAPACK geev), an
independent path from bondscope's matrix-free maps.  A long finite chain of
repeated cells closed by boundary vectors has, at its middle cuts, the
infinite chain's Schmidt spectra up to corrections of order
|lambda_2/lambda_1|^(distance to the ends) (Fannes, Nachtergaele, Werner,
Commun. Math. Phys. 144, 443 (1992)); its profile is bondscope's validated
finite-chain sweep.
"""

import numpy as np

__all__ = ["aklt_cell", "dense_outer_schmidt", "dense_transfer", "random_cell", "repeated_chain",
           "scrambled"]


def aklt_cell():
    """One-site AKLT cell (Affleck, Kennedy, Lieb, Tasaki, PRL 59, 799 (1987)), (2, 3, 2)."""
    sp = np.array([[0.0, 1.0], [0.0, 0.0]])
    sz = np.diag([1.0, -1.0])
    return [np.stack([np.sqrt(2 / 3) * sp, -np.sqrt(1 / 3) * sz, -np.sqrt(2 / 3) * sp.T],
                     axis=1)]


def random_cell(bonds, dims, rng, dtype=np.float64):
    """Random cell: site k shaped (bonds[k-1], dims[k], bonds[k]) (bonds cyclic)."""
    cell = []
    for k, d in enumerate(dims):
        shape = (bonds[k - 1], d, bonds[k])
        a = rng.standard_normal(shape)
        if np.dtype(dtype).kind == "c":
            a = a + 1j * rng.standard_normal(shape)
        cell.append(a.astype(dtype))
    return cell


def scrambled(cell, rng, scale=1.0, condition=1e2):
    """The same state in another gauge: A_k -> G_{k-1}^-1 A_k G_k, times ``scale``.

    G_k has singular values spread over ``condition`` (an ill-conditioned gauge).
    """
    gauges = []
    for a in cell:
        chi = a.shape[2]
        q1, _ = np.linalg.qr(rng.standard_normal((chi, chi)))
        q2, _ = np.linalg.qr(rng.standard_normal((chi, chi)))
        gauges.append(q1 @ np.diag(np.geomspace(1.0, condition, chi)) @ q2)
    out = []
    for k, a in enumerate(cell):
        g_in = np.linalg.inv(gauges[k - 1])
        out.append(scale * np.einsum("ab,bsc,cd->asd", g_in, a, gauges[k]).astype(a.dtype))
    return out


def dense_transfer(cell):
    """The chi^2 x chi^2 transfer matrix of the cell, rows (a, a') and columns (b, b')."""
    t = None
    for a in cell:
        step = np.einsum("asb,csd->acbd", a, a.conj())
        l, r = a.shape[0], a.shape[2]
        step = step.reshape(l * l, r * r)
        t = step if t is None else t @ step
    return t


def dense_outer_schmidt(cell):
    """Schmidt values on the bond between cells from the dense matrix's dominant eigenvectors.

    With T r = eta r and l^T T = eta l^T, the Gram matrices of the two halves are
    conj(l) and r (as chi x chi), and the squared Schmidt values are the eigenvalues of
    their product, normalised (common practice).
    """
    t = dense_transfer(cell)
    chi = cell[0].shape[0]
    w, v = np.linalg.eig(t)
    r = v[:, np.argmax(np.abs(w))].reshape(chi, chi)
    w, v = np.linalg.eig(t.T)
    l = v[:, np.argmax(np.abs(w))].reshape(chi, chi)
    p = np.linalg.eigvals(np.conj(l) @ r)
    p = np.sort(np.abs(p.real))[::-1]
    return np.sqrt(p / p.sum())


def repeated_chain(cell, repeats, rng):
    """A finite chain of ``repeats`` copies of the cell closed by random boundary vectors."""
    chain = [a.copy() for _ in range(repeats) for a in cell]
    left = rng.standard_normal(cell[0].shape[0])
    right = rng.standard_normal(cell[-1].shape[2])
    chain[0] = np.einsum("a,asb->sb", left, chain[0])[None]
    chain[-1] = np.einsum("asb,b->as", chain[-1], right)[..., None]
    return chain
