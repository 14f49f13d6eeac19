"""Charge specs and charge-resolved spectra against exact and brute-force references."""

import math

import numpy as np
import pytest

from builders import contract, direct_spectra, random_chain, scramble_gauge
from reference import charges as ref
from reference import spin
from reference.freefermion import entropy_from_occupations
from reference.states import from_vector

from bondscope import CheckpointError
from bondscope._charges import parse_charges
from bondscope._kernels.sectors import charge_spectra, sector_measures
from bondscope._source import amplitudes_from_array, chain_from_arrays

QUBIT = np.array([[0], [1]])
SPIN1 = np.array([[-1], [0], [1]])
ORBITAL = np.array([[0, 0], [1, 1], [1, -1], [2, 0]])    # N and 2 S^z of |0>, |up>, |dn>, |2>


# ---------------------------------------------------------------- charge specs

@pytest.mark.parametrize("value, modulus, dims, expect", [
    ("0,1", None, [2, 2, 2], ["0,1"] * 3),                              # qubits
    ("-1,0,1", None, [3, 3], ["-1,0,1"] * 2),                           # spin 1
    ("0,1,1,2;0,1,-1,0", None, [4, 4], ["0,1,1,2;0,1,-1,0"] * 2),       # two quantities
    ("0,1", "2", [2, 2], ["0,1"] * 2),                                  # parity
    ("0,4", 3, [2, 2], ["0,1"] * 2),                                    # reduced mod 3
    ("1,-1/*2,0,-2/1,-1", None, [2, 3, 3, 2], ["1,-1", "2,0,-2", "2,0,-2", "1,-1"]),
    ("2*0,1/-1,0,1", None, [2, 2, 3], ["0,1", "0,1", "-1,0,1"]),        # counted groups
    ([0, 1], None, [2, 2], ["0,1"] * 2),                                # Python list
    ([[0, 1, 1, 2], [0, 1, -1, 0]], None, [4], ["0,1,1,2;0,1,-1,0"]),   # Python, 2 quantities
    ([(1, [0, 1]), (None, "-1,0,1")], None, [2, 3, 3], ["0,1", "-1,0,1", "-1,0,1"]),
    (np.array([0, 1]), None, [2], ["0,1"]),                             # numpy array
    # errors, one line each
    ("0,1.5", None, [2], "is not an integer"),
    ("0,,1", None, [3], "empty entry"),
    ("", None, [2], "empty"),
    ("0,1;0,1,2", None, [2], "lengths 2, 3"),
    ("0,1", None, [2, 3], "site 1 has local dimension 3"),
    ("*0,1/*0,1", None, [2, 2], "more than one '*' group"),
    ("2*0,1", None, [2, 2, 2], "cover 2 sites, the state has 3"),
    ("0*0,1/*0,1", None, [2], "covers 0 sites"),
    ("0,1", "1", [2], "not a valid modulus"),
    ("0,1", -2, [2], "not a valid modulus"),
    ("0,1", "2,2", [2], "2 value(s) for 1 conserved quantity"),
    ("0,1;0,1", 2, [2], "1 value(s) for 2 conserved quantities"),
    ([0.5, 1], None, [2], "is not an integer"),
    ([True, 1], None, [2], "is not an integer"),
    ([(1, [0, 1]), [0, 1]], None, [2], "expected a (count, lists) pair"),
    ([(1, "0,1"), (1, "0,1;0,1")], None, [2, 2], "different numbers of conserved"),
])
def test_charge_spec(value, modulus, dims, expect):
    if isinstance(expect, str):
        with pytest.raises(ValueError, match=None) as err:
            parse_charges(value, modulus).bind(dims)
        assert expect in str(err.value) and "\n" not in str(err.value)
        return
    spec = parse_charges(value, modulus)
    bound = spec.bind(dims)
    shown = [";".join(",".join(str(v) for v in col) for col in t.T) for t in bound.sites]
    assert shown == expect
    assert parse_charges(spec.text(), modulus).bind(dims).sites[-1].tolist() == \
        bound.sites[-1].tolist()                                        # text round-trips


def test_charge_type_error():
    with pytest.raises(TypeError):
        parse_charges(3.0)


# ---------------------------------------------------------------- helpers

def _bind(table, moduli, n):
    text = ";".join(",".join(str(int(v)) for v in col) for col in np.asarray(table).T)
    return parse_charges(text, ",".join(map(str, moduli))).bind([len(table)] * n)


def _weights(cut):
    return {q: float(np.sum(v**2)) for q, v in cut}


def _check_identity(result, charges):
    """S = S_num + S_conf and sum p = 1 at every cut (Lukin et al., Science 364, 256 (2019))."""
    for cut, s, floor in zip(result.sectors, result.spectra, result.floors):
        m = sector_measures(cut, floor, charges)
        p = s**2
        total = float(-(p[p > 0] * np.log(p[p > 0])).sum())
        assert m["number_entropy"] + m["configurational_entropy"] == pytest.approx(total,
                                                                                  abs=1e-12)
        assert sum(x["probability"] for x in m["sectors"]) == pytest.approx(1.0, abs=1e-12)


def _source(kind, psi, dims, rng, dtype):
    if kind == "state":
        return amplitudes_from_array(psi.astype(dtype))
    tensors = [t.astype(dtype) for t in from_vector(psi, dims)]
    if kind == "scrambled":
        tensors = scramble_gauge(rng, tensors)
    return chain_from_arrays(tensors)


# ---------------------------------------------------------------- free fermions

@pytest.mark.parametrize("hopping, L, filling, kind", [
    ("uniform", 10, 5, "state"),        # half filling
    ("uniform", 10, 3, "state"),        # below half filling
    ("random", 10, 4, "state"),         # disordered hoppings
    ("random", 10, 7, "canonical"),     # left-canonical MPS (degenerate values mix charges)
    ("uniform", 10, 5, "scrambled"),    # random gauge mixing charges on every bond
    ("random", 9, 2, "scrambled"),
])
def test_free_fermions(hopping, L, filling, kind):
    rng = np.random.default_rng(L * 10 + filling)
    t = np.ones(L - 1) if hopping == "uniform" else rng.uniform(0.5, 1.5, L - 1)
    psi = ref.slater_state(t, filling)
    corr = ref.hopping_correlation(t, filling)
    charges = _bind(QUBIT, [0], L)
    result = charge_spectra(_source(kind, psi, [2] * L, rng, np.float64), charges)
    assert result.total_charge == (filling,)
    for l, cut in enumerate(result.sectors, start=1):
        nu = np.linalg.eigvalsh(corr[:l, :l])
        # Peschel, J. Phys. A 36, L205 (2003): p(q) = coefficients of prod (1 - nu + nu z)
        p = ref.number_distribution(nu)
        got = _weights(cut)
        for q in range(len(p)):
            assert got.get((q,), 0.0) == pytest.approx(p[q], abs=1e-12)
        # sector spectra = products of mode occupations with q particles (same source)
        exact = ref.occupation_sectors(nu, cutoff=1e-10)
        for (q,), v in cut:
            want = exact.get(q, np.zeros(0))
            np.testing.assert_allclose(v[:want.size] ** 2, want, atol=1e-12)
        m = sector_measures(cut, result.floors[l - 1], charges)
        total = entropy_from_occupations(nu)
        assert m["number_entropy"] + m["configurational_entropy"] == pytest.approx(total,
                                                                                  abs=1e-10)
        # variance of the block's particle number: sum_k nu_k (1 - nu_k) (Peschel 2003, the
        # modes are independent two-level systems)
        assert m["charge_variance"] == pytest.approx(float(np.sum(nu * (1 - nu))), abs=1e-11)
        assert m["charge_mean"] == pytest.approx(float(np.trace(corr[:l, :l])), abs=1e-11)


# ---------------------------------------------------------------- Ising parity (Z_2)

@pytest.mark.parametrize("g", [
    0.7,    # ordered side (even ground state well separated at L = 10)
    1.0,    # critical
    1.6,    # paramagnet
])
def test_ising_parity(g):
    L = 10
    _, psi = spin.ground_state(spin.tfim(L, g))
    charges = _bind(QUBIT, [2], L)       # Z = +1 is charge 0: prod Z = (-1)^Q
    rng = np.random.default_rng(3)
    for kind in ("state", "scrambled"):
        result = charge_spectra(_source(kind, psi, [2] * L, rng, np.float64), charges)
        assert result.total_charge == (0,)
        for l, cut in enumerate(result.sectors, start=1):
            # <P_A> = Pf(Gamma_A) by Wick's theorem
            even, odd = ref.ising_parity(L, g, l)
            got = _weights(cut)
            assert got.get((0,), 0.0) == pytest.approx(even, abs=1e-10)
            assert got.get((1,), 0.0) == pytest.approx(odd, abs=1e-10)
            exact = ref.ising_sectors(L, g, l, cutoff=1e-9)
            for (q,), v in cut:
                want = exact[q]
                np.testing.assert_allclose(v[:want.size] ** 2, want, atol=1e-10)
        _check_identity(result, charges)


# ---------------------------------------------------------------- random symmetric MPS

CASES = [
    # (local charges, moduli, total, sites, max sector dim)
    ("qubits", QUBIT, (0,), (3,), 7, 3),
    ("spin 1", SPIN1, (0,), (1,), 6, 3),
    ("orbital N and 2Sz", ORBITAL, (0, 0), (4, 0), 4, 2),
    ("Z_3 clock", np.array([[0], [1], [2]]), (3,), (2,), 6, 2),
    ("parity", QUBIT, (2,), (1,), 7, 3),
]


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
@pytest.mark.parametrize("dtype", [np.float64, np.complex128])
@pytest.mark.parametrize("gauge, route", [
    ("blocks", "block-sweep"),          # tensors as built: block structured
    ("block gauge", "block-sweep"),     # block-diagonal gauge and permuted bond indices
    ("scrambled", "charge-sweep"),      # random gauge mixing charges on every bond
    ("canonical", None),                # successive SVDs (route depends on degeneracies)
    ("state", "sector-svd"),            # the contracted state vector
])
def test_random_symmetric(case, dtype, gauge, route):
    _, table, moduli, total, n, dim = case
    rng = np.random.default_rng(n + len(table))
    tensors, labels = ref.random_symmetric_chain(rng, [table] * n, moduli, total, dim, dtype)
    psi = contract(tensors)
    if gauge == "block gauge":
        tensors, _ = ref.block_gauge(rng, tensors, labels)
    elif gauge == "scrambled":
        tensors = scramble_gauge(rng, tensors)
    elif gauge == "canonical":
        tensors = from_vector(psi, [len(table)] * n)
    charges = _bind(table, moduli, n)
    src = amplitudes_from_array(psi, [len(table)] * n) if gauge == "state" \
        else chain_from_arrays(tensors)
    result = charge_spectra(src, charges)
    if route:
        assert result.route == route
    assert result.total_charge == tuple(total)
    if gauge != "state":
        psi = contract(tensors)              # the state as stored, rounding included
    # brute force: eigenvalues of rho_A projected on each left charge (numpy eigvalsh,
    # which resolves weights lambda^2 down to about eps * chi)
    brute = ref.brute_sectors(psi, [table] * n, moduli)
    tol = 1e-12 if gauge != "scrambled" else 1e-10
    for cut, want in zip(result.sectors, brute):
        got = dict(cut)
        assert set(got) <= set(want)
        for q, w in want.items():
            v = got.get(q, np.zeros(0)) ** 2
            np.testing.assert_allclose(v[v > 1e-13], w[w > 1e-13], atol=tol, rtol=0)
    # the whole spectrum agrees with scipy's SVD of the reshaped state
    for s, d, floor in zip(result.spectra, direct_spectra(psi, [len(table)] * n),
                           result.floors):
        np.testing.assert_allclose(s[s > floor], d[:np.count_nonzero(s > floor)], atol=tol)
        assert np.all(d[np.count_nonzero(s > floor):] <= floor + tol)
    _check_identity(result, charges)


def test_blockwise_equals_dense():
    """Block-wise sweeps give the charge-carrying dense sweep's values to 1e-12."""
    rng = np.random.default_rng(11)
    n = 10
    tensors, labels = ref.random_symmetric_chain(rng, [QUBIT] * n, (0,), (5,), 12)
    charges = _bind(QUBIT, [0], n)
    blocked = charge_spectra(chain_from_arrays(tensors), charges)
    dense = charge_spectra(chain_from_arrays(scramble_gauge(rng, tensors)), charges)
    assert (blocked.route, dense.route) == ("block-sweep", "charge-sweep")
    ref.assert_same_sectors(blocked, dense, atol=1e-12)


# ---------------------------------------------------------------- refusal

def _two_charges(rng, weight):
    """An MPS of sqrt(1-w) |N=3> + sqrt(w) |N=4> (bond spaces added), random gauge."""
    a, _ = ref.random_symmetric_chain(rng, [QUBIT] * 6, (0,), (3,), 2)
    b, _ = ref.random_symmetric_chain(rng, [QUBIT] * 6, (0,), (4,), 2)
    na, nb = np.linalg.norm(contract(a)), np.linalg.norm(contract(b))
    a[0] = a[0] * math.sqrt(1 - weight) / na
    b[0] = b[0] * math.sqrt(weight) / nb
    out = []
    for i, (x, y) in enumerate(zip(a, b)):
        k = (1 if i == 0 else x.shape[0] + y.shape[0])
        c = (1 if i == 5 else x.shape[2] + y.shape[2])
        t = np.zeros((k, 2, c))
        t[:x.shape[0] if i else 1, :, :x.shape[2] if i < 5 else 1] += x
        t[(x.shape[0] if i else 0):, :, (x.shape[2] if i < 5 else 0):] += y
        out.append(t)
    return out


@pytest.mark.parametrize("make, refused", [
    # a state vector of two fillings, 1e-3 in the second: refused
    (lambda rng: amplitudes_from_array(np.sqrt(0.999) * ref.slater_state(np.ones(7), 3)
                                       + np.sqrt(0.001) * ref.slater_state(np.ones(7), 4)), True),
    # the same with weight 1e-24, far below the float64 tolerance (100 eps): accepted
    (lambda rng: amplitudes_from_array(ref.slater_state(np.ones(7), 3)
                                       + 1e-12 * ref.slater_state(np.ones(7), 4)), False),
    # an MPS of two total charges in a random gauge (weight 0.3 outside): refused
    (lambda rng: chain_from_arrays(scramble_gauge(rng, _two_charges(rng, 0.3))), True),
    # the same, block structured as stored (the bond basis keeps definite charges): refused
    (lambda rng: chain_from_arrays(_two_charges(rng, 0.3)), True),
    # a random MPS, no symmetry at all: refused
    (lambda rng: chain_from_arrays(random_chain(rng, [2] * 6, [2, 4, 4, 4, 2])), True),
])
def test_refuses_non_eigenstates(make, refused):
    rng = np.random.default_rng(5)
    src = make(rng)
    charges = _bind(QUBIT, [0], src.sites)
    if not refused:
        result = charge_spectra(src, charges)
        assert result.total_charge == (3,) and result.leak < 1e-20
        assert min(result.floors) >= math.sqrt(result.leak)
        return
    with pytest.raises(CheckpointError) as err:
        charge_spectra(src, charges)
    msg = str(err.value)
    assert "not an eigenstate of the total charge" in msg and "\n" not in msg
    assert msg.startswith(src.name)


def test_two_charge_weights_named():
    """The refusal names the weight outside the dominant total charge and where it is."""
    rng = np.random.default_rng(9)
    src = chain_from_arrays(scramble_gauge(rng, _two_charges(rng, 0.25)))
    with pytest.raises(CheckpointError, match=r"weight 0\.25 lies outside the dominant total "
                                              r"charge 3 .*at total charge 4"):
        charge_spectra(src, _bind(QUBIT, [0], 6))


# ---------------------------------------------------------------- floors and measures

def test_sector_floor_follows_cut_floor():
    """A sector's values are normalised within it, so its floor is the cut's over sqrt p."""
    rng = np.random.default_rng(2)
    tensors, _ = ref.random_symmetric_chain(rng, [QUBIT] * 8, (0,), (4,), 3)
    charges = _bind(QUBIT, [0], 8)
    result = charge_spectra(chain_from_arrays(tensors), charges)
    m = sector_measures(result.sectors[3], result.floors[3], charges, renyi=["2", "inf"])
    for sec in m["sectors"]:
        assert sec["resolution_floor"] == pytest.approx(result.floors[3] /
                                                        math.sqrt(sec["probability"]))
        v = sec["values"]
        assert np.all(np.diff(v) <= 0) and float(np.sum(v**2)) <= 1 + 1e-12
        assert sec["renyi"]["inf"] <= sec["renyi"]["2"] <= sec["entropy"] + 1e-12
    # number entropy is the Shannon entropy of p(q) (common practice)
    p = np.array([s["probability"] for s in m["sectors"]])
    assert m["number_entropy"] == pytest.approx(float(-(p * np.log(p)).sum()), abs=1e-12)


def test_cyclic_charges_have_no_variance():
    """The mean and variance of a Z_M charge depend on its representatives: reported None."""
    rng = np.random.default_rng(4)
    tensors, _ = ref.random_symmetric_chain(rng, [ORBITAL] * 4, (0, 2), (4, 0), 2)
    charges = _bind(ORBITAL, [0, 2], 4)
    result = charge_spectra(chain_from_arrays(tensors), charges)
    m = sector_measures(result.sectors[1], result.floors[1], charges)
    assert m["charge_variance"][1] is None and m["charge_mean"][1] is None
    assert m["charge_variance"][0] > 0
    assert all(isinstance(s["charge"], list) and len(s["charge"]) == 2 for s in m["sectors"])


@pytest.mark.parametrize("gauge", [
    "blocks",       # block-wise sweep: one stored matrix per sector and bond
    "scrambled",    # charge-carrying sweep: one dense matrix per bond
])
def test_spilled_bonds_give_the_same_values(tmp_path, monkeypatch, gauge):
    """With no memory budget every bond matrix goes through the scratch directory."""
    import bondscope._kernels.store as store

    rng = np.random.default_rng(8)
    tensors, _ = ref.random_symmetric_chain(rng, [QUBIT] * 8, (0,), (4,), 3)
    if gauge == "scrambled":
        tensors = scramble_gauge(rng, tensors)
    charges = _bind(QUBIT, [0], 8)
    kept = charge_spectra(chain_from_arrays(tensors), charges)
    monkeypatch.setattr(store, "STORE_BYTES", 0)
    spilled = charge_spectra(chain_from_arrays(tensors), charges, scratch=str(tmp_path))
    ref.assert_same_sectors(kept, spilled, atol=0.0)
    assert list(tmp_path.iterdir()) == []           # the private spill directory is removed
