"""Checkpoints as they are written, and hostile ones: one table, good and bad rows together.

Every row is a small writer (the file is made in tmp_path), the profiling
options, and what must happen: the spectra of scipy's SVD of the same state
(a reference library), or an error of a documented kind whose one-line message
holds a fragment, with the CLI's exit status.  docs/hostile-inputs.md counts
these rows.
"""

import json
import math
import os
import re
import socket
import warnings
from math import prod

import h5py
import numpy as np
import pytest

import bondscope
from bondscope._cli import main
from bondscope._source import chain_from_arrays
from bondscope._text import profile_table
from builders import WORDS, contract, direct_spectra, random_chain, scramble_gauge, write_chain
from reference import charges as charge_ref

SEED = 31
QUBITS = 10
CHAIN = {"dims": [2, 3, 2, 3, 2, 3, 2, 2], "bonds": [2, 4, 6, 6, 6, 4, 2]}


def _state(complex_=False, n=2 ** QUBITS):
    rng = np.random.default_rng(SEED)
    psi = rng.standard_normal(n) + (1j * rng.standard_normal(n) if complex_ else 0)
    return psi / np.linalg.norm(psi)


def _tensors():
    return random_chain(np.random.default_rng(SEED), CHAIN["dims"], CHAIN["bonds"])


def _write(path, **datasets):
    with h5py.File(path, "w") as f:
        f.attrs["note"] = "hostile-input test"
        for name, value in datasets.items():
            f[name] = value
    return path


# --- writers: each returns (path, reference state, its local dims) ------------------

def column(t):                    # (D, 1), as compiled writers store a vector
    psi = _state()
    return _write(t / "c.h5", psi=psi.reshape(-1, 1)), psi, [2] * QUBITS


def row(t):                       # (1, D)
    psi = _state()
    return _write(t / "c.h5", psi=psi.reshape(1, -1)), psi, [2] * QUBITS


def snapshots(t):                 # two numbered columns: two layouts, not a chain
    psi = _state()
    return _write(t / "c.h5", **{"snap0/psi": psi.reshape(-1, 1),
                                 "snap1/psi": psi.reshape(-1, 1)}), psi, [2] * QUBITS


def pairs(t, shape=(-1, 2), dtype=np.float64):   # (re, im) in a last axis of length 2
    psi = _state(complex_=True)
    stored = np.stack([psi.real, psi.imag], -1).reshape(shape).astype(dtype)
    return _write(t / "c.h5", psi=stored), psi, [2] * QUBITS


def qubit_pairs(t):               # (2,)*10 + (2,): ambiguous, read with the flag only
    psi = _state(complex_=True)
    stored = np.stack([psi.real, psi.imag], -1).reshape((2,) * (QUBITS + 1))
    return _write(t / "c.h5", psi=stored), psi, [2] * QUBITS


def scaled_state(factor, complex_=False):
    def write(t):
        psi = _state(complex_)
        return _write(t / "c.h5", psi=psi * factor), psi, [2] * QUBITS
    return write


def scaled_chain(factor):         # every site tensor times ``factor``
    def write(t):
        tensors = _tensors()
        path = write_chain(t / "c.h5", [a * factor for a in tensors])
        return path, contract(tensors), CHAIN["dims"]
    return write


def single_chain(factor):         # float32 tensors times ``factor``
    def write(t):
        tensors = _tensors()
        path = write_chain(t / "c.h5", [a * factor for a in tensors], dtype=np.float32)
        return path, contract([a.astype(np.float32) for a in tensors]), CHAIN["dims"]
    return write


def permuted_chain(order, bad_bond=None):
    """A chain stored in axis ``order``; ``bad_bond`` k breaks the bond between sites k, k+1."""
    def write(t):
        tensors = _tensors()
        if bad_bond is not None:
            a = tensors[bad_bond]
            tensors[bad_bond] = np.concatenate([a, a[:, :, :1]], axis=2)
        return write_chain(t / "c.h5", tensors, axes=order), contract(_tensors()), CHAIN["dims"]
    return write


def ambiguous_chain(t):           # rank-2 ends (2, 2), (2, 2, 3), (2, 3): three orders chain
    tensors = random_chain(np.random.default_rng(SEED), [2, 2, 2], [2, 3])
    return write_chain(t / "c.h5", tensors, axes=("phys", "left", "right"), rank2=True), \
        contract(tensors), [2, 2, 2]


def chunked(chunk_elements):      # 16 amplitudes in one gzip chunk of ``chunk_elements``
    def write(t):
        psi = _state(n=16)
        with h5py.File(t / "c.h5", "w") as f:
            f.create_dataset("psi", data=psi, maxshape=(None,), chunks=(chunk_elements,),
                             compression="gzip")
        return t / "c.h5", psi, [2] * 4
    return write


def sites_far_apart(last):        # T0 and T<last>: a gap of ~last sites in 2 KB
    def write(t):
        return _write(t / "c.h5", **{"psi/T0": np.ones((1, 2, 2)),
                                     f"psi/T{last}": np.ones((2, 2, 1))}), None, None
    return write


def long_site_number(t):          # a dataset named T<5000 digits>
    tensors = _tensors()
    path = write_chain(t / "c.h5", tensors)
    with h5py.File(path, "a") as f:
        f["psi/T" + "9" * 5000] = np.ones((2, 2, 1))
    return path, None, None


def zero_bond(t):                 # bond dimension 0 between two sites
    return _write(t / "c.h5", **{"psi/T0": np.ones((1, 2, 0)),
                                 "psi/T1": np.ones((0, 2, 1))}), None, None


def empty_axis(t):                # a (2, 0, 2) dataset named with --state
    return _write(t / "c.h5", psi=np.zeros((2, 0, 2))), None, None


def qutrits(t):                   # 729 = 3^6 amplitudes
    psi = _state(n=3 ** 6)
    return _write(t / "c.h5", psi=psi), psi, [3] * 6


def fifo(t):
    os.mkfifo(t / "c.h5")
    return t / "c.h5", None, None


def unix_socket(t):
    if len(str(t / "s.h5")) > 100:
        pytest.skip("temporary directory too deep for a socket name")
    sock = socket.socket(socket.AF_UNIX)
    sock.bind(str(t / "s.h5"))
    sock.close()
    return t / "s.h5", None, None


def rewritten(t):                 # a group's node overwritten, as by a writer mid-update
    path = write_chain(t / "c.h5", _tensors())
    data = bytearray(path.read_bytes())
    at = data.rindex(b"SNOD")
    data[at:at + 4] = b"XXXX"
    path.write_bytes(bytes(data))
    return path, None, None


CE, ML, VE = bondscope.CheckpointError, bondscope.MemoryLimitError, ValueError

CASES = [
    # (writer, options, expected: None = spectra as the reference, or (error, fragment, exit))
    (column, {}, None),                                            # (D, 1) column, detected
    (row, {}, None),                                               # (1, D) row, detected
    (column, {"state": "psi"}, None),                              # column named
    (pairs, {}, None),                                             # (D, 2) re/im, detected
    (lambda t: pairs(t, (-1, 1, 2)), {}, None),                    # (D, 1, 2) re/im
    (lambda t: pairs(t, dtype=np.float32), {}, None),              # float32 re/im
    (qubit_pairs, {"complex_parts": "last-axis"}, None),           # forced on an N-D array
    (pairs, {"complex_parts": "last-axis", "state": "psi"}, None),  # forced and named
    (scaled_state(1e170), {}, None),                               # sum of squares overflows
    (scaled_state(1e-170), {}, None),                              # ... underflows
    (scaled_state(1e-310), {}, None),                              # subnormal amplitudes
    (scaled_state(1e170, complex_=True), {}, None),                # complex, overflowing
    (scaled_chain(1e150), {}, None),                               # MPS products overflow
    (scaled_chain(1e-150), {}, None),                              # ... underflow
    (scaled_chain(3.0), {}, None),                                 # ordinary scale: untouched
    (single_chain(1e30), {"precision": "stored"}, None),           # float32 products overflow
    (snapshots, {"state": "/snap1/psi"}, None),                    # numbered columns, named
    (permuted_chain(("phys", "left", "right")), {}, None),         # permuted, found
    (ambiguous_chain, {"axes": "phys,left,right"}, None),             # --axes honoured by detection
    (qutrits, {"local_dim": 3}, None),                             # qutrits with the flag
    (chunked(2 ** 16), {}, None),                                  # 512 KiB chunk: fits
    (ambiguous_chain, {}, (CE, "choose one with --axes", 3)),         # ambiguous without --axes
    (permuted_chain(("phys", "left", "right"), bad_bond=4), {},
     (CE, "the bond between sites 4 and 5) (axes phys,left,right", 3)),  # blame the fault
    (permuted_chain(WORDS, bad_bond=4), {},
     (CE, "the bond between sites 4 and 5) (axes left,phys,right", 3)),  # default order too
    (snapshots, {}, (CE, "several layouts found: state-vector /snap0/psi", 3)),  # not a chain
    (qutrits, {}, (CE, "729 = 3^6: set --local-dim 3", 3)),        # suggests the flag
    (qutrits, {"state": "psi"}, (CE, "729 = 3^6: set --local-dim 3", 3)),  # named, too
    (qutrits, {"local_dim": 0}, (VE, "must be an integer >= 2, found 0", 2)),  # --local-dim 0
    (pairs, {"complex_parts": "none"}, (CE, "found no state-vector dataset", 3)),  # never pairs
    (scaled_state(1e170, complex_=True), {"complex_parts": "last-axis", "state": "psi"},
     (CE, "needs real numbers with a last axis of length 2", 3)),  # flag on complex data
    (scaled_state(1e170, complex_=True), {"complex_parts": "last-axis"},
     (CE, "counts only real datasets with a last axis of length 2", 3)),  # ... not named
    (pairs, {"complex_parts": "sideways"},
     (VE, "complex_parts (--complex-parts)", 2)),                 # unknown value
    (chunked(2 ** 22), {"max_memory": 16 * 2 ** 20},
     (ML, "for a chunk HDF5 decompresses whole", 4)),             # 32 MiB chunk, 16 numbers
    (sites_far_apart(30_000_000), {},
     (CE, "site 1 of /psi/T{site} is missing", 3)),               # once 12 s and 3 GB
    (sites_far_apart(99_999_999_999), {},
     (CE, "with 99999999998 missing", 3)),                        # once a MemoryError
    (long_site_number, {}, (CE, "site number of 5000 digits", 3)),  # found by the scan
    (long_site_number, {"tensors": "/psi/T{site}"},
     (CE, "site number of 5000 digits", 3)),                      # named with --tensors
    (zero_bond, {}, (CE, "has an axis of length 0", 3)),           # zero bond dimension
    (empty_axis, {"state": "psi"},
     (CE, "shaped (2, 0, 2), which holds no amplitudes", 3)),     # once ZeroDivisionError
    (fifo, {}, (CE, "is a FIFO (named pipe), not a regular file", 3)),  # once hung for ever
    (unix_socket, {}, (CE, "is a socket, not a regular file", 3)),   # refused before open
    (lambda t: (t, None, None), {}, (CE, "is a directory", 2)),    # a directory: use batch
    (rewritten, {}, (CE, "the file's groups could not be read", 3)),  # "Object visitation"
]


def _quiet_profile(path, options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        return bondscope.profile(path, spectrum=True, **options)


def _check_spectra(prof, psi, dims):
    ref = direct_spectra(psi, dims)     # scipy's SVD of the reshaped state
    tol = 1e-6 if prof["dtype"] in ("float32", "complex64") else 1e-12
    assert prof.local_dims == list(dims)
    for s, r in zip(prof.spectra, ref):
        np.testing.assert_allclose(s, r[:len(s)], atol=tol)
        assert abs(np.sum(s ** 2) - 1) < 10 * tol


@pytest.mark.parametrize("write, options, expected", CASES)
def test_library(tmp_path, write, options, expected):
    path, psi, dims = write(tmp_path)
    before = path.read_bytes() if path.is_file() else None
    if expected is None:
        _check_spectra(_quiet_profile(path, options), psi, dims)
    else:
        error, fragment, _ = expected
        with pytest.raises(error) as info:
            _quiet_profile(path, options)
        message = str(info.value)
        assert fragment in message and "\n" not in message
        assert str(path) in message or error is VE or "--max-memory" in message
    if before is not None:
        assert path.read_bytes() == before          # never written to


def _flags(options):
    out = []
    for name, value in options.items():
        out += [f"--{name.replace('_', '-')}", str(value)]
    return out


@pytest.mark.parametrize("write, options, expected", CASES)
def test_command_line(tmp_path, capsys, write, options, expected):
    path, psi, dims = write(tmp_path)
    code = main(["profile", str(path), "--json", "--quiet", "--spectrum", "all",
                 *_flags(options)])
    out, err = capsys.readouterr()
    if expected is None:
        assert code == 0, err
        doc = json.loads(out)
        prof = bondscope.Profile(doc)
        _check_spectra(prof, psi, dims)
    else:
        assert code == expected[2], err
        assert err.startswith("error: ") and err.count("\n") == 1 and "Traceback" not in err
        assert expected[1] in err and out == ""


NORMS = [
    # (writer, expected norm field, expected norm_exponent field or None)
    (scaled_state(1e170), 1e170, None),          # representable: the norm itself
    (scaled_state(1e-310), None, math.frexp(1e-310)[1]),  # subnormal: mantissa x 2^exponent
    (scaled_chain(1e150), None, "large"),        # 8 tensors of 1e150: far past the range
    (scaled_chain(3.0), None, None),             # untouched: the ordinary norm
]


@pytest.mark.parametrize("write, norm, exponent", NORMS)
def test_stored_norm_survives_rescaling(tmp_path, write, norm, exponent):
    path, _, _ = write(tmp_path)
    with pytest.warns(bondscope.UnnormalisedStateWarning, match="state norm is"):
        prof = bondscope.profile(path)
    doc = prof.to_dict()
    json.dumps(doc, allow_nan=False)              # finite numbers only
    prof.save(tmp_path / "p.json")
    assert bondscope.load_profile(tmp_path / "p.json").to_dict() == doc
    if norm is not None:
        assert doc["norm"] == pytest.approx(norm, rel=1e-12)
    header = profile_table(prof).splitlines()[1]
    if exponent is None:
        assert "norm_exponent" not in doc and " x 2^" not in header
    else:
        assert f"x 2^{doc['norm_exponent']}," in header          # the table says so too
        assert 0.5 <= doc["norm"] < 1
        # log2 of the stored norm: 8 * log2(1e150) plus the unscaled chain's (common practice)
        assert doc["norm_exponent"] == exponent if exponent != "large" else \
            doc["norm_exponent"] > 8 * 498


OPEN = [
    # (open_source keywords, error, fragment): the loader's own boundary, without the CLI
    ({"local_dim": 0}, ValueError, "local_dim (--local-dim) must be an integer >= 2"),
    ({"local_dim": [3, 0, 3]}, ValueError, "must be an integer >= 1, found 0"),
    ({"complex_parts": "both"}, ValueError, "complex_parts (--complex-parts) must be one of"),
    ({"local_dim": 3}, None, None),                                # the good row
]


@pytest.mark.parametrize("keywords, error, fragment", OPEN)
def test_open_source_checks_its_options(tmp_path, keywords, error, fragment):
    path, _, _ = qutrits(tmp_path)
    if error is None:
        with bondscope.open_source(path, **keywords) as src:
            assert src.local_dims == [3] * 6
        return
    with pytest.raises(error, match=re.escape(fragment)):
        bondscope.open_source(path, **keywords)


def test_chunk_buffer_in_the_estimate(tmp_path, capsys):
    path, _, _ = chunked(2 ** 22)(tmp_path)
    assert main(["inspect", str(path)]) == 0
    assert "32.0 MiB per read for HDF5 chunks decompressed whole" in capsys.readouterr().out
    est = bondscope.inspect(path)["estimate"]
    assert est["detail"]["read_buffer_bytes"] == 2 ** 22 * 8   # one gzip chunk of float64
    assert est["memory_bytes"] > 2 ** 22 * 8
    assert bondscope.inspect(column(tmp_path)[0])["estimate"]["detail"][
        "read_buffer_bytes"] == 0                                 # contiguous: nothing extra


def test_rescaling_leaves_the_callers_array_alone():
    psi = _state() * 1e170
    kept = psi.copy()
    with pytest.warns(bondscope.UnnormalisedStateWarning, match="1e"):
        bondscope.profile(psi)
    assert np.array_equal(psi, kept)


@pytest.mark.parametrize("shape", [(2 ** QUBITS, 1), (1, 2 ** QUBITS), (2 ** QUBITS,)])
def test_columns_cost_as_vectors(tmp_path, shape):
    # a column once cost a (D x 1) SVD's 64 GiB workspace estimate at D = 2^30
    path = _write(tmp_path / "c.h5", psi=_state().reshape(shape))
    info = bondscope.inspect(path)
    assert info["local_dims"] == [2] * QUBITS
    assert info["estimate"]["memory_bytes"] < 40 * prod(shape) * 8


DEMO = os.path.join(os.path.dirname(__file__), os.pardir, "data", "series", "kp0417_chi16.h5")


@pytest.mark.parametrize("factor, rescaled", [
    (1e150, True),      # 64 tensors of a finite-chi ground state, each times 1e150
    (1e-150, True),     # ... times 1e-150
    (16.0, False),      # 2^4 per tensor: within range, left as stored
    (1.0, False),       # the stored canonical form: never touched
])
def test_demo_ground_state_at_any_scale(tmp_path, factor, rescaled):
    # Schmidt values do not depend on the state's scale (common practice): the
    # scaled copies must give the stored file's entropies
    reference = bondscope.profile(DEMO)
    with h5py.File(DEMO) as f:
        group = f["state"]
        tensors = [group[f"site_{i}"][()] * factor for i in range(len(group))]
    path = write_chain(tmp_path / "scaled.h5", tensors)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        prof = bondscope.profile(path)
    np.testing.assert_allclose(prof.entropies, reference.entropies, rtol=0, atol=1e-12)
    assert ("norm_exponent" in prof.to_dict()) is rescaled     # 1e+-9600 is past the range
    with bondscope.open_source(path) as src:
        for i in range(src.sites):
            src.tensor(i)
        assert (src.scale_exponent != 0) is rescaled


# --- long chains: every tensor moderate, their product past the range ----------------

def _long_tensors(kind, sites):
    """``sites`` tensors whose largest |entry| is 1: the moderate chain, the reference.

    ``plain``: random, bonds 4 (the QR sweeps); ``blocks``: qubits conserving a total
    charge 2, bonds <= 6 (the block-wise sweep); ``mixed``: the same state in a random
    gauge that mixes the charges (the charge sweep).
    """
    rng = np.random.default_rng(SEED)
    if kind == "plain":
        tensors = random_chain(rng, [2] * sites, [4] * (sites - 1))
    else:
        tensors, _ = charge_ref.random_symmetric_chain(
            rng, [np.array([[0], [1]])] * sites, (0,), (2,), 2)
        if kind == "mixed":
            tensors = scramble_gauge(rng, tensors)
    return [a / np.abs(a).max() for a in tensors]


_MODERATE = {}


def _long_profile(tensors, dtype, options, key=None):
    """Profile of the chain as ``dtype`` arrays; the moderate one (``key``) once per key."""
    if key in _MODERATE:
        return _MODERATE[key]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        warnings.simplefilter("ignore", bondscope.ResolutionWarning)   # float32, mixed gauge
        prof = bondscope.profile([a.astype(dtype) for a in tensors], spectrum=True,
                                 **options)
    if key is not None:
        _MODERATE[key] = prof
    return prof


F32, F64, STORED = np.float32, np.float64, {"precision": "stored"}
LONG = [
    # (tensors, sites, factor per tensor, stored dtype, options): products leave the range
    # of the compute dtype although no tensor does (the loader leaves each as stored);
    # 200^150 = 1e345, 1e-3^150 = 1e-450, 1e-15^24 = 1e-360; float32: 200^24 = 2^183
    ("plain", 150, 200.0, F64, {}),                        # once "A has a NaN entry"
    ("plain", 150, 1e-3, F64, {}),                         # once "zero norm"
    ("plain", 150, 200.0, F64, {"bond_dim": 2}),           # the truncating sweep too
    ("plain", 150, 200.0, F32, {}),                        # float32, computed in double
    ("plain", 150, 200.0, F32, STORED),                    # float32 arithmetic (2^128)
    ("plain", 150, 1e-3, F32, STORED),                     # ... underflowing
    ("blocks", 24, 1e-15, F64, {"charges": "0,1"}),        # block-wise sweep
    ("blocks", 24, 200.0, F32, {"charges": "0,1", **STORED}),   # ... float32 overflow
    ("mixed", 24, 1e-15, F64, {"charges": "0,1"}),         # charge sweep, any gauge
    ("mixed", 24, 200.0, F32, {"charges": "0,1", **STORED}),    # ... float32 overflow
]


def _entropy_bound(t, k):
    """Largest entropy change (nats) of k weights moved by total variation t (Audenaert,
    J. Phys. A 40, 8127 (2007): |S - S'| <= t ln(k - 1) + H(t), t <= 1/2)."""
    t = min(t, 0.5)
    return t * math.log(max(k - 1, 1)) + (-t * math.log(t) - (1 - t) * math.log1p(-t)
                                          if t > 0 else 0.0)


@pytest.mark.parametrize("kind, sites, factor, dtype, options", LONG)
def test_long_chain_at_any_scale(kind, sites, factor, dtype, options):
    # Schmidt values do not depend on the state's scale (common practice): the scaled
    # chain gives the moderate chain's spectra, sectors and truncation, and its norm
    # times factor^N
    tensors = _long_tensors(kind, sites)
    scaled = [(a * factor).astype(dtype) for a in tensors]
    src = chain_from_arrays(scaled, precision=options.get("precision", "promote"))
    for i in range(sites):
        src.tensor(i)
    assert src.scale_exponent == 0              # the sweep, not the loader, rescales
    ref = _long_profile(tensors, dtype, options, (kind, sites, np.dtype(dtype).name,
                                                  str(options)))
    prof = _long_profile(scaled, dtype, options)
    assert prof["route"] == ref["route"] and ("charges" in options) is \
        (prof["route"] in ("block-sweep", "charge-sweep"))
    # the factor rounded once per tensor moves the state by at most N eps (relative)
    rounding = 4 * sites * float(np.finfo(dtype).eps)
    for got, want in zip(prof.cuts, ref.cuts):
        # the floors bound the gauge's rounding, which does not depend on the scale
        assert got["resolution_floor"] == pytest.approx(want["resolution_floor"], rel=0.01)
        tol = float(rounding + got["resolution_floor"] + want["resolution_floor"])
        a, b = np.array(got["schmidt_values"]), np.array(want["schmidt_values"])
        k = min(a.size, b.size)
        np.testing.assert_allclose(a[:k], b[:k], rtol=0, atol=tol)
        assert np.all(a[k:] <= tol) and np.all(b[k:] <= tol)
        # each weight lambda^2 moves by at most 2 tol (lambda <= 1)
        spread = max(a.size, b.size)
        assert got["entropy"] == pytest.approx(
            want["entropy"], abs=_entropy_bound(spread * tol, spread) + tol)
        for g, w in zip(got.get("sectors", []), want.get("sectors", [])):
            assert g["charge"] == w["charge"]
            assert g["probability"] == pytest.approx(w["probability"], abs=tol)
    if "bond_dim" in options:
        assert prof["truncation"]["infidelity"] == pytest.approx(
            ref["truncation"]["infidelity"], abs=rounding)
    doc, want = prof.to_dict(), ref.to_dict()
    json.dumps(doc, allow_nan=False)            # finite numbers only
    log2 = math.log2(doc["norm"]) + doc.get("norm_exponent", 0)
    expected = math.log2(want["norm"]) + want.get("norm_exponent", 0) \
        + sites * math.log2(factor)
    # the norm moves by the same relative N eps; log2 of ~1e3 is itself rounded
    assert log2 == pytest.approx(expected, abs=rounding / math.log(2) + 4 * abs(expected)
                                 * float(np.finfo(float).eps))


_BIG = np.array([[3 * 2.0 ** 700, -1.0], [0.0, 2.0 ** 690]])
BALANCE = [
    # (bond matrix or sector blocks, exponent removed, or the error's fragment)
    (_BIG, 702, None),                                       # 3 x 2^700 = 0.75 x 2^702
    (np.ldexp(_BIG, -1400), -698, None),                     # tiny: scaled up
    (np.array([[1.0, 1e3j]], dtype=np.complex64), 10, None),  # imaginary part largest
    (np.zeros((2, 2)), 0, None),                             # zero: left alone
    ({(0,): _BIG, (1,): np.ones((1, 1))}, 702, None),        # sectors: one exponent
    (np.array([[1.0, np.nan]]), None, "holds NaN or Inf"),   # non-finite: named
    (np.array([[np.inf]], dtype=np.complex64), None, "--precision promote"),  # float32 hint
]


@pytest.mark.parametrize("matrix, exponent, fragment", BALANCE)
def test_bond_matrices_are_balanced_exactly(matrix, exponent, fragment):
    # a power of two changes only exponents (IEEE 754): the result is exact
    from bondscope._kernels.balance import balanced, balanced_blocks

    name = "ck.h5:/psi/T{site}"
    scale = balanced_blocks if isinstance(matrix, dict) else balanced
    work = {k: v.copy() for k, v in matrix.items()} if isinstance(matrix, dict) \
        else matrix.copy()                      # the kernels' own matrices: overwritten
    if fragment is not None:
        with pytest.raises(bondscope.CheckpointError) as info:
            scale(work, name, 7)
        message = str(info.value)
        assert fragment in message and "\n" not in message
        assert message.startswith(f"{name}: site 7: ")
        return
    out, e = scale(work, name, 7)
    assert e == exponent
    pairs = [(out[k], matrix[k]) for k in matrix] if isinstance(matrix, dict) \
        else [(out, matrix)]
    for got, was in pairs:
        assert got.dtype == was.dtype
        assert np.array_equal(got.real, np.ldexp(was.real, -e))
        assert np.array_equal(got.imag, np.ldexp(was.imag, -e))
    top = max(float(np.abs(np.stack([g.real, g.imag])).max()) for g, _ in pairs)
    assert 0.5 <= top < 1 or not e              # the largest entry now in [1/2, 1)
