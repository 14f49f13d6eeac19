"""One- and two-site reduced density matrices of a state vector, by partial traces."""

import numpy as np

from .environments import SiteDensities, components

__all__ = ["fermion_permuted", "parity_signs", "state_densities"]


def parity_signs(dims, parity, sites):
    """(-1)^(sum of the parities of ``sites``) as an array broadcast over the state's axes."""
    out = np.ones([1] * len(dims))
    for k in sites:
        shape = [1] * len(dims)
        shape[k] = dims[k]
        out = out * np.where(np.asarray(parity)[:dims[k]] == 1, -1.0, 1.0).reshape(shape)
    return out


def state_densities(psi, dims, parity=None, tick=None):
    """rho_i for every site and rho_ij for every pair i < j of a state vector.

    Parameters
    ----------
    psi : ndarray, shape (prod(dims),)
        Amplitudes, site 1 the slowest index (normalised here).
    dims : list of int
    parity : sequence of int, optional
        0/1 per local basis state: with it, rho_ij's blocks that are odd on
        site i carry the string prod_{i<k<j} (-1)^{p_k}.
    tick : callable, optional
        Called after each pair.

    Returns
    -------
    SiteDensities
        Matrices, keyed by site (from 0) and by pair.

    Notes
    -----
    rho_ij = M M^H with M the state reshaped to (d_i d_j, rest) after moving
    sites i and j to the front: O(D d_i d_j) per pair (D = prod(dims)), one
    copy of the state in memory; with parities a second product with the
    signed state.  Entry errors are bounded by gamma_D = D eps (Higham,
    *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 3.5).
    """
    n = len(dims)
    t = np.asarray(psi).reshape(dims)
    t = t / np.linalg.norm(t)
    eps = float(np.finfo(t.dtype).eps)
    out = SiteDensities()
    for i in range(n):
        m = np.moveaxis(t, i, 0).reshape(dims[i], -1)
        out.one[i] = m @ m.conj().T
        out.errors[i] = eps * t.size
    if parity is not None:
        out.total_parity = float(np.vdot(t, parity_signs(dims, parity, range(n)) * t).real)
    for i in range(n):
        for j in range(i + 1, n):
            m = np.moveaxis(t, (i, j), (0, 1)).reshape(dims[i] * dims[j], -1)
            rho = m @ m.conj().T
            if parity is not None and j > i + 1:
                pairs, odd = components(dims[i], parity)
                string = np.moveaxis(parity_signs(dims, parity, range(i + 1, j)) * t,
                                     (i, j), (0, 1)).reshape(m.shape)
                signed = (string @ m.conj().T).reshape(dims[i], dims[j], dims[i], dims[j])
                full = rho.reshape(signed.shape)
                for (s, u), flip in zip(pairs, odd):
                    if flip:
                        full[s, :, u, :] = signed[s, :, u, :]
                        full[u, :, s, :] = signed[u, :, s, :]
            out.two[i, j] = rho
            out.errors[i, j] = eps * t.size * (2 if parity is not None else 1)
            if tick:
                tick()
    return out


def fermion_permuted(psi, dims, order, parity=None):
    """The state with its sites put in ``order`` (new site k is old site order[k]).

    With parities, the amplitude of each configuration takes the sign of the
    permutation of its occupied (odd) modes: (-1)^{p_a p_b} for every pair
    of sites whose order is exchanged (fermionic reordering).
    """
    t = np.asarray(psi).reshape(dims)
    if parity is not None:
        sign = np.ones([1] * len(dims))
        position = {old: new for new, old in enumerate(order)}
        for a in range(len(dims)):
            for b in range(a + 1, len(dims)):
                if position[a] > position[b]:
                    pa = parity_signs(dims, parity, [a]) < 0
                    pb = parity_signs(dims, parity, [b]) < 0
                    sign = sign * np.where(pa & pb, -1.0, 1.0)
        t = t * sign
    return np.ascontiguousarray(np.transpose(t, order)).reshape(-1)
