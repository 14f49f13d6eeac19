"""Mixed states against dense references: thermal density matrices by exact diagonalisation,
dense partial traces, the SVD of the vectorised operator, the HJW theorem, Gaussian states.

Sources: thermal states exp(-beta H)/Z by scipy.linalg.eigh (tests/reference/mixed.py);
operator Schmidt values by scipy.linalg.svdvals of rho reshaped (Zanardi, PRA 63, 040304
(2001)); Gaussian block Rényi-2 from correlation matrices (Peschel, J. Phys. A 36, L205
(2003)); purification freedom (Hughston, Jozsa, Wootters, Phys. Lett. A 183, 14 (1993));
entanglement of purification >= I(A:B)/2 (Terhal, Horodecki, Leung, DiVincenzo,
J. Math. Phys. 43, 4286 (2002)).
"""

from functools import cache

import numpy as np
import pytest
from builders import random_chain
from reference import mixed as ref
from reference import spin

import bondscope

DM, PUR = "left,ket,bra,right", "left,phys,ancilla,right"
LN2 = np.log(2.0)


@cache
def thermal(model, L, beta):
    H = {"ising": lambda: spin.tfim(L, 1.0), "xx": lambda: spin.xx(L),
         "heisenberg": lambda: spin.xxz(L, 1.0)}[model]()
    return ref.thermal(H, beta)


def blocks(rho, L):
    """Dense S_2 of left and right blocks, I_2, and the purity, per cut."""
    dims = [2] * L
    left = [ref.renyi2(ref.partial_trace(rho, dims, list(range(l)))) for l in range(1, L)]
    right = [ref.renyi2(ref.partial_trace(rho, dims, list(range(l, L)))) for l in range(1, L)]
    whole = ref.renyi2(rho)
    return np.array(left), np.array(right), np.array(left) + np.array(right) - whole, whole


def mixed_profile(rho, L, kind, **kw):
    dims = [2] * L
    if kind == "density-matrix":
        return bondscope.profile(ref.mpo_from_dense(rho, dims), axes=DM, **kw)
    return bondscope.profile(ref.purification_from_dense(rho, dims), axes=PUR, **kw)


THERMAL = [
    ("ising", 5, 1.0),        # critical transverse-field Ising, moderate temperature
    ("xx", 5, 2.0),           # XX chain (free fermions), low temperature
    ("heisenberg", 5, 0.7),   # Heisenberg antiferromagnet, high temperature
    ("heisenberg", 5, 8.0),   # Heisenberg, nearly the ground state (block S_2 large, I_2 ~ 2 S_2)
]


@pytest.mark.parametrize("kind", ["density-matrix", "purified"])
@pytest.mark.parametrize("model,L,beta", THERMAL)
def test_thermal_blocks_match_dense_partial_traces(model, L, beta, kind):
    """S_2(A), S_2(B), I_2 and the purity against dense partial traces of exp(-beta H)/Z,
    within the profile's own error bounds (which must be small and must hold)."""
    rho = thermal(model, L, beta)
    p = mixed_profile(rho, L, kind)
    left, right, mutual, whole = blocks(rho, L)
    err = p.column("renyi2_error")
    assert p.kind == kind
    assert np.all(np.abs(p.column("renyi2_left") - left) <= err + 1e-13)
    assert np.all(np.abs(p.column("renyi2_right") - right) <= err + 1e-13)
    assert np.all(np.abs(p.column("mutual_information_2") - mutual)
                  <= p.column("mutual_information_2_error") + 1e-13)
    assert abs(p["purity"] - np.exp(-whole)) <= p["purity_error"] + 1e-15
    assert abs(p["renyi2_state"] - whole) <= p["renyi2_state_error"] + 1e-13
    assert np.all(err < 1e-8) and p["purity_error"] < 1e-10


@pytest.mark.parametrize("model,L,beta", THERMAL[:3])
def test_operator_schmidt_values_match_svd_of_vectorised_rho(model, L, beta):
    """Density matrix: per-cut values are the singular values of rho reshaped
    (ket_A bra_A) x (ket_B bra_B), over ||rho||_2 (scipy.linalg.svdvals)."""
    rho = thermal(model, L, beta)
    p = mixed_profile(rho, L, "density-matrix", spectrum=True)
    for l, got in enumerate(p.spectra, 1):
        want = ref.operator_schmidt_values(rho, [2] * L, l)
        want = want[want > p.cuts[l - 1]["resolution_floor"]]
        np.testing.assert_allclose(got, want, atol=1e-13)
    assert "operator-space" in p["cut_spectra"]
    assert p["hilbert_schmidt_norm"] == pytest.approx(np.linalg.norm(rho), rel=1e-12)


def _hjw_rows():
    return [
        ("single", None),     # random unitary on every single ancilla: nothing changes
        ("pair", 2),          # random unitary on the ancillas of sites 1, 2 (across cut 2)
        ("pair", 3),          # across cut 3
    ]


@pytest.mark.parametrize("gates,cut", _hjw_rows())
def test_hjw_same_physics_other_purification(gates, cut):
    """Purifications related by ancilla unitaries give the same physical answers (HJW);
    a gate across a cut raises the purification's entropy there, single ones leave it."""
    L = 5
    rho = thermal("heisenberg", L, 1.0)
    rng = np.random.default_rng(5)
    base = ref.purification_from_dense(rho, [2] * L)
    if gates == "single":
        rotated = [np.einsum("ba,lpar->lpbr", ref.haar_unitary(rng, 2), t) for t in base]
    else:
        rotated = ref.ancilla_gate(base, cut - 1, ref.haar_unitary(rng, 4))
    p0 = bondscope.profile(base, axes=PUR)
    p1 = bondscope.profile(rotated, axes=PUR)
    for field in ("renyi2_left", "renyi2_right", "mutual_information_2"):
        np.testing.assert_allclose(p1.column(field), p0.column(field), atol=1e-10)
    assert p1["purity"] == pytest.approx(p0["purity"], abs=1e-12)
    if gates == "single":
        np.testing.assert_allclose(p1.entropies, p0.entropies, atol=1e-10)
    else:
        assert p1.entropies[cut - 1] > p0.entropies[cut - 1] + 1e-3
        others = [i for i in range(L - 1) if abs(i - (cut - 1)) > 1]
        np.testing.assert_allclose(p1.entropies[others], p0.entropies[others], atol=1e-10)


@pytest.mark.parametrize("kind", ["density-matrix", "purified"])
@pytest.mark.parametrize("d,L", [(2, 5), (3, 4)])
def test_infinite_temperature(kind, d, L):
    """rho = 1/d^N: S_2(A) = |A| ln d, I_2 = 0, purity d^-N (definition)."""
    rho = np.eye(d ** L) / d ** L
    dims = [d] * L
    tensors = ref.mpo_from_dense(rho, dims) if kind == "density-matrix" else \
        ref.purification_from_dense(rho, dims)
    p = bondscope.profile(tensors, axes=DM if kind == "density-matrix" else PUR)
    sizes = np.arange(1, L)
    np.testing.assert_allclose(p.column("renyi2_left"), sizes * np.log(d), atol=1e-12)
    np.testing.assert_allclose(p.column("renyi2_right"), (L - sizes) * np.log(d), atol=1e-12)
    np.testing.assert_allclose(p.column("mutual_information_2"), 0, atol=1e-12)
    assert p["purity"] == pytest.approx(float(d) ** -L, rel=1e-12)


@pytest.mark.filterwarnings("ignore::bondscope.UnnormalisedStateWarning")
@pytest.mark.parametrize("kind", ["density-matrix", "purified"])
@pytest.mark.parametrize("dtype", [np.float64, np.complex128])
def test_pure_states(kind, dtype):
    """rho = |psi><psi|: I_2 = 2 S_2(A), S_2(A) = S_2(B) = the pure profile's Rényi-2,
    purity 1 (definition)."""
    rng = np.random.default_rng(9)
    mps = random_chain(rng, [2] * 6, [2, 4, 5, 4, 2], dtype)
    pure = bondscope.profile(mps, renyi=[2])
    if kind == "density-matrix":
        p = bondscope.profile(ref.pure_mpo(mps), axes=DM)
    else:
        p = bondscope.profile([t[:, :, None, :] for t in mps], axes=PUR)
    s2 = pure.renyi(2)
    np.testing.assert_allclose(p.column("renyi2_left"), s2, atol=1e-10)
    np.testing.assert_allclose(p.column("renyi2_right"), s2, atol=1e-10)
    np.testing.assert_allclose(p.column("mutual_information_2"), 2 * s2, atol=1e-10)
    assert p["purity"] == pytest.approx(1.0, abs=1e-12)


def _scrambled_product(rng, L, cuts):
    """A product mixed state purified site by site, then random gates on the ancillas
    beside each of ``cuts``: its purification entropy there is > 0, the physical state a
    product."""
    tensors = []
    for _ in range(L):
        a = rng.standard_normal((2, 2)) + 1j * rng.standard_normal((2, 2))
        r = a @ a.conj().T
        e, v = np.linalg.eigh(r / np.trace(r).real)
        tensors.append(((v * np.sqrt(e)) @ v.conj().T).reshape(1, 2, 2, 1))
    for cut in cuts:
        tensors = ref.ancilla_gate(tensors, cut - 1, ref.haar_unitary(rng, 4))
    return tensors


@pytest.mark.parametrize("cuts", [
    (1,),        # gate beside the first cut
    (2,),        # beside the middle cut
    (3,),        # beside the last cut
    (1, 3),      # two gates at once, on disjoint ancilla pairs
])
def test_disentangling_a_scrambled_product_state(cuts):
    """Gates on the two ancillas beside a cut are undone: cut entropy back to ~0 in one
    purification, the physical I_2 = 0 (product state), never above the start anywhere."""
    rng = np.random.default_rng(20 + sum(cuts))
    p = bondscope.profile(_scrambled_product(rng, 4, cuts), axes=PUR, disentangle=True)
    dis = p.column("disentangled_entropy")
    for cut in cuts:
        assert p.entropies[cut - 1] > 0.05
    np.testing.assert_allclose(dis, 0, atol=1e-8)
    assert np.all(p.column("disentangled_rank", int) == 1)
    assert np.all(dis <= p.entropies)
    np.testing.assert_allclose(p.column("mutual_information_2"), 0, atol=1e-10)
    assert p["disentangle"]["converged_cuts"] == 3 and p["disentangle"]["sweeps_converged"]


@pytest.mark.parametrize("model,L,beta", [("heisenberg", 5, 3.0), ("ising", 5, 1.0)])
def test_disentangled_between_half_mutual_information_and_start(model, L, beta):
    """Thermal purifications: I(A:B)/2 <= disentangled <= stored cut entropy, with I the
    von Neumann mutual information from dense partial traces (Terhal et al. 2002)."""
    rho = thermal(model, L, beta)
    dims = [2] * L
    p = mixed_profile(rho, L, "purified", disentangle=True, weight_tol=1e-6)
    whole = ref.entropy(rho)
    for l, cut in enumerate(p.cuts, 1):
        mutual = (ref.entropy(ref.partial_trace(rho, dims, list(range(l))))
                  + ref.entropy(ref.partial_trace(rho, dims, list(range(l, L)))) - whole)
        assert mutual / 2 <= cut["disentangled_entropy"] + 1e-10
        assert cut["disentangled_entropy"] <= cut["entropy"]
        assert 1 <= cut["disentangled_kept"] <= cut["disentangled_rank"]
        assert cut["disentangled_discarded_weight"] <= 1e-6


def _gaussian(L, layers, seed):
    rng = np.random.default_rng(seed)
    occupations = rng.uniform(0.05, 0.95, L)
    circuit = [(k % 2, rng.uniform(0, np.pi, L)) for k in range(layers)]
    return ref.gaussian_mpo(occupations, circuit)


def test_gaussian_reference_matches_dense():
    """The Gaussian reference itself: its correlation matrix equals Tr(rho c_i^dagger c_j)
    of its dense MPO with Jordan-Wigner fermions (definition), and its Peschel S_2 the
    dense partial trace."""
    L = 6
    mpo, corr = _gaussian(L, 3, 1)
    rho = ref.dense_from_mpo(mpo)
    c = ref.jordan_wigner(L)
    dense = np.array([[np.trace(rho @ c[i].conj().T @ c[j]) for j in range(L)]
                      for i in range(L)])
    np.testing.assert_allclose(dense, corr, atol=1e-12)
    for l in range(1, L):
        assert ref.gaussian_renyi2(corr, list(range(l))) == pytest.approx(
            ref.renyi2(ref.partial_trace(rho, [2] * L, list(range(l)))), abs=1e-12)


def _gaussian_check(L, layers, seed):
    mpo, corr = _gaussian(L, layers, seed)
    p = bondscope.profile(mpo, axes=DM)
    want_l = [ref.gaussian_renyi2(corr, list(range(l))) for l in range(1, L)]
    want_r = [ref.gaussian_renyi2(corr, list(range(l, L))) for l in range(1, L)]
    err = p.column("renyi2_error")
    assert np.all(np.abs(p.column("renyi2_left") - want_l) <= err + 1e-12)
    assert np.all(np.abs(p.column("renyi2_right") - want_r) <= err + 1e-12)
    assert np.all(err < 1e-6)


@pytest.mark.parametrize("L,seed", [(40, 2), (100, 4)])
def test_gaussian_mixed_state_at_large_size(L, seed):
    """A depth-3 circuit of hopping gates on a thermal product (exact MPO, bond <= 64):
    block S_2 against Peschel's correlation-matrix formula."""
    _gaussian_check(L, 3, seed)


@pytest.mark.slow
def test_gaussian_mixed_state_at_hundred_sites():
    """L = 100, depth 4 (bond <= 256, the exact rank kept): as above."""
    _gaussian_check(100, 4, 3)
