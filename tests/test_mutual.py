"""Mutual information: kernels against brute-force partial traces, the document contract,
bad input and the command line.

References: reduced density matrices by explicit partial traces over numpy.einsum
(definition); exact states whose entropies are known in closed form (GHZ, Bell pairs:
common practice); scipy's eigvalsh for spectra.
"""

import json
import subprocess
from itertools import product

import h5py
import numpy as np
import pytest
from builders import contract, random_chain, scramble_gauge, write_chain

import bondscope
from bondscope import CheckpointError, MemoryLimitError
from bondscope._kernels.environments import chain_densities
from bondscope._kernels.partialtrace import state_densities
from bondscope._source import chain_from_arrays

EPS = np.finfo(np.float64).eps
LN2 = np.log(2.0)


def brute_pair(psi, dims, i, j, parity=None):
    """rho_ij by explicit partial trace (definition).  With parities, mode i is first moved
    next to mode j by fermionic swaps: the configuration's sign is (-1)^(p_i sum_k p_k) over
    the modes k strictly between (common practice, Jordan-Wigner ordering)."""
    t = np.asarray(psi).reshape(dims) / np.linalg.norm(psi)
    if parity is not None:
        sign = np.ones(dims)
        for conf in product(*[range(d) for d in dims]):
            between = sum(parity[conf[k]] for k in range(i + 1, j))
            sign[conf] = (-1.0) ** (parity[conf[i]] * between)
        t = t * sign
    letters = "abcdefghijklmnop"[:len(dims)]
    bra = letters.upper()
    bra = "".join(bra[k] if k in (i, j) else letters[k] for k in range(len(dims)))
    out = letters[i] + letters[j] + bra[i] + bra[j]
    rho = np.einsum(f"{letters},{bra}->{out}", t, t.conj())
    return rho.reshape(dims[i] * dims[j], -1)


def exact_mps(psi, dims):
    """Exact site tensors by successive SVDs (numpy's LAPACK), zero values dropped."""
    tensors, rest = [], (np.asarray(psi) / np.linalg.norm(psi)).reshape(1, -1)
    for d in dims[:-1]:
        a = rest.shape[0]
        u, s, vh = np.linalg.svd(rest.reshape(a * d, -1), full_matrices=False)
        keep = max(1, int(np.count_nonzero(s > 1e-15 * s[0])))
        tensors.append(u[:, :keep].reshape(a, d, keep))
        rest = s[:keep, None] * vh[:keep]
    return tensors + [rest.reshape(rest.shape[0], dims[-1], 1)]


RANDOM_CASES = [
    # local dims, internal bonds, dtype, parity
    ([2, 3, 2, 4, 2], [2, 5, 6, 2], np.float64, None),        # mixed dims, real
    ([3, 2, 2, 3], [3, 4, 3], np.complex128, None),           # complex, mixed dims
    ([2, 2, 2, 2, 2, 2], [2, 4, 6, 4, 2], np.float64, (0, 1)),  # spinless modes
    ([4, 4, 4], [4, 4], np.complex128, (0, 1, 1, 0)),         # spinful orbitals
]


def _parity_definite(psi, dims, parity):
    """Project onto the even-parity sector (the fermionic matrices need definite parity)."""
    t = np.asarray(psi).reshape(dims).copy()
    for conf in product(*[range(d) for d in dims]):
        if sum(parity[c] for c in conf) % 2:
            t[conf] = 0
    return t.reshape(-1)


@pytest.mark.parametrize("dims,bonds,dtype,parity", RANDOM_CASES)
def test_mps_in_random_gauges_matches_partial_traces(dims, bonds, dtype, parity):
    rng = np.random.default_rng(len(dims))
    psi = contract(random_chain(rng, dims, bonds, dtype))
    if parity is not None:
        psi = _parity_definite(psi, dims, parity)
    tensors = scramble_gauge(rng, exact_mps(psi, dims))
    got = chain_densities(chain_from_arrays(tensors), parity)
    vec = state_densities(psi, dims, parity)
    tol = 200 * EPS * max(bonds) * got.growth
    for i in range(len(dims)):
        for j in range(i + 1, len(dims)):
            ref = brute_pair(psi, dims, i, j, parity)
            assert np.abs(got.two[i, j] - ref).max() < tol
            assert np.abs(vec.two[i, j] - ref).max() < 100 * EPS
            assert np.abs(got.two[i, j] - ref).max() <= got.errors[i, j]
        one = np.einsum("abcb->ac", brute_pair(psi, dims, i, (i + 1) % len(dims)).reshape(
            dims[i], dims[(i + 1) % len(dims)], dims[i], -1)) if i < len(dims) - 1 else None
        if one is not None:
            assert np.abs(got.one[i] - one).max() < tol


def test_bad_gauge_raises_the_floor():
    # the same state in a canonical and in an ill-conditioned gauge: same matrices,
    # larger error bound (common practice: conditioning of the gauge)
    rng = np.random.default_rng(7)
    dims = [2] * 6
    psi = contract(random_chain(rng, dims, [2, 4, 4, 4, 2]))
    good = exact_mps(psi, dims)
    bad = [t.copy() for t in good]
    g = np.diag(10.0 ** np.arange(4))
    bad[2] = np.einsum("lpr,rs->lps", bad[2], g)
    bad[3] = np.einsum("sr,rpq->spq", np.linalg.inv(g), bad[3])
    a = chain_densities(chain_from_arrays(good))
    b = chain_densities(chain_from_arrays(bad))
    assert b.growth > 100 * a.growth
    assert np.abs(a.two[0, 5] - b.two[0, 5]).max() <= b.errors[0, 5]


EXACT_STATES = [
    # state, dims, expected s_i in bits, expected I(i, j) in bits (closed forms, common practice)
    ("ghz3", [2, 2, 2], [1, 1, 1], {(0, 1): 1, (0, 2): 1, (1, 2): 1}),
    ("bell13-24", [2, 2, 2, 2], [1, 1, 1, 1], {(0, 2): 2, (1, 3): 2, (0, 1): 0, (2, 3): 0}),
    ("product", [3, 2], [0, 0], {(0, 1): 0}),
]


def _exact(name):
    if name == "ghz3":
        psi = np.zeros(8)
        psi[[0, 7]] = 1
    elif name == "bell13-24":
        bell = np.array([1.0, 0, 0, 1.0])
        psi = np.einsum("ac,bd->abcd", bell.reshape(2, 2), bell.reshape(2, 2)).reshape(-1)
    else:
        psi = np.kron([0, 1.0, 0], [1.0, 1.0])
    return psi / np.linalg.norm(psi)


@pytest.mark.parametrize("name,dims,entropies,pairs", EXACT_STATES)
@pytest.mark.parametrize("form", ["vector", "mps"])
def test_exact_states(name, dims, entropies, pairs, form):
    psi = _exact(name)
    src = psi.reshape(dims) if form == "vector" else exact_mps(psi, dims)
    m = bondscope.mutual_information(src, base=2, reorder=False)
    assert np.allclose(m.site_entropies, entropies, atol=1e-12)
    for (i, j), value in pairs.items():
        assert abs(m.mutual_information[i][j] - value) < 1e-12
        assert m.mutual_information[i][j] == m.mutual_information[j][i]
    assert all(m.mutual_information[i][i] == 0 for i in range(len(dims)))


def test_document_contract_and_round_trip(tmp_path):
    psi = _exact("bell13-24")
    m = bondscope.mutual_information(exact_mps(psi, [2] * 4), renyi=[2, "inf"])
    doc = json.loads(m.to_json())
    n = doc["sites"]
    assert len(doc["site_entropies"]) == n and np.shape(doc["mutual_information"]) == (n, n)
    assert sorted(doc["suggested_order"]) == list(range(1, n + 1))     # sites 1..N
    assert sorted(doc["ordering"]["fiedler_order"]) == list(range(1, n + 1))
    assert set(doc["site_renyi"]) == {"2", "inf"}
    assert all(1 <= k <= n for k in doc["selection"]["sites"])
    path = m.save(tmp_path / "m.json")
    back = bondscope.load_mutual(path)
    assert back.to_dict() == m.to_dict()
    with pytest.raises(ValueError, match=r"\.json"):
        m.save(tmp_path / "m.h5")


def _mixed_parity():
    psi = np.zeros(8)
    psi[[0, 1]] = 1            # |000> + |001>: even plus odd
    return psi / np.sqrt(2)


def _odd_parity():
    psi = np.zeros(8)
    psi[[1, 2, 4, 7]] = 0.5    # W-like odd states plus |111>
    return psi


BAD_INPUT = [
    # call, exception, message fragment (one row per mistake)
    (lambda: bondscope.mutual_information(_exact("ghz3"), parity="0,1,1"), ValueError,
     "lists 3 values but site 1 has local dimension 2"),
    (lambda: bondscope.mutual_information(_exact("ghz3"), parity="0,2"), ValueError,
     "must list 0 or 1"),
    (lambda: bondscope.mutual_information(_exact("ghz3"), parity="0"), ValueError,
     "at least two"),
    (lambda: bondscope.mutual_information(_mixed_parity(), parity="0,1"), CheckpointError,
     "mixes even and odd fermion parity"),
    (lambda: bondscope.mutual_information(exact_mps(_mixed_parity(), [2] * 3), parity="0,1"),
     CheckpointError, "mixes even and odd fermion parity"),
    (lambda: bondscope.mutual_information(_exact("ghz3"), max_memory=100), MemoryLimitError,
     "needs about"),
    (lambda: bondscope.mutual_information(_exact("ghz3"), select=0), ValueError, "select"),
    (lambda: bondscope.mutual_information(_exact("ghz3"), workers=0), ValueError, "workers"),
    (lambda: bondscope.mutual_information(_exact("ghz3"), paritty="0,1"), TypeError,
     "did you mean 'parity'"),
    (lambda: bondscope.load_mutual(__file__), CheckpointError, "cannot read"),
]


@pytest.mark.parametrize("call,error,fragment", BAD_INPUT)
def test_bad_input(call, error, fragment):
    with pytest.raises(error, match=fragment):
        call()


def test_parity_odd_state_is_handled():
    m = bondscope.mutual_information(_odd_parity(), parity="0,1", reorder=False)
    assert abs(m.total_parity + 1) < 1e-12
    spin = bondscope.mutual_information(_odd_parity(), reorder=False)
    assert np.allclose(m.site_entropies, spin.site_entropies)


def _checkpoint(tmp_path, tensors, name="ck.h5"):
    return str(write_chain(tmp_path / name, tensors))


def run_cli(capsys, *args):
    from bondscope._cli import main

    status = main([str(a) for a in args])
    out = capsys.readouterr()
    return subprocess.CompletedProcess(args, status, out.out, out.err)


CLI_CASES = [
    # arguments after FILE, exit status, text expected on stdout or stderr
    (["--json", "--quiet"], 0, '"suggested_order"'),
    (["--quiet"], 0, "strongest pairs"),
    (["--parity", "0,1,1"], 2, "error: parity (--parity) lists 3 values"),
    (["--parity", "0,x"], 2, "error: parity (--parity) must list 0 or 1"),
    (["--max-memory", "1K"], 4, "error: profiling needs about"),
]


@pytest.mark.parametrize("extra,status,text", CLI_CASES)
def test_cli(tmp_path, capsys, extra, status, text):
    psi = _exact("bell13-24")
    path = _checkpoint(tmp_path, exact_mps(psi, [2] * 4))
    with h5py.File(path, "r") as f:
        before = {k: f["psi"][k][()].tobytes() for k in f["psi"]}
    proc = run_cli(capsys, "mutual", path, *extra)
    assert proc.returncode == status, proc.stderr
    assert text in proc.stdout + proc.stderr
    assert "Traceback" not in proc.stderr
    with h5py.File(path, "r") as f:                    # nothing changed
        assert {k: f["psi"][k][()].tobytes() for k in f["psi"]} == before
    if status == 0 and "--json" in extra:
        doc = json.loads(proc.stdout)
        assert doc["suggested_order"] in ([1, 3, 2, 4], [2, 4, 1, 3])


def test_workers_give_the_in_process_result(tmp_path):
    rng = np.random.default_rng(3)
    tensors = random_chain(rng, [2] * 7, [2, 4, 4, 4, 4, 2])
    path = _checkpoint(tmp_path, tensors)
    one = bondscope.mutual_information(path, reorder=False)
    two = bondscope.mutual_information(path, reorder=False, workers=2)
    assert np.abs(one.matrix - two.matrix).max() < 1e-13


def test_inspect_knows_the_cost(tmp_path):
    rng = np.random.default_rng(4)
    small = _checkpoint(tmp_path, random_chain(rng, [2] * 6, [2, 4, 4, 4, 2]), "a.h5")
    large = _checkpoint(tmp_path, random_chain(rng, [2] * 12, [2, 4, 4, 4, 4, 4, 4, 4, 4, 4, 2]),
                        "b.h5")
    a = bondscope.inspect(small)["mutual_estimate"]
    b = bondscope.inspect(large)["mutual_estimate"]
    assert a["detail"]["pairs"] == 15 and b["detail"]["pairs"] == 66
    assert b["flops"] > 4 * a["flops"]          # O(N^2) pairs


@pytest.mark.slow
def test_dask_scheduler_gives_the_in_process_result(tmp_path):
    distributed = pytest.importorskip("distributed")
    rng = np.random.default_rng(5)
    path = _checkpoint(tmp_path, random_chain(rng, [2] * 6, [2, 4, 4, 4, 2]))
    one = bondscope.mutual_information(path, reorder=False)
    with distributed.Client(processes=False, n_workers=1, threads_per_worker=1,
                            dashboard_address=None) as client:
        other = bondscope.mutual_information(path, reorder=False, scheduler=client)
    assert np.abs(one.matrix - other.matrix).max() < 1e-13
