"""Successive truncation: kept vectors per cut and the exact infidelity of the result."""

from math import prod

import numpy as np

from .._measure import discarded_weight, kept_rank

__all__ = ["truncation_step", "infidelity", "state_truncation"]


def truncation_step(block, bond_dim, weight_tol):
    """SVD one block of the running truncated state; return (kept left vectors, eps)."""
    from scipy.linalg import svd

    u, s, _ = svd(block, full_matrices=False, overwrite_a=True, check_finite=False)
    keep = kept_rank(s, bond_dim, weight_tol)
    return u[:, :keep], discarded_weight(s, keep)


def infidelity(eps):
    """1 - prod(1 - eps_i), accurate for tiny eps."""
    return max(float(-np.expm1(np.sum(np.log1p(-np.minimum(eps, 1.0))))), 0.0)


def state_truncation(psi, dims, bond_dim, weight_tol):
    """Successive truncated SVDs of a state vector from the left; the exact infidelity.

    Notes
    -----
    The truncated state is an orthogonal projection of psi, so its fidelity is
    the product of the kept weights (Oseledets, SIAM J. Sci. Comput. 33, 2295
    (2011), Thm. 2.2 gives the bound 1 - sum of the discarded weights).
    """
    total, eps = prod(dims), []
    rest = psi.reshape(1, total) / np.linalg.norm(psi)
    for pos in range(1, len(dims)):
        d = dims[pos - 1]
        block = rest.reshape(rest.shape[0] * d, -1)
        u, e = truncation_step(block.copy(), bond_dim, weight_tol)
        rest = u.conj().T @ block
        eps.append(e)
    return infidelity(eps)
