"""Every fast path of the sweep engine against the plain one and against scipy's SVD.

Reference throughout: scipy.linalg.svdvals of the contracted state's reshaped
cut matrices (``builders.direct_spectra``), or of the matrix being factorised.
Tolerances scale with the compute dtype's eps and the matrix size (backward
stable factorisations, Golub & Van Loan, Matrix Computations, 4th ed., 5.2
and 8.6).
"""

import json
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest
from scipy.linalg import svdvals
from threadpoolctl import threadpool_limits

import bondscope
from bondscope._kernels import amplitudes, chain, parallel
from bondscope._kernels import store as bond_store
from bondscope._kernels.balance import SweepScales, balanced, balanced_blocks
from bondscope._kernels.conditioning import GaugeLedger
from bondscope._errors import CheckpointError
from bondscope._source import chain_from_arrays
from builders import contract, direct_spectra, random_chain, scramble_gauge, write_chain

SRC = Path(__file__).resolve().parents[1] / "src"


def _eps(dtype):
    return float(np.finfo(np.dtype(dtype)).eps)


def _close(got, ref, tol):
    assert len(got) == len(ref)
    for cut, (s, r) in enumerate(zip(got, ref), start=1):
        k = min(len(s), len(r))
        np.testing.assert_allclose(s[:k], r[:k], rtol=0, atol=tol, err_msg=f"cut {cut}")
        assert np.all(r[k:] <= tol) and np.all(s[k:] <= tol)


def _normalised(raw):
    return [s / np.linalg.norm(s) for s in raw]


STEP_SHAPES = [
    # (rows of the bond matrix, (left, phys, right) of the site), dtype
    ((6, 6), (6, 2, 9), np.float64),        # growing bond
    ((9, 9), (9, 3, 5), np.complex128),     # shrinking bond, complex
    ((4, 4), (4, 2, 11), np.float64),       # left * phys < right: R is trapezoidal
    ((1, 1), (1, 4, 4), np.complex128),     # first site
    ((7, 7), (7, 2, 7), np.float32),        # stored single precision
]


@pytest.mark.parametrize("rshape, shape, dtype", STEP_SHAPES)
def test_qr_step_keeps_the_singular_values(rshape, shape, dtype):
    # the row-permuted Fortran-order QR: R has the singular values of R_i A_i (scipy svdvals)
    rng = np.random.default_rng(11)
    r = np.triu(rng.standard_normal(rshape)).astype(dtype)
    a = rng.standard_normal(shape).astype(dtype)
    if np.dtype(dtype).kind == "c":
        a = a + 1j * rng.standard_normal(shape).astype(dtype)
    ref = svdvals((r @ a.reshape(shape[0], -1)).reshape(-1, shape[2]).astype(np.complex128))
    got = svdvals(chain.qr_step(r, a).astype(np.complex128))
    k = min(len(ref), len(got))
    np.testing.assert_allclose(got[:k], ref[:k], rtol=0, atol=50 * _eps(dtype) * ref[0])
    assert chain.qr_step(r, a).dtype == np.dtype(dtype)


@pytest.mark.parametrize("rshape, shape, dtype", STEP_SHAPES)
def test_lq_step_keeps_the_singular_values(rshape, shape, dtype):
    # L of A_i L_{i+1}: same singular values as the product (scipy svdvals)
    rng = np.random.default_rng(12)
    a = rng.standard_normal(shape).astype(dtype)
    env = np.tril(rng.standard_normal((shape[2], shape[2]))).astype(dtype)
    ref = svdvals((a.reshape(-1, shape[2]) @ env).reshape(shape[0], -1).astype(np.complex128))
    got = svdvals(chain.lq_step(a, env).astype(np.complex128))
    k = min(len(ref), len(got))
    np.testing.assert_allclose(got[:k], ref[:k], rtol=0, atol=50 * _eps(dtype) * ref[0])


CHAINS = [
    # (local dims, internal bonds, dtype, scramble the gauge)
    ([2] * 9, [2, 4, 8, 16, 16, 8, 4, 2], np.float64, False),      # qubits, full bonds
    ([2] * 9, [2, 4, 8, 12, 12, 8, 4, 2], np.complex128, True),    # complex, scrambled gauge
    ([3, 2, 4, 2, 3, 2, 2], [3, 6, 9, 7, 5, 2], np.complex128, False),  # mixed local dims
    ([2] * 6, [2, 4, 16, 4, 2], np.float64, False),                # bond above the rank
    ([5, 5], [5], np.float64, False),                              # two sites: one cut
    ([2] * 3, [2, 2], np.complex128, True),                        # odd, short chain
]


def _scales(src):
    return SweepScales(src.sites, src.name, src.labels)


@pytest.mark.parametrize("dims, bonds, dtype, scramble", CHAINS)
def test_concurrent_sweeps_match_sequential_and_svd(dims, bonds, dtype, scramble):
    # the two sweeps side by side give the plain order's values; both match scipy svdvals
    rng = np.random.default_rng(21)
    tensors = random_chain(rng, dims, bonds, dtype)
    ref = direct_spectra(contract(tensors), dims)
    if scramble:
        tensors = scramble_gauge(rng, tensors)
    src = chain_from_arrays(tensors)
    ledgers = [GaugeLedger(src.sites), GaugeLedger(src.sites)]
    with bond_store.BondStore() as store:
        both = _normalised(chain._concurrent_chain(src, store, lambda: None, chain._product_values,
                                                   ledgers[0], _scales(src)))
    with bond_store.BondStore() as store:
        plain = _normalised(chain._sequential_chain(src, store, lambda: None,
                                                    chain._product_values, ledgers[1],
                                                    _scales(src))[0])
    tol = 200 * _eps(dtype) * max(bonds) * max(dims)
    _close(both, ref, tol)
    _close(both, plain, tol)
    # both orders meet the same matrices, so they bound the floors alike
    np.testing.assert_allclose(ledgers[0].factors(1.0), ledgers[1].factors(1.0), rtol=1e-10)


@pytest.mark.parametrize("threads, lanes", [
    (1, 1),     # one BLAS thread: the plain sequential order
    (2, 2),     # two or more: two lanes, one BLAS thread each
])
def test_lanes_follow_the_blas_thread_limit(threads, lanes):
    # threadpoolctl's limit decides the lanes (common practice: honour the BLAS variables)
    with threadpool_limits(limits=threads, user_api="blas"):
        with parallel.lanes() as got:
            assert got == lanes


@pytest.mark.parametrize("threads", [1, 2])   # sequential order, then two lanes
def test_profile_threads_give_the_same_spectra(threads):
    # reference: scipy svdvals of the contracted state
    rng = np.random.default_rng(22)
    dims, bonds = [2] * 8, [2, 4, 8, 16, 8, 4, 2]
    tensors = random_chain(rng, dims, bonds, np.complex128)
    ref = direct_spectra(contract(tensors), dims)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        prof = bondscope.profile(tensors, spectrum=True, threads=threads)
    _close(prof.spectra, ref, 200 * _eps(np.float64) * 16 * 2)


def test_concurrent_sweeps_spill_and_clean_up(tmp_path, monkeypatch):
    # every waiting bond matrix goes to the scratch directory, which is removed afterwards
    monkeypatch.setattr(bond_store, "STORE_BYTES", 0)
    rng = np.random.default_rng(23)
    dims, bonds = [2] * 8, [2, 4, 8, 8, 8, 4, 2]
    tensors = random_chain(rng, dims, bonds)
    ref = direct_spectra(contract(tensors), dims)
    src = chain_from_arrays(tensors)
    with bond_store.BondStore(str(tmp_path / "scr")) as store:
        got = _normalised(chain._concurrent_chain(src, store, lambda: None,
                                                   chain._product_values,
                                                   GaugeLedger(len(tensors)), _scales(src)))
        assert store.spilled
    _close(got, ref, 1e-13)
    assert list((tmp_path / "scr").iterdir()) == []


@pytest.mark.parametrize("bad_site", [
    0,      # read first by the left-to-right sweep (main thread)
    7,      # read first by the right-to-left sweep (worker thread)
])
def test_failure_in_either_sweep_stops_both(bad_site):
    # a NaN found by either thread surfaces as the CheckpointError of the plain path
    rng = np.random.default_rng(24)
    tensors = random_chain(rng, [2] * 8, [2, 4, 8, 8, 8, 4, 2])
    tensors[bad_site][0, 0, 0] = np.nan
    src = chain_from_arrays(tensors)
    with bond_store.BondStore() as store:
        with pytest.raises(CheckpointError, match="NaN"):
            chain._concurrent_chain(src, store, lambda: None, chain._product_values,
                                    GaugeLedger(len(tensors)), _scales(src))


@pytest.mark.parametrize("processes", [False, True])   # threads of this process, then workers
def test_bond_values_as_dask_tasks(processes):
    # with an active client the per-cut SVDs run as its tasks; reference: scipy svdvals
    distributed = pytest.importorskip("distributed")
    rng = np.random.default_rng(25)
    dims, bonds = [2] * 8, [2, 4, 8, 16, 8, 4, 2]
    tensors = random_chain(rng, dims, bonds, np.complex128)
    ref = direct_spectra(contract(tensors), dims)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=processes,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        assert parallel.dask_client() is client
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
            prof = bondscope.profile(tensors, spectrum=True)
        prefixes = client.run_on_scheduler(
            lambda dask_scheduler: list(dask_scheduler.task_prefixes))
    assert "product_values" in prefixes          # dask keys drop the leading underscore
    _close(prof.spectra, ref, 200 * _eps(np.float64) * 16 * 2)
    assert parallel.dask_client() is None


STATES = [
    # (local dims, dtype)
    ([2] * 12, np.float64),             # even N: equal middle split
    ([2] * 11, np.complex128),          # odd N: uneven middle split
    ([3, 2, 4, 2, 3], np.complex128),   # mixed local dims
    ([4, 4, 4], np.float64),            # qudits, three sites
    ([2, 2], np.complex128),            # one cut: no partial traces
    ([2] * 10, np.float32),             # single precision kept as stored
]


@pytest.mark.parametrize("dims, dtype", STATES)
def test_gram_matches_svd(dims, dtype):
    # reference: scipy svdvals of each cut; gram resolves lambda to ~ sqrt(eps n) lambda_max
    rng = np.random.default_rng(31)
    size = int(np.prod(dims))
    psi = rng.standard_normal(size)
    if np.dtype(dtype).kind == "c":
        psi = psi + 1j * rng.standard_normal(size)
    psi = psi.astype(dtype)
    ref = direct_spectra(psi.astype(np.complex128), dims)
    norm = float(np.linalg.norm(psi.astype(np.complex128)))
    got, sizes = amplitudes._gram_spectra(psi, dims, "<test>", 1.0 / norm**2)
    assert all(s.dtype == np.finfo(dtype).dtype for s in got)
    _close(got, ref, 20 * np.sqrt(_eps(dtype) * size))


@pytest.mark.parametrize("route", ["gram", "svd"])
def test_state_routes_leave_the_input_untouched(route):
    # no in-place normalisation of a caller's array (common practice)
    rng = np.random.default_rng(32)
    psi = 3.0 * rng.standard_normal(2**10)
    before = psi.copy()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        prof = bondscope.profile(psi, route=route, spectrum=True)
    np.testing.assert_array_equal(psi, before)
    assert prof.norm == pytest.approx(np.linalg.norm(before))
    _close(prof.spectra, direct_spectra(before, [2] * 10), 1e-6)


@pytest.mark.parametrize("precision, dtype, eps", [
    ("stored", "float32", np.finfo(np.float32).eps),    # computed as stored
    ("promote", "float64", np.finfo(np.float64).eps),   # promoted to double
])
def test_cli_precision_option(tmp_path, precision, dtype, eps):
    # a float32 checkpoint profiled as stored or promoted; values match scipy svdvals of
    # the float64 contraction to the compute precision; floors follow the stored float32
    rng = np.random.default_rng(41)
    dims, bonds = [2] * 7, [2, 4, 8, 8, 4, 2]
    tensors = [t.astype(np.float32) for t in random_chain(rng, dims, bonds)]
    path = write_chain(tmp_path / "f32.h5", tensors)
    ref = direct_spectra(contract([t.astype(np.float64) for t in tensors]), dims)
    out = subprocess.run([sys.executable, "-m", "bondscope", "profile", str(path), "--json",
                          "--quiet", "--spectrum", "--precision", precision],
                         capture_output=True, text=True, check=True,
                         env={"PYTHONPATH": str(SRC), "PATH": "/usr/bin:/bin"})
    doc = json.loads(out.stdout)
    assert doc["precision"] == dtype and doc["dtype"] == "float32"
    got = [np.array(c["schmidt_values"]) for c in doc["cuts"]]
    _close(got, ref, 200 * eps * 8 * 2)
    for c in doc["cuts"]:
        # floor >= eps(float32) * n * lambda_max, n = values * local dim (_measure)
        n = len(c["schmidt_values"]) * 2
        eps32 = float(np.finfo(np.float32).eps)
        assert c["resolution_floor"] >= eps32 * n * c["schmidt_values"][0] * (1 - 1e-6)


def _with_nan(shape, where, dtype):
    m = np.ones(shape, dtype=dtype)
    m[where] = complex(1, np.nan) if np.dtype(dtype).kind == "c" else np.nan
    return m


BAD_BONDS = [
    # NaN only in the imaginary part of one entry (Python's max over the parts skipped it)
    pytest.param(lambda: balanced(_with_nan((3, 3), (1, 2), np.complex128), "f", 4),
                 id="imaginary-nan"),
    # NaN in the real part of a real matrix
    pytest.param(lambda: balanced(_with_nan((3, 3), (0, 0), np.float64), "f", 4), id="real-nan"),
    # NaN in the last of several sector blocks (after finite ones)
    pytest.param(lambda: balanced_blocks({0: np.ones((2, 2)), 1: np.ones((1, 1)),
                                          2: _with_nan((2, 2), (1, 1), np.float64)}, "f", 4),
                 id="block-nan"),
]


@pytest.mark.parametrize("call", BAD_BONDS)
def test_balancing_refuses_any_nan(call):
    # common practice: a NaN anywhere in a bond matrix is bad input, never a finite scale
    with pytest.raises(CheckpointError, match="site 4: .*NaN or Inf"):
        call()
