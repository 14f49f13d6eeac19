"""Spectra at every cut against scipy's SVD of the contracted state."""

import math
import warnings
from math import prod

import numpy as np
import pytest

import bondscope
from builders import contract, direct_spectra, random_chain, scramble_gauge

EPS = np.finfo(np.float64).eps


def _profile(obj, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        kw.setdefault("spectrum", True)
        return bondscope.profile(obj, **kw)


def _assert_spectra(got, ref, tol):
    assert len(got) == len(ref)
    for cut, (s, r) in enumerate(zip(got, ref), start=1):
        k = min(len(s), len(r))
        np.testing.assert_allclose(s[:k], r[:k], rtol=0, atol=tol, err_msg=f"cut {cut}")
        # anything beyond the common length is numerically zero
        assert np.all(r[k:] <= tol) and np.all(s[k:] <= tol)


CHAINS = [
    # (local dims, internal bonds, dtype, scramble the gauge)
    ([2] * 8, [2, 4, 8, 11, 8, 4, 2], np.float64, False),    # qubits, full bonds
    ([2] * 8, [2, 4, 8, 11, 8, 4, 2], np.float64, True),     # same state, scrambled gauge
    ([2] * 8, [2, 4, 6, 6, 6, 4, 2], np.complex128, True),   # complex, scrambled
    ([3, 2, 4, 2, 3, 2], [3, 5, 9, 7, 2], np.complex128, False),  # mixed local dims
    ([2] * 6, [2, 4, 16, 4, 2], np.float64, False),          # bond above the rank: 16 > 8
    ([5, 5], [5], np.float64, False),                        # two qudits
]


@pytest.mark.parametrize("dims, bonds, dtype, scramble", CHAINS)
def test_chain_spectra_match_svd(dims, bonds, dtype, scramble):
    # reference: scipy.linalg.svdvals of each cut of the contracted state
    rng = np.random.default_rng(7)
    tensors = random_chain(rng, dims, bonds, dtype)
    ref = direct_spectra(contract(tensors), dims)
    if scramble:
        tensors = scramble_gauge(rng, tensors)
    prof = _profile(tensors)
    tol = 200 * EPS * max(bonds) * max(dims)
    _assert_spectra(prof.spectra, ref, tol)
    assert prof.bond_dimensions.tolist() == bonds
    assert prof.get("route") == "qr-sweep"


def test_gauge_scrambled_profiles_agree():
    # a gauge change leaves the state, hence every entropy, unchanged (common practice)
    rng = np.random.default_rng(3)
    tensors = random_chain(rng, [2] * 10, [2, 4, 8, 16, 16, 16, 8, 4, 2], np.complex128)
    a = _profile(tensors, renyi=["2"])
    b = _profile(scramble_gauge(rng, tensors), renyi=["2"])
    np.testing.assert_allclose(a.entropies, b.entropies, atol=1e-12)
    np.testing.assert_allclose(a.renyi("2"), b.renyi("2"), atol=1e-12)


STATES = [
    # (local dims, dtype, route)
    ([2] * 10, np.float64, "svd"),
    ([2] * 10, np.float64, "gram"),
    ([2] * 9, np.complex128, "gram"),        # odd N: uneven middle cut
    ([2] * 9, np.complex128, "svd"),
    ([3, 2, 4, 2, 3], np.complex128, "gram"),  # mixed local dims
    ([4, 4, 4], np.float64, "gram"),
]


@pytest.mark.parametrize("dims, dtype, route", STATES)
def test_state_routes_match_svd(dims, dtype, route):
    # reference: scipy.linalg.svdvals; the Gram route resolves weights lambda^2 to
    # about eps * n (Golub & Van Loan, Matrix Computations, sec. 8.1)
    rng = np.random.default_rng(11)
    psi = rng.standard_normal(prod(dims))
    if np.dtype(dtype).kind == "c":
        psi = psi + 1j * rng.standard_normal(prod(dims))
    ref = direct_spectra(psi, dims)
    prof = _profile(psi, local_dim=dims, route=route)
    assert prof.get("route") == route
    n = prod(dims)
    for cut, (s, r) in enumerate(zip(prof.spectra, ref), start=1):
        k = min(len(s), len(r))
        if route == "svd":
            np.testing.assert_allclose(s[:k], r[:k], atol=100 * EPS * math.sqrt(n), rtol=0)
        else:
            np.testing.assert_allclose(s[:k] ** 2, r[:k] ** 2, atol=100 * EPS * math.sqrt(n),
                                       rtol=0, err_msg=f"cut {cut}")


def test_low_rank_state_floor_and_rank():
    # a product of two Bell pairs and a GHZ-like chain: ranks known exactly (common practice)
    bell = np.array([1, 0, 0, 1]) / math.sqrt(2)
    psi = np.kron(np.kron(bell, bell), np.array([1.0, 0.0]))
    for route in ("svd", "gram"):
        prof = _profile(psi, route=route)
        assert prof.schmidt_ranks.tolist() == [2, 1, 2, 1]
        np.testing.assert_allclose(prof.entropies, [math.log(2), 0, math.log(2), 0], atol=1e-12)
        floors = prof.column("resolution_floor")
        expected = np.sqrt(EPS) if route == "gram" else EPS
        assert np.all(floors >= expected * 0.5) and np.all(floors < expected * 100)


def _successive_truncation(psi, dims, bond_dim, weight_tol):
    """Reference: explicit truncated state from successive SVDs (Oseledets 2011, TT-SVD)."""
    from bondscope._measure import kept_rank

    psi = psi / np.linalg.norm(psi)
    rest, left_maps = psi.reshape(1, -1), []
    for d in dims[:-1]:
        block = rest.reshape(rest.shape[0] * d, -1)
        u, s, _ = np.linalg.svd(block, full_matrices=False)
        k = kept_rank(s, bond_dim, weight_tol)
        left_maps.append(u[:, :k])
        rest = u[:, :k].conj().T @ block
    x = rest
    for u in reversed(left_maps):
        x = u @ x.reshape(u.shape[1], -1)
    x = x.reshape(-1)
    return 1 - abs(np.vdot(psi, x)) ** 2 / np.vdot(x, x).real


TRUNCATIONS = [
    # (bond_dim, weight_tol)
    (3, None),
    (1, None),          # product-state approximation
    (None, 1e-2),
    (6, 1e-3),          # both: the smaller rank wins
    (64, None),         # no truncation: infidelity 0
]


@pytest.mark.parametrize("bond_dim, weight_tol", TRUNCATIONS)
@pytest.mark.parametrize("as_state", [False, True])
def test_truncation_matches_direct(bond_dim, weight_tol, as_state):
    rng = np.random.default_rng(5)
    dims, bonds = [2] * 8, [2, 4, 8, 9, 8, 4, 2]
    tensors = random_chain(rng, dims, bonds, np.complex128)
    psi = contract(tensors)
    prof = _profile(psi if as_state else scramble_gauge(rng, tensors), bond_dim=bond_dim,
                    weight_tol=weight_tol, **({"local_dim": 2} if as_state else {}))
    ref = direct_spectra(psi, dims)
    for cut, s in zip(prof.cuts, ref):
        keep = min(bond_dim or len(s), cut["schmidt_rank"])
        if weight_tol is not None:
            tail = np.cumsum((s ** 2)[::-1])[::-1]
            keep = min(keep, max(int(np.argmax(tail <= weight_tol)) if np.any(tail <= weight_tol)
                                 else len(s), 1))
        assert cut["kept"] == keep
        assert cut["discarded_weight"] == pytest.approx(float((s[keep:] ** 2).sum()), abs=1e-13)
    t = prof.truncation
    assert t["infidelity"] == pytest.approx(_successive_truncation(psi, dims, bond_dim, weight_tol),
                                            abs=1e-12)
    # Oseledets, SIAM J. Sci. Comput. 33, 2295 (2011), Thm 2.2: error <= sum of discarded weights
    assert t["infidelity"] <= t["bound"] + 1e-14
    assert t["bound"] == pytest.approx(sum(c["discarded_weight"] for c in prof.cuts))


def test_renyi_limits_and_base():
    # Renyi (1961): S_alpha -> S as alpha -> 1, S_0 = ln rank, S_inf = -ln p_max,
    # and S_alpha is non-increasing in alpha
    rng = np.random.default_rng(2)
    tensors = random_chain(rng, [2] * 8, [2, 4, 8, 8, 8, 4, 2], np.float64)
    orders = ["0", "0.5", "0.999999", "1", "1.000001", "2", "3", "inf"]
    prof = _profile(tensors, renyi=orders)
    s_vn = prof.entropies
    np.testing.assert_allclose(prof.renyi("1"), s_vn, atol=1e-14)
    np.testing.assert_allclose(prof.renyi("0.999999"), s_vn, atol=1e-5)
    np.testing.assert_allclose(prof.renyi("1.000001"), s_vn, atol=1e-5)
    np.testing.assert_allclose(prof.renyi("0"), np.log(prof.schmidt_ranks), atol=1e-14)
    pmax = np.array([s[0] ** 2 for s in prof.spectra])
    np.testing.assert_allclose(prof.renyi("inf"), -np.log(pmax), atol=1e-14)
    table = np.array([prof.renyi(a) for a in orders])
    assert np.all(np.diff(table, axis=0) <= 1e-12)
    bits = _profile(tensors, base=2, renyi=["2"])
    np.testing.assert_allclose(bits.entropies, s_vn / math.log(2), atol=1e-14)
    assert bits["log_base"] == 2


def test_single_precision_stored_and_promoted():
    # float32 data: promoted by default or kept as stored; either way the numbers are
    # known to float32 eps only, so both floors follow float32 (tests/test_floors.py)
    rng = np.random.default_rng(9)
    tensors = [t.astype(np.float32) for t in random_chain(rng, [2] * 6, [2, 4, 5, 4, 2])]
    ref = direct_spectra(contract([t.astype(np.float64) for t in tensors]), [2] * 6)
    promoted = _profile(tensors)
    stored = _profile(tensors, precision="stored")
    _assert_spectra(promoted.spectra, ref, 1e-13)
    _assert_spectra(stored.spectra, ref, 1e-5)
    assert promoted.get("precision") == "float64" and stored.get("precision") == "float32"
    eps32 = float(np.finfo(np.float32).eps)
    for prof in (promoted, stored):
        largest = np.array([s[0] for s in prof.spectra])
        assert np.all(prof.column("resolution_floor") >= eps32 * largest)


def test_unnormalised_state_is_normalised_with_warning():
    psi = np.zeros(16)
    psi[0], psi[15] = 3.0, 4.0
    with pytest.warns(bondscope.UnnormalisedStateWarning, match="norm is 5"):
        prof = bondscope.profile(psi)
    assert prof.norm == pytest.approx(5.0)
    np.testing.assert_allclose(prof.entropies, -(0.36 * math.log(0.36) + 0.64 * math.log(0.64)))


def test_spectrum_count_keeps_largest():
    rng = np.random.default_rng(4)
    prof = _profile(random_chain(rng, [2] * 6, [2, 4, 8, 4, 2]), spectrum=3)
    assert [len(c["schmidt_values"]) for c in prof.cuts] == [2, 3, 3, 3, 2]
    assert all(np.all(np.diff(c["schmidt_values"]) <= 0) for c in prof.cuts)


def test_spilled_bond_store_gives_same_spectra(tmp_path, monkeypatch):
    # force every bond matrix to the scratch directory; it is removed afterwards
    from bondscope._kernels import store

    monkeypatch.setattr(store, "STORE_BYTES", 0)
    rng = np.random.default_rng(6)
    tensors = random_chain(rng, [2] * 8, [2, 4, 8, 8, 8, 4, 2])
    ref = direct_spectra(contract(tensors), [2] * 8)
    prof = _profile(tensors, scratch=str(tmp_path / "scr"))
    _assert_spectra(prof.spectra, ref, 1e-13)
    assert list((tmp_path / "scr").iterdir()) == []
