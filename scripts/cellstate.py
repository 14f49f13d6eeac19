"""Infinite-chain ground states: imaginary-time evolution on a two-site unit cell.

Part of the ground-state generator (see `groundstate` for finite chains).
The state is a two-site cell of right-canonical tensors B_0, B_1 shaped
(left, phys, right) with the Schmidt values on the bonds between them.
Each step applies exp(-dt h) to one bond and splits the result by SVD
without inverting Schmidt values (Hastings, J. Math. Phys. 50, 095207
(2009)), then the other bond; dt shrinks in stages until the Schmidt values
stop changing (Vidal, PRL 98, 070201 (2007)).

Bond Hamiltonians (Pauli matrices, the conventions of `groundstate`)::

    tfim_bond(g):  h = -X X - (g/2) (Z 1 + 1 Z)
    xx_bond():     h = -1/2 (X X + Y Y)

Exact energies per site for the checks: `tfim_energy`, `xx_energy`.

Example
-------
>>> import cellstate
>>> gates = cellstate.trotter_gates(cellstate.tfim_bond(1.5))
>>> run = cellstate.cell_ground_state(gates, bond_dim=8)
>>> run.tensors                     # [B_0, B_1], a unit cell of two sites
"""

import math
from collections import namedtuple

import numpy as np
from scipy.integrate import quad
from scipy.linalg import expm, svd

__all__ = [
    "CellState",
    "cell_energy",
    "cell_ground_state",
    "ising_gates",
    "tfim_bond",
    "tfim_energy",
    "trotter_gates",
    "xx_bond",
    "xx_energy",
]

_X = np.array([[0.0, 1.0], [1.0, 0.0]])
_Z = np.diag([1.0, -1.0])
_I = np.eye(2)
_SP = np.array([[0.0, 1.0], [0.0, 0.0]])

CellState = namedtuple("CellState", "tensors schmidt steps converged raw labels")
CellState.__doc__ = """Result of `cell_ground_state`.

Attributes
----------
tensors : list of ndarray
    [B_0, B_1], right-canonical (left, phys, right) tensors of the cell.
schmidt : list of ndarray
    Schmidt values on the bond left of site 0 and left of site 1.
steps : int
    Imaginary-time steps taken (each updates both bonds).
converged : bool
    Whether the last stage reached its Schmidt-value tolerance.
raw : list of ndarray
    The tensors before the cell's normalisation (to continue the run: ``warm``).
labels : list of ndarray or None
    With ``charges``: the charge of each Schmidt value on the two bonds.
"""


def tfim_bond(g):
    """Bond term of H = -sum X X - g sum Z, the field split between the two sites."""
    return -np.kron(_X, _X) - 0.5 * g * (np.kron(_Z, _I) + np.kron(_I, _Z))


def xx_bond():
    """Bond term of H = -1/2 sum (X X + Y Y) = -sum (S+ S- + S- S+) (real)."""
    return -(np.kron(_SP, _SP.T) + np.kron(_SP.T, _SP))


def tfim_energy(g):
    """Exact ground energy per site of the infinite chain.

    -(1/pi) int_0^pi sqrt(1 + g^2 + 2g cos k) dk.

    References
    ----------
    P. Pfeuty, Ann. Phys. 57, 79 (1970).
    """
    return -quad(lambda k: math.sqrt(1 + g * g + 2 * g * math.cos(k)), 0, math.pi,
                 epsabs=1e-13, epsrel=1e-13)[0] / math.pi


def xx_energy():
    """Exact ground energy per site of the infinite XX chain, -2/pi (half-filled band)."""
    return -2.0 / math.pi


def _sector_svd(m, row_q, col_q):
    """SVD of a matrix that is block-diagonal in a charge: (s, vh, charge of each value)."""
    values, rows, labels = [], [], []
    for q in np.intersect1d(row_q, col_q):
        r, c = np.flatnonzero(row_q == q), np.flatnonzero(col_q == q)
        _, s, vh = svd(m[np.ix_(r, c)], full_matrices=False, lapack_driver="gesvd")
        full = np.zeros((s.size, m.shape[1]), dtype=m.dtype)
        full[:, c] = vh
        values.append(s)
        rows.append(full)
        labels.append(np.full(s.size, q))
    s, vh, q = np.concatenate(values), np.concatenate(rows), np.concatenate(labels)
    order = np.argsort(-s, kind="stable")
    return s[order], vh[order], q[order]


def _kept(s, chi, cutoff, whole):
    """How many values to keep; ``whole`` drops a degenerate multiplet the bond would split."""
    weights = s * s / np.sum(s * s)
    keep = max(1, min(chi, int(np.count_nonzero(weights > cutoff))))
    if whole:
        while 1 < keep < s.size and s[keep] > s[keep - 1] * (1 - 1e-8):
            keep -= 1
    return keep


def _update(lam_left, a, b, gate, chi, cutoff, bond_q=None, site_q=None):
    """Apply a two-site gate to (a, b): (new a, Schmidt values between, new b, charges).

    With ``site_q`` (the additive charge of each local state) and ``bond_q``
    (that of the outer bonds of (a, b): one bond in a two-site cell whose
    charge per cell is zero), theta is block-diagonal in the charge of the
    bond between a and b, so each block is split on its own and every kept
    vector carries one charge: the cell stays in its sector to rounding,
    however long it runs.  The charges returned are those of the new bond
    (None without ``site_q``).
    """
    l, d, _ = a.shape
    theta = np.tensordot(a, b, axes=(2, 0))                             # l s t r
    theta = np.tensordot(gate, theta, axes=([2, 3], [1, 2])).transpose(2, 0, 1, 3)
    r = theta.shape[3]
    m = (lam_left[:, None, None, None] * theta).reshape(l * d, d * r)
    if site_q is None:
        _, s, vh = svd(m, full_matrices=False, lapack_driver="gesvd")
        q = None
    else:
        s, vh, q = _sector_svd(m, (bond_q[:, None] + site_q[None, :]).reshape(-1),
                               (bond_q[None, :] - site_q[:, None]).reshape(-1))
    keep = _kept(s, chi, cutoff, whole=site_q is not None)
    norm = np.linalg.norm(s[:keep])
    b_new = vh[:keep].reshape(keep, d, r)
    a_new = np.tensordot(theta, b_new.conj(), axes=([2, 3], [1, 2])) / norm
    return a_new, s[:keep] / norm, b_new, None if q is None else q[:keep]


def trotter_gates(h):
    """dt -> the two bond gates exp(-dt h), exp(-dt h) of the even/odd splitting."""
    d = round(math.sqrt(h.shape[0]))

    def gates(dt):
        g = expm(-dt * h).reshape(d, d, d, d)
        return g, g
    return gates


def ising_gates(g):
    """dt -> gates whose product is exp(dt sum X X) exp(dt g sum Z) exactly.

    The first gate carries both sites' field and the bond (0, 1), the second
    the bond (1, 0).  At g = 1 the product is the row transfer matrix of the
    two-dimensional Ising model on its self-dual critical line for every dt
    (Kramers & Wannier, Phys. Rev. 60, 252 (1941)), so large steps keep the
    fixed point critical (central charge 1/2) while converging fast.
    """
    xx = np.kron(_X, _X)

    def gates(dt):
        bond = expm(dt * xx)
        field = np.kron(expm(dt * g * _Z), expm(dt * g * _Z))
        return (bond @ field).reshape(2, 2, 2, 2), bond.reshape(2, 2, 2, 2)
    return gates


def cell_ground_state(gates, bond_dim, *, steps=(0.1, 0.03, 0.01, 0.003, 0.001), tol=1e-10,
                      max_steps=20000, cutoff=1e-14, seed=0, start=None, charges=None,
                      warm=None):
    """Dominant state of repeated two-site gates on a two-site cell (iTEBD).

    Parameters
    ----------
    gates : callable
        ``gates(dt)`` returns the gates (d, d, d, d) of bond (0, 1) and bond
        (1, 0); see `trotter_gates`, `ising_gates`.
    bond_dim : int
        Largest bond dimension kept.
    steps : sequence of float
        Imaginary time steps of the stages, decreasing.
    tol : float
        A stage ends when the largest change of the Schmidt values over ten
        steps is below ``tol`` times ten dt.
    max_steps : int
        Steps per stage at most.
    cutoff : float
        Schmidt weights at or below this are dropped.
    seed : int
        Seed of the random start state.
    start : (int, int), optional
        Start from the product of these local basis states instead (a state
        of definite charge: gates that conserve a charge then keep the cell
        in one sector, so it stays injective; a random start mixes sectors).
    charges : (int, ...), optional
        The conserved additive charge of each local basis state (with
        ``start``, whose cell must carry charge zero).  Each update then
        splits theta block by block (`_update`) and keeps degenerate
        multiplets whole, so rounding cannot leak the cell out of its sector
        over long runs, and a bond may keep fewer than ``bond_dim`` values.
    warm : CellState, optional
        Continue from this state (for example the result at a smaller bond
        dimension) instead of a fresh start; with ``charges``, ``warm`` must
        come from a charged run of the same ``start``.

    Returns
    -------
    CellState

    Notes
    -----
    With `trotter_gates` the fixed point differs from the ground state of
    the bond-truncated manifold by O(dt), hence the last stage's small dt.
    Each step costs O(d^3 chi^3).
    """
    d = gates(steps[0])[0].shape[0]
    rng = np.random.default_rng(seed)
    tensors = [rng.standard_normal((1, d, 1)) for _ in range(2)]
    if start is not None:
        tensors = [np.eye(d)[s].reshape(1, d, 1) for s in start]
    lams = [np.ones(1), np.ones(1)]
    site_q = None if charges is None else np.asarray(charges)
    labels = None if site_q is None else [np.zeros(1, int), site_q[list(start[:1])]]
    if site_q is not None and site_q[list(start)].sum() != 0:
        raise ValueError(f"start {start} carries charge {site_q[list(start)].sum()}, not 0")
    if warm is not None:
        tensors, lams = [a.copy() for a in warm.raw], [v.copy() for v in warm.schmidt]
        labels = None if warm.labels is None else [q.copy() for q in warm.labels]
    total, converged = 0, False
    for dt in steps:
        pair = gates(dt)
        converged = False
        snapshot = lams[0]
        for k in range(max_steps):
            for i in (0, 1):
                j = 1 - i
                tensors[i], lams[j], tensors[j], q = _update(
                    lams[i], tensors[i], tensors[j], pair[i], bond_dim, cutoff,
                    None if labels is None else labels[i], site_q)
                if labels is not None:
                    labels[j] = q
            total += 1
            if k % 10 == 9:
                if snapshot.shape == lams[0].shape and \
                        np.abs(snapshot - lams[0]).max() < tol * 10 * dt:
                    converged = True
                    break
                snapshot = lams[0]
    return CellState(_normalised(tensors), lams, total, converged, tensors, labels)


def _normalised(tensors):
    """The cell scaled so that its transfer matrix's dominant eigenvalue is 1."""
    from scipy.sparse.linalg import LinearOperator, eigs

    chi = tensors[0].shape[0]

    def apply(v):
        y = v.reshape(chi, chi)
        for a in tensors[::-1]:
            l, d, r = a.shape
            y = (a.reshape(l * d, r) @ y).reshape(l, d * r) @ a.reshape(l, d * r).conj().T
        return y.reshape(-1)
    if chi * chi <= 2:
        eta = abs(apply(np.eye(chi).reshape(-1))[0])
    else:
        op = LinearOperator((chi * chi, chi * chi), matvec=apply, dtype=tensors[0].dtype)
        eta = abs(eigs(op, k=1, v0=np.eye(chi).reshape(-1), tol=1e-14)[0][0])
    return [a / eta ** 0.25 for a in tensors]


def cell_energy(tensors, h):
    """Energy per site of a two-site cell in any gauge: mean of <h> on its two bonds.

    The left and right fixed points of the cell's transfer matrix come from
    dense diagonalisation (small chi); <h> on bond (i, i+1) is
    tr(l E_h r) / tr(l E r) with E the two-site transfer matrix.
    """
    d = tensors[0].shape[1]
    H = h.reshape(d, d, d, d)
    out = []
    for a, b in (tensors, tensors[::-1]):
        ab = np.tensordot(a, b, axes=(2, 0))                                # l s t r
        chi = ab.shape[0]
        T = np.einsum("astb,cstd->acbd", ab, ab.conj()).reshape(chi * chi, chi * chi)
        w, v = np.linalg.eig(T)
        right = v[:, np.argmax(np.abs(w))].reshape(chi, chi)
        w, v = np.linalg.eig(T.T)
        left = v[:, np.argmax(np.abs(w))].reshape(chi, chi)
        hab = np.tensordot(H, ab, axes=([2, 3], [1, 2])).transpose(2, 0, 1, 3)
        num = np.einsum("ac,astb,cstd,bd->", left, hab, ab.conj(), right)
        den = np.einsum("ac,astb,cstd,bd->", left, ab, ab.conj(), right)
        out.append((num / den).real)
    return float(np.mean(out))
