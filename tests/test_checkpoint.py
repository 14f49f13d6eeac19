"""Loader layouts and every validation error, in tables."""

import warnings
from math import prod

import h5py
import numpy as np
import pytest

import bondscope
from builders import contract, direct_spectra, random_chain, write_chain

RNG_SEED = 21


def _chain(dims=(3, 3, 3, 3, 3), bonds=(2, 4, 4, 2), dtype=np.float64):
    return random_chain(np.random.default_rng(RNG_SEED), list(dims), list(bonds), dtype)


def _profile(path, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        return bondscope.profile(path, spectrum=True, **kw)


LAYOUTS = [
    # (writer keyword arguments, profile options)
    ({}, {}),                                                    # /psi/T{site} from 0, auto
    ({"start": 1}, {}),                                          # numbered from 1
    ({"axes": ("phys", "left", "right")}, {}),                   # permuted, inferred
    ({"axes": ("right", "phys", "left")}, {"axes": "right,phys,left"}),  # permuted, given
    ({"pattern": "/chain/site_{site}/data"}, {}),                # one group per site
    ({"pattern": "/run/psi/T{site}"}, {"tensors": "/run/psi/T{site}"}),  # explicit pattern
    ({"rank2": True}, {}),                                       # rank-2 end tensors
    ({"rank2": True, "axes": ("phys", "right", "left")}, {}),    # rank-2 ends, permuted
    ({"dtype": np.float32}, {}),                                 # single precision
]


@pytest.mark.parametrize("writer, options", LAYOUTS)
def test_chain_layouts(tmp_path, writer, options):
    tensors = _chain()
    path = write_chain(tmp_path / "c.h5", tensors, **writer)
    prof = _profile(path, **options)
    tol = 1e-6 if writer.get("dtype") == np.float32 else 1e-13
    ref = direct_spectra(contract(tensors), [3] * 5)
    for s, r in zip(prof.spectra, ref):
        np.testing.assert_allclose(s, r[:len(s)], atol=tol)
    assert prof.kind == "mps" and prof.sites == 5 and prof.local_dims == [3] * 5


@pytest.mark.parametrize("fields", [("r", "i"), ("re", "im"), ("real", "imag")])
def test_compound_complex_tensors(tmp_path, fields):
    tensors = _chain(dtype=np.complex128)
    path = write_chain(tmp_path / "c.h5", tensors, compound=fields)
    prof = _profile(path)
    ref = direct_spectra(contract(tensors), [3] * 5)
    for s, r in zip(prof.spectra, ref):
        np.testing.assert_allclose(s, r[:len(s)], atol=1e-13)
    assert prof["dtype"] == "complex128"


def test_sites_ordered_numerically(tmp_path):
    # site_2 must come before site_10; a lexical order would not chain
    tensors = random_chain(np.random.default_rng(1), [2] * 12, [2, 3, 4, 5, 6, 7, 6, 5, 4, 3, 2])
    path = write_chain(tmp_path / "c.h5", tensors, pattern="/mps/site_{site}")
    prof = _profile(path)
    assert prof.bond_dimensions.tolist() == [2, 3, 4, 5, 6, 7, 6, 5, 4, 3, 2]


STATES = [
    # (stored array shape, dtype, profile options)
    ((2 ** 8,), np.float64, {}),                               # 1-D qubits, default d = 2
    ((3 ** 5,), np.complex128, {"local_dim": 3}),               # 1-D qutrits
    ((2 * 3 * 4 * 2,), np.float64, {"local_dim": [2, 3, 4, 2]}),  # 1-D, per-site list
    ((2, 3, 4, 2), np.complex64, {}),                           # N-D, single precision
    ((2 ** 6,), "compound", {"state": "/wave/amps"}),           # compound (r, i), named
]


@pytest.mark.parametrize("shape, dtype, options", STATES)
def test_state_vector_layouts(tmp_path, shape, dtype, options):
    rng = np.random.default_rng(4)
    n = prod(shape)
    psi = rng.standard_normal(n) + (1j * rng.standard_normal(n) if dtype != np.float64 else 0)
    path = tmp_path / "s.h5"
    with h5py.File(path, "w") as f:
        f.attrs["note"] = "written by a test"
        if dtype == "compound":
            rec = np.empty(shape, [("r", "f8"), ("i", "f8")])
            rec["r"], rec["i"] = psi.real, psi.imag
            f["wave/amps"] = rec
        else:
            f["wave/amps"] = psi.reshape(shape).astype(dtype)
        f["meta/step"] = np.arange(3)   # integer metadata is not a candidate
    prof = _profile(path, **options)
    local = options.get("local_dim")
    dims = list(shape) if len(shape) > 1 else (local if isinstance(local, list) else
                                               [local or 2] * round(np.log(n) / np.log(local or 2)))
    tol = 1e-6 if dtype == np.complex64 else 1e-12
    for s, r in zip(prof.spectra, direct_spectra(psi.astype(np.complex64 if dtype == np.complex64
                                                           else complex), dims)):
        np.testing.assert_allclose(s[:len(r)], r[:len(s)], atol=tol)
    assert prof.kind == "state-vector" and prof.local_dims == dims


def _write_bytes(path, data):
    path.write_bytes(data)
    return path


def _good_file(tmp_path, **writer):
    return write_chain(tmp_path / "good.h5", _chain(), **writer)


def _edit(tmp_path, fn):
    path = _good_file(tmp_path)
    with h5py.File(path, "a") as f:
        fn(f)
    return path


def _truncated(tmp_path):
    path = write_chain(tmp_path / "big.h5", random_chain(np.random.default_rng(0), [2] * 10,
                                                         [2, 4, 8, 16, 32, 16, 8, 4, 2]))
    data = path.read_bytes()
    return _write_bytes(tmp_path / "cut.h5", data[: len(data) // 2])


def _replace(name, value):
    def fn(f):
        del f[name]
        f[name] = value
    return fn


ERRORS = [
    # (make the bad file, profile options, error type, message fragment)
    (lambda t: _write_bytes(t / "x.h5", b"site,value\n1,2\n"), {}, bondscope.CheckpointError,
     "not an HDF5 file"),                                      # a CSV with an .h5 name
    (lambda t: _write_bytes(t / "x.h5", b""), {}, bondscope.CheckpointError, "empty"),
    (_truncated, {}, bondscope.CheckpointError, "truncated"),    # an interrupted copy
    (lambda t: t / "missing.h5", {}, bondscope.CheckpointError, "no such file"),
    (lambda t: _good_file(t), {"state": "/nope"}, bondscope.CheckpointError,
     "no dataset /nope"),                                      # missing dataset
    (lambda t: _edit(t, lambda f: f.__delitem__("/psi/T2")), {"tensors": "/psi/T{site}"},
     bondscope.CheckpointError, "site 2 of /psi/T{site} is missing"),
    (lambda t: _edit(t, _replace("/psi/T2", np.ones((4, 3, 4, 1)))),
     {"tensors": "/psi/T{site}"}, bondscope.CheckpointError, "rank 4"),   # wrong rank
    (lambda t: _edit(t, _replace("/psi/T3", np.ones((3, 3, 2)))), {"tensors": "/psi/T{site}"},
     bondscope.CheckpointError, "site 3: left bond 3 does not meet site 2's right bond 4"),
    (lambda t: _edit(t, _replace("/psi/T2", np.full((4, 3, 4), np.nan))), {},
     bondscope.CheckpointError, "site 2 holds NaN or Inf"),
    (lambda t: _edit(t, _replace("/psi/T4", np.zeros((2, 3, 1)))), {},
     bondscope.CheckpointError, "zero norm"),
    (lambda t: _edit(t, lambda f: f.create_dataset("amps", data=np.ones(24))),
     {"state": "amps"}, bondscope.CheckpointError, "not a power"),  # 24 != 2^N
    (lambda t: _edit(t, lambda f: f.create_dataset("amps", data=np.ones(24))),
     {"state": "amps", "local_dim": [2, 5, 2]}, bondscope.CheckpointError,
     "not the product of the local dimensions 2,5,2"),
    (lambda t: _edit(t, lambda f: f.create_dataset("amps", data=np.array([b"ab"] * 16))),
     {"state": "amps"}, bondscope.CheckpointError, "not numeric"),
    (lambda t: _good_file(t), {"axes": "left,physical,right"}, ValueError,
     "unknown axis word 'physical'"),
    (lambda t: _good_file(t), {"state": "/a", "tensors": "/b{site}"}, ValueError, "not both"),
    (lambda t: _good_file(t), {"tensors": "/psi/T"}, ValueError, "no {site} placeholder"),
    (lambda t: _edit(t, lambda f: f.create_dataset("amps", data=np.ones(64))), {},
     bondscope.CheckpointError, "several layouts found"),       # a state and a chain
    (lambda t: _edit(t, lambda f: [f.__delitem__(f"/psi/T{i}") for i in range(5)]), {},
     bondscope.CheckpointError, "found no state-vector dataset and no chain"),
]


@pytest.mark.parametrize("make, options, error, fragment", ERRORS)
def test_validation_errors(tmp_path, make, options, error, fragment):
    path = make(tmp_path)
    with pytest.raises(error) as info:
        bondscope.profile(path, **options)
    assert fragment in str(info.value)
    assert "\n" not in str(info.value)


def test_several_chains_listed_with_flag(tmp_path):
    path = write_chain(tmp_path / "two.h5", _chain(), pattern="/chi4/T{site}")
    write_chain(path, _chain(), pattern="/chi8/T{site}")
    with pytest.raises(bondscope.CheckpointError, match=r"--tensors '/chi4/T\{site\}'"):
        bondscope.profile(path)
    assert _profile(path, tensors="/chi8/T{site}").sites == 5


def test_checkpoint_opened_read_only(tmp_path):
    path = _good_file(tmp_path)
    path.chmod(0o444)
    before = path.read_bytes()
    _profile(path)
    assert path.read_bytes() == before


def test_huge_declared_tensors_refused_before_reading(tmp_path):
    # chunked datasets with no data written: declared 2 x 10^5 bonds would need TBs
    path = tmp_path / "huge.h5"
    big = 200_000
    with h5py.File(path, "w") as f:
        f.create_dataset("psi/T0", shape=(1, 2, big), dtype="f8", chunks=(1, 2, 1024))
        f.create_dataset("psi/T1", shape=(big, 2, big), dtype="f8", chunks=(1, 2, 1024))
        f.create_dataset("psi/T2", shape=(big, 2, 1), dtype="f8", chunks=(1024, 2, 1))
    with pytest.raises(bondscope.MemoryLimitError, match="needs about"):
        bondscope.profile(path)
    info = bondscope.inspect(path)
    assert info["max_bond_dim"] == big and info["estimate"]["memory_bytes"] > 2 ** 40


def test_max_memory_refusal(tmp_path):
    path = _good_file(tmp_path)
    with pytest.raises(bondscope.MemoryLimitError, match="--max-memory"):
        bondscope.profile(path, max_memory=1000)


def test_inspect_reports_without_spectra(tmp_path):
    path = _good_file(tmp_path, start=1, axes=("phys", "left", "right"))
    info = bondscope.inspect(path)
    assert info["kind"] == "mps" and info["sites"] == 5
    assert info["bond_dims"] == [2, 4, 4, 2] and info["axes"] == "phys,left,right"
    assert info["site_labels"] == [1, 5] and info["dtype"] == "float64"
    assert info["estimate"]["memory_bytes"] > 0 and info["file_bytes"] > 0
