"""Physics validation: bondscope's numbers against results nobody in this project wrote.

Every comparison names its source. References live in ``tests/reference``:
exact diagonalisation (scipy.sparse eigsh), free-fermion correlation matrices
(Peschel, J. Phys. A 36, L205 (2003)), exact MPS (AKLT, GHZ, W, cluster) and
random-state averages (Page, PRL 71, 1291 (1993)).
"""

import json
import subprocess
import sys
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
import scipy.linalg

import bondscope
from reference import freefermion, spin, states

EPS = np.finfo(np.float64).eps
FIXTURES = Path(__file__).parent / "fixtures"
LN2 = np.log(2.0)


def direct_spectra(psi, dims):
    """Squared Schmidt values at every cut from scipy.linalg.svd (LAPACK gesdd)."""
    out = []
    for l in range(1, len(dims)):
        dA = int(np.prod(dims[:l]))
        s = scipy.linalg.svd(psi.reshape(dA, -1), compute_uv=False)
        out.append(s**2)
    return out


def entropy(p, alpha=1):
    """Rényi/von Neumann entropy (nats) of a probability vector (definition)."""
    p = p[p > 0]
    if alpha == 1:
        return float(-(p * np.log(p)).sum())
    if np.isinf(alpha):
        return float(-np.log(p.max()))
    return float(np.log((p**alpha).sum()) / (1 - alpha))


def entropy_tol(dim, dtype=np.float64):
    """Entropy tolerance for spectra of a dim x dim bond matrix.

    Each weight is accurate to ~eps (backward-stable eigen/SVD) and enters as
    -p ln p, so the entropy error is at most ~dim * eps * (1 + ln(1/eps)); the
    factor 2 is headroom.
    """
    eps = np.finfo(dtype).eps
    return 2 * dim * eps * (1 + np.log(1 / eps))


@lru_cache(maxsize=None)
def ed_state(model, L, param, boundary):
    """Cached ED ground state (energy, psi) of a reference.spin model."""
    if model == "tfim":
        H = spin.tfim(L, param, boundary)
    elif model == "xxz":
        H = spin.xxz(L, param, boundary)
    else:
        H = spin.xx(L, boundary)
    return spin.ground_state(H)


def free_fermion(model, L, param, boundary, alpha=1):
    """Exact free-fermion entropies of the ED model with the same arguments."""
    if model == "tfim":
        return freefermion.ising_entropies(L, param, boundary, alpha=alpha)
    return freefermion.xx_entropies(L, boundary, alpha=alpha)


# --- ED ground states: bondscope vs scipy.linalg.svd at every cut -------------

ED_SVD_CASES = [
    # critical Ising, open (scipy.linalg.svd reference, LAPACK)
    pytest.param("tfim", 12, 1.0, "open", "svd", id="tfim-crit-open-svd"),
    # same state through the reduced-density-matrix route
    pytest.param("tfim", 12, 1.0, "open", "gram", id="tfim-crit-open-gram"),
    # ordered phase, quasi-degenerate doublet resolved by eigsh
    pytest.param("tfim", 12, 0.5, "open", "gram", id="tfim-ordered-open-gram"),
    # paramagnet on a ring
    pytest.param("tfim", 12, 2.0, "periodic", "svd", id="tfim-para-ring-svd"),
    # Heisenberg antiferromagnet, open (not free-fermion: only the SVD reference)
    pytest.param("xxz", 12, 1.0, "open", "svd", id="heisenberg-open-svd"),
    # gapped Ising-like XXZ ring
    pytest.param("xxz", 12, 2.0, "periodic", "gram", id="xxz-delta2-ring-gram"),
    # XX ring through the automatic route choice
    pytest.param("xx", 14, None, "periodic", "auto", id="xx-ring-auto"),
]


@pytest.mark.parametrize("model, L, param, boundary, route", ED_SVD_CASES)
def test_ed_state_matches_direct_svd(model, L, param, boundary, route):
    _, psi = ed_state(model, L, param, boundary)
    ref = direct_spectra(psi, [2] * L)
    prof = bondscope.profile(psi, local_dim=2, route=route, spectrum=True, renyi=("2", "inf"))
    assert list(prof.positions) == list(range(1, L))
    for l, (p_ref, lam, cut) in enumerate(zip(ref, prof.spectra, prof.cuts), start=1):
        dim = min(2**l, 2 ** (L - l))
        tol = entropy_tol(dim)
        assert cut["entropy"] == pytest.approx(entropy(p_ref), abs=tol)
        assert cut["renyi"]["2"] == pytest.approx(entropy(p_ref, 2), abs=tol)
        assert cut["renyi"]["inf"] == pytest.approx(entropy(p_ref, np.inf), abs=tol)
        # spectrum=True keeps the values above the route's floor; they agree with
        # LAPACK to backward-stability accuracy and carry all but a floor-sized weight
        assert len(lam) == cut["schmidt_rank"] <= len(p_ref)
        np.testing.assert_allclose(lam**2, p_ref[:len(lam)], atol=10 * dim * EPS)
        assert np.all(lam > cut["resolution_floor"])
        assert p_ref[len(lam):].sum() <= 10 * dim * max(cut["resolution_floor"] ** 2, EPS)


# --- ED vs free-fermion correlation matrices (Peschel 2003) -----------------

PESCHEL_CASES = [
    # XX chain, open (Peschel 2003; Jordan-Wigner hopping matrix)
    pytest.param("xx", 12, None, "open", id="xx-open-L12"),
    # XX ring, L = 2 mod 4: periodic orbitals, closed shell (Lieb-Schultz-Mattis 1961)
    pytest.param("xx", 10, None, "periodic", id="xx-ring-L10"),
    # XX ring, L = 0 mod 4: antiperiodic orbitals, closed shell
    pytest.param("xx", 12, None, "periodic", id="xx-ring-L12"),
    # critical Ising, open (Majorana covariance;
    # Vidal, Latorre, Rico, Kitaev, PRL 90, 227902 (2003))
    pytest.param("tfim", 12, 1.0, "open", id="ising-crit-open"),
    # critical Ising ring, even-parity sector
    pytest.param("tfim", 12, 1.0, "periodic", id="ising-crit-ring"),
    # ordered side, open: true (even) ground state of the doublet
    pytest.param("tfim", 10, 0.7, "open", id="ising-ordered-open"),
    # paramagnetic side, ring
    pytest.param("tfim", 10, 1.5, "periodic", id="ising-para-ring"),
]


@pytest.mark.parametrize("model, L, param, boundary", PESCHEL_CASES)
def test_ed_matches_free_fermion_energy(model, L, param, boundary):
    # the two references share a Hamiltonian convention; a sign slip would show here
    energy, _ = ed_state(model, L, param, boundary)
    exact = (freefermion.ising_ground_energy(L, param, boundary) if model == "tfim"
             else freefermion.xx_ground_energy(L, boundary))
    assert energy == pytest.approx(exact, abs=L * 1e3 * EPS)


@pytest.mark.parametrize("model, L, param, boundary", PESCHEL_CASES)
@pytest.mark.parametrize("alpha, key", [
    (1, None),  # von Neumann
    (2, "2"),  # Rényi-2 from the same mode occupations
    (0.5, "0.5"),  # Rényi-1/2
    (np.inf, "inf"),  # min-entropy: largest eigenvalue only
])
@pytest.mark.parametrize("as_mps", [False, True], ids=["vector", "mps"])
def test_profile_matches_peschel(model, L, param, boundary, alpha, key, as_mps):
    _, psi = ed_state(model, L, param, boundary)
    renyi = (key,) if key else ()
    if as_mps:
        prof = bondscope.profile(states.from_vector(psi, [2] * L), renyi=renyi)
    else:
        # the SVD route resolves tiny weights, which dominate Rényi orders below 1
        prof = bondscope.profile(psi, local_dim=2, renyi=renyi, route="svd")
    got = prof.entropies if key is None else prof.renyi(key)
    # the ED vector is converged to eigsh tol 1e-13; entropies inherit ~1e-12
    tol = 1e-10
    if alpha < 1:
        # each of up to L-1 block modes has occupation error ~L eps from eigvalsh, and
        # enters as ln(z^a + (1-z)^a) / (1-a) ~ z^a / (1-a)
        tol += (L - 1) * (L * EPS) ** alpha / (1 - alpha)
    np.testing.assert_allclose(got, free_fermion(model, L, param, boundary, alpha), atol=tol)


@pytest.mark.filterwarnings("ignore::bondscope.UnnormalisedStateWarning")
@pytest.mark.parametrize("precision", ["promote", "stored"])
@pytest.mark.parametrize("as_mps", [False, True], ids=["vector", "mps"])
def test_single_precision_matches_peschel(precision, as_mps):
    # float32 amplitudes of the critical Ising chain (Peschel 2003): rounding of the
    # stored data (and of the arithmetic with precision="stored") is ~eps32
    L = 10
    _, psi = ed_state("tfim", L, 1.0, "open")
    source = states.from_vector(psi, [2] * L) if as_mps else psi
    source = [A.astype(np.float32) for A in source] if as_mps else source.astype(np.float32)
    prof = bondscope.profile(source, local_dim=None if as_mps else 2, precision=precision)
    tol = entropy_tol(2 ** (L // 2), np.float32)
    np.testing.assert_allclose(prof.entropies, freefermion.ising_entropies(L, 1.0), atol=tol)


@pytest.mark.parametrize("base, factor", [
    ("e", 1.0),  # nats
    (2, 1 / LN2),  # bits: log_2 x = ln x / ln 2
    (10, 1 / np.log(10.0)),  # decimal digits
])
def test_log_base_rescales_peschel(base, factor):
    _, psi = ed_state("xx", 12, None, "open")
    prof = bondscope.profile(psi, local_dim=2, base=base)
    np.testing.assert_allclose(prof.entropies, factor * freefermion.xx_entropies(12), atol=1e-10)


SPECTRUM_CASES = [
    # XX chain, open, half and quarter blocks (products of mode occupations, Peschel 2003)
    pytest.param("xx", 12, None, "open", 6, id="xx-open-half"),
    pytest.param("xx", 12, None, "open", 3, id="xx-open-quarter"),
    # critical Ising ring, half block
    pytest.param("tfim", 12, 1.0, "periodic", 6, id="ising-ring-half"),
    # ordered Ising, open: near-degenerate doubled spectrum
    pytest.param("tfim", 10, 0.7, "open", 5, id="ising-ordered-half"),
]


@pytest.mark.parametrize("model, L, param, boundary, l", SPECTRUM_CASES)
def test_spectrum_matches_peschel_products(model, L, param, boundary, l):
    _, psi = ed_state(model, L, param, boundary)
    prof = bondscope.profile(psi, local_dim=2, route="svd", spectrum=True)
    # eigenvalues above 1e-10 are insensitive to the ED convergence (tol 1e-13)
    cutoff = 1e-10
    if model == "tfim":
        ref = freefermion.ising_spectrum(L, param, l, boundary, cutoff=cutoff)
    else:
        ref = freefermion.xx_spectrum(L, l, boundary, cutoff=cutoff)
    got = prof.spectra[l - 1] ** 2
    np.testing.assert_allclose(got[: len(ref)], ref, atol=1e-11)
    assert np.all(got[len(ref):] < cutoff * (1 + 1e-3))


@pytest.mark.slow
@pytest.mark.parametrize("model, L, param, boundary", [
    ("tfim", 18, 1.0, "open"),  # critical Ising at the largest ED size (Peschel 2003)
    ("xx", 18, None, "periodic"),  # XX ring, L = 2 mod 4
])
def test_large_ed_matches_peschel(model, L, param, boundary):
    _, psi = ed_state(model, L, param, boundary)
    prof = bondscope.profile(psi, local_dim=2)
    np.testing.assert_allclose(prof.entropies, free_fermion(model, L, param, boundary), atol=1e-9)


# --- Haar-random states vs Page ---------------------------------------------

# Entropies of Haar states concentrate sharply (Levy's lemma; Hayden, Leung,
# Winter, Commun. Math. Phys. 265, 95 (2006)), with the exact variance of
# Vivo, Pato, Oshanin, PRE 83, 052106 (2011). The mean of K samples is held to
# within Z_TOL standard errors of Page's mean: a Gaussian false-alarm rate of
# ~6e-7 per cut, while any systematic slip (a wrong log base, a dropped weight)
# is many standard errors off.
Z_TOL = 5.0

HAAR_CASES = [
    # 12 qubits, one sample, all cuts (Page 1993)
    pytest.param(2, 12, 1, "auto", id="qubits-12"),
    # 12 qubits through the SVD route, averaged over 4 samples
    pytest.param(2, 12, 4, "svd", id="qubits-12-svd-avg4"),
    # 7 qutrits (2187 amplitudes), averaged over 8 samples
    pytest.param(3, 7, 8, "gram", id="qutrits-7-avg8"),
    # mixed local dimensions 2,3,4,2,3 (Page's formula depends only on dA, dB)
    pytest.param((2, 3, 4, 2, 3), 5, 16, "auto", id="mixed-dims-avg16"),
]


@pytest.mark.parametrize("d, N, samples, route", HAAR_CASES)
def test_haar_entropy_matches_page(d, N, samples, route):
    rng = np.random.default_rng(1291)
    dims = [d] * N if np.isscalar(d) else list(d)
    total = int(np.prod(dims))
    runs = np.array([
        bondscope.profile(states.haar_state(total, rng), local_dim=dims, route=route).entropies
        for _ in range(samples)
    ])
    for l in range(1, N):
        dA = int(np.prod(dims[:l]))
        dB = total // dA
        sem = np.sqrt(states.page_variance(dA, dB) / samples)
        assert abs(runs[:, l - 1].mean() - states.page_entropy(dA, dB)) < Z_TOL * sem, l


def test_haar_purity_matches_lubkin():
    # mean purity exp(-S_2) = (dA + dB) / (dA dB + 1) (Lubkin, J. Math. Phys. 19, 1028 (1978));
    # tolerance Z_TOL standard errors of the sample mean (common practice)
    rng = np.random.default_rng(1028)
    N, samples = 10, 64
    purities = np.array([
        np.exp(-bondscope.profile(states.haar_state(2**N, rng), local_dim=2,
                                  renyi=("2",)).renyi("2"))
        for _ in range(samples)
    ])
    for l in range(1, N):
        col = purities[:, l - 1]
        sem = col.std(ddof=1) / np.sqrt(samples)
        assert abs(col.mean() - states.lubkin_purity(2**l, 2 ** (N - l))) < Z_TOL * sem, l


def test_page_formula_limits():
    # Page 1993: S(dA=1) = 0; S ~ ln m - m / (2n) for 1 << m <= n (Page's asymptotic form)
    assert states.page_entropy(1, 64) == pytest.approx(0.0, abs=EPS)
    m, n = 64, 2**14
    assert states.page_entropy(m, n) == pytest.approx(np.log(m) - m / (2 * n), abs=1 / (m * n))


@pytest.mark.slow
def test_haar_entropy_matches_page_large():
    # 20 qubits, one sample: sigma ~ 1e-4 at the middle cut (Page 1993; Vivo et al. 2011)
    rng = np.random.default_rng(1993)
    N = 20
    prof = bondscope.profile(states.haar_state(2**N, rng), local_dim=2)
    for l in range(1, N):
        dA, dB = 2**l, 2 ** (N - l)
        sigma = np.sqrt(states.page_variance(dA, dB))
        assert abs(prof.entropies[l - 1] - states.page_entropy(dA, dB)) < Z_TOL * sigma, l


# --- exact MPS with known spectra -------------------------------------------


def aklt_weights(n_cuts):
    # AKLT 1987: one singlet across every cut -> (1/2, 1/2)
    return [np.array([0.5, 0.5])] * n_cuts


def w_weights(N):
    # W state: one excitation, left block holds it with probability l/N (common practice)
    return [np.array(sorted([l / N, (N - l) / N], reverse=True)) for l in range(1, N)]


EXACT_MPS_CASES = [
    # AKLT with spin-1/2 edges, 12 spin-1 sites (Affleck, Kennedy, Lieb, Tasaki, PRL 59, 799)
    pytest.param(lambda: states.aklt(12), aklt_weights(13), id="aklt-edges"),
    # GHZ on 12 qubits: two equal weights (common practice)
    pytest.param(lambda: states.ghz(12), [np.full(2, 1 / 2)] * 11, id="ghz-qubits"),
    # qutrit GHZ on 8 sites: three equal weights (common practice)
    pytest.param(lambda: states.ghz(8, 3), [np.full(3, 1 / 3)] * 7, id="ghz-qutrits"),
    # ququart GHZ on 5 sites
    pytest.param(lambda: states.ghz(5, 4), [np.full(4, 1 / 4)] * 4, id="ghz-ququarts"),
    # W state on 10 qubits
    pytest.param(lambda: states.w_state(10), w_weights(10), id="w-10"),
    # cluster state on 12 qubits: one ebit per cut (Hein, Eisert, Briegel, PRA 69, 062311)
    pytest.param(lambda: states.cluster(12), [np.full(2, 1 / 2)] * 11, id="cluster-12"),
    # random product state, complex, mixed dims: weight 1 everywhere (definition)
    pytest.param(lambda: states.product([2, 3, 5, 2, 4], np.random.default_rng(7)),
                 [np.ones(1)] * 4, id="product-mixed"),
]


@pytest.mark.parametrize("make, weights", EXACT_MPS_CASES)
@pytest.mark.parametrize("as_vector", [False, True], ids=["mps", "vector"])
def test_exact_mps_spectra(make, weights, as_vector):
    tensors = make()
    if as_vector:
        dims = [A.shape[1] for A in tensors]
        prof = bondscope.profile(states.to_vector(tensors), local_dim=dims, spectrum=True,
                                 renyi=("2", "inf", "0"))
    else:
        prof = bondscope.profile(tensors, spectrum=True, renyi=("2", "inf", "0"))
    assert len(prof.cuts) == len(weights)
    for cut, lam, p in zip(prof.cuts, prof.spectra, weights):
        tol = 1e3 * EPS
        # values at or below the route's resolution floor are noise by construction
        np.testing.assert_allclose(lam[: len(p)] ** 2, p, atol=tol)
        assert np.all(lam[len(p):] <= cut["resolution_floor"])
        assert cut["schmidt_rank"] == len(p)
        assert cut["entropy"] == pytest.approx(entropy(p), abs=tol)
        assert cut["renyi"]["2"] == pytest.approx(entropy(p, 2), abs=tol)
        assert cut["renyi"]["inf"] == pytest.approx(entropy(p, np.inf), abs=tol)
        # Rényi-0 is ln(rank) by definition (docs/profile-schema.md)
        assert cut["renyi"]["0"] == pytest.approx(np.log(len(p)), abs=tol)


@pytest.mark.parametrize("L", [
    20,  # short chain: edge corrections visible near the ends
    41,  # odd length: asymmetric middle cut
])
def test_aklt_bulk_approaches_half(L):
    # fixed boundary vectors: weights -> 1/2 with corrections ~ 3^-distance from the
    # transfer-matrix eigenvalue -1/3 (Fannes, Nachtergaele, Werner 1992)
    prof = bondscope.profile(states.aklt(L, edge_spins=False), spectrum=True)
    for l, lam in enumerate(prof.spectra, start=1):
        assert len(lam) == 2
        assert np.abs(lam**2 - 0.5).max() <= 3.0 ** -min(l, L - l) + 1e3 * EPS, l
    middle = prof.entropies[L // 2 - 1]
    assert middle == pytest.approx(LN2, abs=3.0 ** -(L // 2 - 1))


# --- gauge invariance ---------------------------------------------------------


def random_gauge(tensors, rng, *, complex_gauge, extra):
    """Insert G, G^+ on every bond; G is chi x (chi + extra) with full row rank.

    Returns the gauged tensors and the largest condition number of the G's.
    """
    out = [A.copy() for A in tensors]
    worst = 1.0
    for i in range(len(out) - 1):
        chi = out[i].shape[2]
        G = np.eye(chi, chi + extra) + 0.3 * rng.standard_normal((chi, chi + extra))
        if complex_gauge:
            G = G + 0.3j * rng.standard_normal((chi, chi + extra))
        Ginv = np.linalg.pinv(G)  # right inverse: G @ Ginv = 1
        worst = max(worst, np.linalg.cond(G))
        out[i] = np.tensordot(out[i], G, axes=(2, 0))
        out[i + 1] = np.tensordot(Ginv, out[i + 1], axes=(1, 0))
    return out, worst


def critical_ising_chain():
    _, psi = ed_state("tfim", 10, 1.0, "open")
    return states.from_vector(psi, [2] * 10)


GAUGE_CASES = [
    # real invertible gauge on the exact critical-Ising chain (gauge freedom of MPS:
    # Perez-Garcia, Verstraete, Wolf, Cirac, Quantum Inf. Comput. 7, 401 (2007))
    pytest.param(critical_ising_chain, False, 0, id="ising-real"),
    # complex gauge on a real chain makes the tensors complex
    pytest.param(critical_ising_chain, True, 0, id="ising-complex"),
    # inflating every bond by 3: stored bond dimension grows, Schmidt rank does not
    pytest.param(critical_ising_chain, False, 3, id="ising-inflated"),
    # AKLT with edge spins, complex gauge
    pytest.param(lambda: states.aklt(8), True, 0, id="aklt-complex"),
    # W state, inflated bonds
    pytest.param(lambda: states.w_state(9), False, 2, id="w-inflated"),
]


@pytest.mark.parametrize("make, complex_gauge, extra", GAUGE_CASES)
def test_gauge_invariance(make, complex_gauge, extra):
    rng = np.random.default_rng(401)
    tensors = make()
    gauged, cond = random_gauge(tensors, rng, complex_gauge=complex_gauge, extra=extra)
    ref = bondscope.profile(tensors, spectrum=True, renyi=("2",))
    got = bondscope.profile(gauged, spectrum=True, renyi=("2",))
    # the gauge amplifies rounding by at most cond(G)^2 per bond
    tol = 1e3 * cond**2 * EPS
    np.testing.assert_allclose(got.entropies, ref.entropies, atol=tol)
    np.testing.assert_allclose(got.renyi("2"), ref.renyi("2"), atol=tol)
    # the gauge raises the floor (tests/test_floors.py), so it may resolve fewer values,
    # never more, and those it resolves agree
    assert np.all(got.schmidt_ranks <= ref.schmidt_ranks)
    for a, b, floor in zip(got.spectra, ref.spectra, got.column("resolution_floor")):
        np.testing.assert_allclose(a, b[: len(a)], atol=tol)
        assert np.all(b[len(a):] <= floor)
    assert list(got.bond_dimensions) == [b + extra for b in ref.bond_dimensions]


# --- truncation report --------------------------------------------------------

TRUNCATION_CASES = [
    # critical Ising, keep 4 per cut
    pytest.param("tfim", 12, 1.0, {"bond_dim": 4}, id="ising-chi4"),
    # Heisenberg, keep 8 per cut
    pytest.param("xxz", 12, 1.0, {"bond_dim": 8}, id="heisenberg-chi8"),
    # XX chain, drop weights below 1e-6
    pytest.param("xx", 12, None, {"weight_tol": 1e-6}, id="xx-tol1e-6"),
]


@pytest.mark.parametrize("model, L, param, trunc", TRUNCATION_CASES)
@pytest.mark.parametrize("as_mps", [False, True], ids=["vector", "mps"])
def test_truncation_report(model, L, param, trunc, as_mps):
    _, psi = ed_state(model, L, param, "open")
    ref = direct_spectra(psi, [2] * L)
    source = states.from_vector(psi, [2] * L) if as_mps else psi
    prof = bondscope.profile(source, local_dim=None if as_mps else 2, **trunc)
    disc = prof.discarded_weights
    for l, (p, cut) in enumerate(zip(ref, prof.cuts), start=1):
        if "bond_dim" in trunc:
            expected = p[trunc["bond_dim"]:].sum()  # Eckart-Young: optimal rank-D tail
        else:
            # keep the smallest set whose dropped weight stays within the tolerance
            tail = np.cumsum(p[::-1])
            expected = tail[tail <= trunc["weight_tol"]].max(initial=0.0)
        assert cut["discarded_weight"] == pytest.approx(expected, abs=1e3 * EPS), l
    t = prof.truncation
    # any state of Schmidt rank <= D across cut l has infidelity >= that cut's discarded
    # weight (Eckart-Young); successive truncation infidelity <= sum of discarded weights
    # (Verstraete & Cirac, PRB 73, 094423 (2006))
    assert disc.max() - 1e3 * EPS <= t["infidelity"] <= t["bound"] + 1e3 * EPS
    assert t["bound"] == pytest.approx(disc.sum(), abs=1e3 * EPS)


# --- norm ---------------------------------------------------------------------


@pytest.mark.parametrize("scale", [
    3.7,  # larger than one
    1e-3,  # small but well above underflow
])
def test_unnormalised_state_reports_norm(scale):
    _, psi = ed_state("xx", 10, None, "open")
    with pytest.warns(bondscope.UnnormalisedStateWarning):
        prof = bondscope.profile(scale * psi, local_dim=2)
    assert prof.norm == pytest.approx(scale, rel=1e3 * EPS)
    np.testing.assert_allclose(prof.entropies, freefermion.xx_entropies(10), atol=1e-10)


# --- checkpoint fixtures through the loader ------------------------------------

ISING6 = freefermion.ising_entropies(6, 1.0)

FIXTURE_CASES = [
    # exact 6-site critical Ising ground state (Peschel 2003) in each layout:
    # rank-3 left,phys,right from 0, float64
    pytest.param("mps_basic.h5", ISING6, np.float64, id="basic"),
    # axes stored phys,right,left
    pytest.param("mps_permuted.h5", ISING6, np.float64, id="permuted-axes"),
    # one group per site numbered from 1, complex128 (local phases)
    pytest.param("mps_groups_one_based.h5", ISING6, np.float64, id="groups-one-based"),
    # single precision
    pytest.param("mps_float32.h5", ISING6, np.float32, id="float32"),
    # complex as an HDF5 compound (re, im)
    pytest.param("mps_compound.h5", ISING6, np.float64, id="compound-re-im"),
    # complex64 as a compound (real, imag)
    pytest.param("mps_compound_f32.h5", ISING6, np.float32, id="compound-real-imag-f32"),
    # rank-2 boundary tensors
    pytest.param("mps_rank2_ends.h5", ISING6, np.float64, id="rank2-ends"),
    # flat state vector of length 2**6
    pytest.param("state_flat.h5", ISING6, np.float64, id="vector-1d"),
    # state vector shaped (2,)*6, complex64
    pytest.param("state_nd.h5", ISING6, np.float32, id="vector-nd-complex64"),
    # AKLT with edge spins: ln 2 at each of 5 cuts (AKLT 1987)
    pytest.param("aklt_edges.h5", np.full(5, LN2), np.float64, id="aklt-mixed-dims"),
]


@pytest.mark.filterwarnings("ignore::bondscope.UnnormalisedStateWarning")
@pytest.mark.parametrize("name, expected, dtype", FIXTURE_CASES)
def test_fixture_checkpoints(name, expected, dtype):
    prof = bondscope.profile(FIXTURES / name)
    # stored rounding of ~eps per amplitude moves weights by ~eps: 1e3 eps covers ln(1/eps)
    np.testing.assert_allclose(prof.entropies, expected, atol=1e3 * np.finfo(dtype).eps)


# --- what the command line prints ----------------------------------------------


def run_cli(*args):
    """Stdout of ``python -m bondscope ARGS``."""
    done = subprocess.run([sys.executable, "-m", "bondscope", *args], capture_output=True,
                          text=True, check=True)
    return done.stdout


def test_cli_table_and_json_match_peschel():
    # the demo checkpoint is the critical Ising chain (Peschel 2003); its printed table
    # rounds S to the shown decimals, the JSON keeps full precision
    demo = Path(__file__).resolve().parent.parent / "data" / "demo.h5"
    exact = freefermion.ising_entropies(64, 1.0)
    doc = json.loads(run_cli("profile", str(demo), "--json"))
    got = np.array([c["entropy"] for c in doc["cuts"]])
    np.testing.assert_allclose(got, exact, atol=1e-8)
    lines = run_cli("profile", str(demo)).splitlines()
    header = next(i for i, line in enumerate(lines) if line.split()[:1] == ["cut"])
    column = lines[header].split().index("S")
    rows = [r for r in map(str.split, lines[header + 1:]) if r and r[0].isdigit()]
    printed = np.array([float(r[column]) for r in rows])
    decimals = len(rows[0][column].split(".")[1])
    assert [int(r[0]) for r in rows] == list(range(1, 64))
    np.testing.assert_allclose(printed, exact, atol=1e-8 + 0.5 * 10.0**-decimals)
