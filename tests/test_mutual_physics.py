"""Mutual information against exact results: free fermions (Peschel), spinful orbitals,
orderings recovered from shuffled chains, and the decay fit on exact laws.

Sources: mode entropies of Gaussian states from blocks of the correlation matrix
(Peschel, J. Phys. A 36, L205 (2003)); exact diagonalisation (scipy.sparse eigsh,
tests/reference/spin.py); Slater determinants as determinants of orbital rows
(common practice; a permutation of the modes permutes the rows).
"""

import numpy as np
import pytest
from reference import slater, spin
from test_mutual import exact_mps

import bondscope
from bondscope._analyses.decay import distance_profile, fit_decay

SPINLESS = "0,1"
SPINFUL = "0,1,1,0"


def _peschel_tol(m):
    # the reported floors bound the kernel's error; the builder's dropped weight w adds
    # about sqrt(w) ln(1/w) (negligible at w ~ 1e-27) -- 1e-12 is headroom
    return np.asarray(m.mutual_information_floors) + 1e-12


FREE_CASES = [
    # L, stagger, form of the state (mps from successive SVDs, or the vector itself)
    (16, 2.0, "mps"),      # gapped chain, exact MPS
    (12, 0.0, "vector"),   # critical chain, state vector
    (14, 0.0, "mps"),      # critical chain, exact MPS
]


@pytest.mark.parametrize("L,stagger,form", FREE_CASES)
def test_free_fermions_parity_matches_peschel(L, stagger, form):
    phi, C = slater.orbitals(L, stagger=stagger)
    psi = slater.slater_vector(phi)
    state = psi if form == "vector" else slater.vector_mps(psi, L)[0]
    m = bondscope.mutual_information(state, parity=SPINLESS, reorder=False)
    s, mi = slater.peschel_mutual(C, [[i] for i in range(L)])
    assert np.abs(np.array(m.site_entropies) - s).max() < 1e-12
    assert (np.abs(m.matrix - mi) <= _peschel_tol(m)).all()
    assert abs(m.total_parity - (-1) ** (L // 2)) < 1e-12
    # without parities the sites are spins: equal at adjacent sites (no string between),
    # different at some non-adjacent pair (the string correlates with the modes between)
    spins = bondscope.mutual_information(state, reorder=False).matrix
    near = np.abs(np.diagonal(spins, 1) - np.diagonal(mi, 1))
    far = np.abs(np.diagonal(spins, 2) - np.diagonal(mi, 2))
    assert near.max() < 1e-12 and far.max() > 1e-3


@pytest.mark.slow
def test_free_fermions_sixty_modes():
    phi, C = slater.orbitals(60, stagger=3.0)
    tensors, dropped = slater.slater_mps(phi)
    assert dropped < 1e-24
    m = bondscope.mutual_information(tensors, parity=SPINLESS, reorder=False)
    s, mi = slater.peschel_mutual(C, [[i] for i in range(60)])
    assert np.abs(np.array(m.site_entropies) - s).max() < 1e-12
    assert (np.abs(m.matrix - mi) <= _peschel_tol(m)).all()
    # a gapped chain: exponential decay (Wolf et al., PRL 100, 070502 (2008))
    assert m.decay["law"] == "exponential"


@pytest.mark.parametrize("form", ["mps", "vector"])
def test_spinful_orbitals_match_the_four_mode_blocks(form):
    # two species with different hopping and staggering, modes (1 up, 1 down, 2 up, ...)
    up, _ = slater.orbitals(6, stagger=3.0)
    down, _ = slater.orbitals(6, stagger=2.0, hopping=0.6)
    phi = slater.interleaved(up, down)
    C = phi @ phi.T
    psi = slater.slater_vector(phi)
    if form == "mps":
        state = slater.merge_pairs(slater.vector_mps(psi, 12)[0])
    else:
        state = psi.reshape([4] * 6)
    m = bondscope.mutual_information(state, parity=SPINFUL, reorder=False)
    s, mi = slater.peschel_mutual(C, [[2 * i, 2 * i + 1] for i in range(6)])
    assert np.abs(np.array(m.site_entropies) - s).max() < 1e-12
    assert (np.abs(m.matrix - mi) <= _peschel_tol(m)).all()


def _tfim_chain(L=8, g=1.5):
    _, psi = spin.ground_state(spin.tfim(L, g))
    return psi


def _recovered(order, shuffle):
    """The original sites in the suggested order: the chain or its reverse."""
    back = [shuffle[k - 1] for k in order]
    return back in (list(range(len(order))), list(range(len(order)))[::-1])


SHUFFLES = [
    # form, permutation (new site k holds chain site shuffle[k])
    ("vector", [3, 0, 6, 2, 7, 1, 5, 4]),
    ("mps", [5, 2, 7, 0, 3, 6, 1, 4]),
]


@pytest.mark.parametrize("form,shuffle", SHUFFLES)
def test_shuffled_spin_chain_gets_its_order_back(form, shuffle):
    L = len(shuffle)
    psi = _tfim_chain(L)
    mixed = np.transpose(psi.reshape([2] * L), shuffle).reshape(-1)
    state = mixed.reshape([2] * L) if form == "vector" else exact_mps(mixed, [2] * L)
    m = bondscope.mutual_information(state, swap_bond_dim=2 ** (L // 2))
    assert m.ordering["verdict"] == "reorder"
    assert _recovered(m.suggested_order, shuffle)
    assert m.ordering["suggested_cost"] < m.ordering["current_cost"]
    chain = bondscope.profile(psi.reshape([2] * L)).entropies
    after = np.array(m.reordered["after"]["entropies"])
    if shuffle[m.suggested_order[0] - 1] != 0:
        after = after[::-1]
    assert np.abs(after - chain).max() < 1e-10
    if form == "mps":
        assert m.reordered["method"] == "swap gates"
        assert m.reordered["infidelity_bound"] < 1e-20


@pytest.mark.parametrize("form", ["vector", "mps"])
def test_shuffled_fermion_modes_get_their_order_back(form):
    # permuting the modes of a Slater determinant permutes the rows of its orbitals; the
    # reordered state must be the unshuffled determinant (fermionic signs included)
    L, shuffle = 10, [4, 9, 1, 6, 0, 8, 3, 7, 2, 5]
    phi, _ = slater.orbitals(L, stagger=1.0)
    mixed = slater.slater_vector(phi[shuffle])
    state = mixed.reshape([2] * L) if form == "vector" else slater.vector_mps(mixed, L)[0]
    m = bondscope.mutual_information(state, parity=SPINLESS, swap_bond_dim=64)
    assert _recovered(m.suggested_order, shuffle)
    chain = bondscope.profile(slater.slater_vector(phi).reshape([2] * L)).entropies
    after = np.array(m.reordered["after"]["entropies"])
    if shuffle[m.suggested_order[0] - 1] != 0:
        after = after[::-1]
    assert np.abs(after - chain).max() < 1e-9


def test_bell_pairs_ordering_and_selection():
    # Bell pairs on sites (1, 4) and (2, 5), site 3 and 6 in product states: the pairs'
    # sites are selected, the order puts each pair side by side (exact: 1 bit per pair)
    bell = np.array([[1.0, 0.0], [0.0, 1.0]]) / np.sqrt(2)
    up = np.array([1.0, 0.0])
    psi = np.einsum("ad,be,c,f->abcdef", bell, bell, up, up).reshape([2] * 6)
    m = bondscope.mutual_information(psi, base=2)
    assert sorted(m.selection["sites"]) == [1, 2, 4, 5]
    order = m.suggested_order
    pos = {site: k for k, site in enumerate(order)}
    assert abs(pos[1] - pos[4]) == 1 and abs(pos[2] - pos[5]) == 1
    assert max(m.reordered["after"]["entropies"]) == pytest.approx(1.0, abs=1e-12)
    assert max(m.reordered["before"]["entropies"]) == pytest.approx(2.0, abs=1e-12)


DECAY_LAWS = [
    # exact I(r) on 40 sites, expected law, expected parameter
    (lambda r: 0.3 * np.exp(-r / 3.0), "exponential", 3.0),
    (lambda r: 0.3 * r ** -1.5, "power law", 1.5),
    (lambda r: 0.3 * np.where(r < 3, 1.0, 0.0), "inconclusive", None),  # too few points
]


@pytest.mark.parametrize("law,expected,parameter", DECAY_LAWS)
def test_decay_fit_on_exact_laws(law, expected, parameter):
    n = 40
    r = np.abs(np.subtract.outer(np.arange(n), np.arange(n))).astype(float)
    mi = np.where(r > 0, law(np.maximum(r, 1)), 0.0)
    fit = fit_decay(distance_profile(mi, np.full((n, n), 1e-14)))
    assert fit["law"] == expected
    if expected == "exponential":
        assert fit["exponential"]["correlation_length"] == pytest.approx(parameter, rel=1e-9)
    elif expected == "power law":
        assert fit["power_law"]["exponent"] == pytest.approx(parameter, rel=1e-9)
