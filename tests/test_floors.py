"""Resolution floors bound the error actually made: measured against exact references.

The reference for a chain is the state its stored tensors define, contracted in
exact rational arithmetic (tests/reference/exact.py) and decomposed by
scipy.linalg.svdvals (LAPACK; error about eps * ||psi||), so it does not share
the sweeps' rounding in an ill-conditioned gauge.  docs/validation.md records
the measured error against the floor for each row.
"""

import math
import warnings

import numpy as np
import pytest
from builders import contract, direct_spectra, random_chain
from reference.exact import exact_vector, regauge, spectrum_errors

import bondscope
from bondscope._kernels.chain import chain_spectra
from bondscope._measure import ResolutionWarning
from bondscope._source import chain_from_arrays

EPS = float(np.finfo(np.float64).eps)


def _sweep(tensors, precision="promote"):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResolutionWarning)
        return chain_spectra(chain_from_arrays(tensors, precision=precision))


GAUGES = [
    # (dtype, cond(G) on every bond); the error grows as eps cond(G)^2 (issue 14)
    (np.float64, 1.0),        # the chain as drawn: floor stays near eps
    (np.float64, 1e2),
    (np.float64, 1e4),
    (np.float64, 1e6),
    (np.float64, 1e8),
    (np.float64, 1e10),       # the error reaches O(0.1): nothing below the floor is kept
    (np.complex128, 1e6),
    (np.complex128, 1e10),
]


@pytest.mark.parametrize("dtype, cond", GAUGES)
def test_floor_bounds_error_in_conditioned_gauge(dtype, cond):
    # reference: scipy.linalg.svdvals of the exactly contracted stored state
    rng = np.random.default_rng(14)
    dims, bonds = [2] * 7, [2, 4, 8, 8, 4, 2]
    tensors = random_chain(rng, dims, bonds, dtype)
    if cond > 1:
        tensors = regauge(rng, tensors, cond)
    ref = direct_spectra(exact_vector(tensors), dims)
    result = _sweep(tensors)
    err, floors = spectrum_errors(result.spectra, ref), np.array(result.floors)
    assert np.all(err <= floors), f"errors {err} above floors {floors}"
    if cond == 1:
        assert np.all(floors < 1e3 * EPS)        # an ordinary gauge keeps its resolution


def test_gauge_warns_and_does_not_count_rounding_as_rank():
    # bond 16 where the rank is at most 8 (4 qubits on the smaller side): an
    # ill-conditioned gauge must not turn rounding into rank (issue 14: 10 instead of 8)
    rng = np.random.default_rng(8)
    dims, bonds = [2] * 6, [2, 4, 16, 4, 2]
    plain = random_chain(rng, dims, bonds)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        warnings.simplefilter("error", ResolutionWarning)
        ref = bondscope.profile(plain)
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        with pytest.warns(ResolutionWarning, match="resolved only to"):
            bad = bondscope.profile(regauge(rng, plain, 1e8))
    assert ref.schmidt_ranks.tolist() == [2, 4, 8, 4, 2]
    assert np.all(bad.schmidt_ranks <= ref.schmidt_ranks)
    assert np.all(bad.column("resolution_floor") > math.sqrt(EPS))


STORED = [
    # (cond(G), precision): float32 site tensors; error against the exact stored state
    (1.0, "stored"),          # computed in float32 (issue 14: floor was 1.7x optimistic)
    (1e2, "stored"),
    (1e3, "stored"),          # eps32 cond^2 ~ 0.1: little is resolved, and the floor says so
    (1e2, "promote"),         # computed in double, known to float32 eps
]


@pytest.mark.parametrize("cond, precision", STORED)
def test_single_precision_chain_floor_bounds_error(cond, precision):
    # reference: scipy.linalg.svdvals of the exactly contracted float32 tensors
    rng = np.random.default_rng(32)
    dims, bonds = [2] * 7, [2, 4, 8, 8, 4, 2]
    tensors = random_chain(rng, dims, bonds)
    if cond > 1:
        tensors = regauge(rng, tensors, cond)
    tensors = [t.astype(np.float32) for t in tensors]
    ref = direct_spectra(exact_vector([t.astype(np.float64) for t in tensors]), dims)
    result = _sweep(tensors, precision)
    err, floors = spectrum_errors(result.spectra, ref), np.array(result.floors)
    assert np.all(err <= floors), f"errors {err} above floors {floors}"
    assert np.all(floors >= np.finfo(np.float32).eps * 0.5)


def _rank_four_state(rng, sites):
    """A random state with Schmidt rank min(2^l, 4, 2^(N-l)) at cut l (an MPS of bond 4)."""
    bonds = [min(2 ** k, 4, 2 ** (sites - k)) for k in range(1, sites)]
    psi = contract(random_chain(rng, [2] * sites, bonds))
    return psi / np.linalg.norm(psi), bonds


VECTORS32 = [
    # (qubits, route): a rank-4 state stored as float32, profiled with the default promotion
    (12, "svd"),
    (12, "gram"),
    (16, "auto"),             # the gram route, chosen by size
]


@pytest.mark.parametrize("sites, route", VECTORS32)
def test_single_precision_vector_rounding_is_not_rank(sites, route):
    # issue 14: rank 64 instead of 4 when the floor followed the compute precision;
    # reference: scipy.linalg.svdvals of the state before it was rounded to float32
    rng = np.random.default_rng(4)
    psi, bonds = _rank_four_state(rng, sites)
    prof = bondscope.profile(psi.astype(np.float32), route=route, spectrum=True)
    assert prof.schmidt_ranks.tolist() == bonds
    assert prof.get("precision") == "float64"
    ref = direct_spectra(psi, [2] * sites)
    floors = prof.column("resolution_floor")
    err = spectrum_errors(prof.spectra, [r[:k] for r, k in zip(ref, bonds)])
    assert np.all(err <= floors)


NORMS = [
    # (scale of a normalised state, warned): the warning threshold is 1e4 float32 eps
    (1.00005, False),         # ordinary time-evolution output (issue 14)
    (1 - 1e-6, False),
    (1.01, True),
    (5.0, True),              # never normalised
]


@pytest.mark.parametrize("scale, warned", NORMS)
def test_norm_warning_threshold_and_recorded_norm(scale, warned):
    bell = np.array([1.0, 0.0, 0.0, 1.0]) / math.sqrt(2)
    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        prof = bondscope.profile(scale * np.kron(bell, bell))
    flagged = [w for w in seen if issubclass(w.category, bondscope.UnnormalisedStateWarning)]
    assert bool(flagged) == warned
    assert prof.norm == pytest.approx(scale, rel=1e3 * EPS)    # recorded either way


CHARGED = [
    # (gauge, cond, route): charge-resolved engines on a random U(1) eigenstate, 8 qubits
    ("block", 1e4, "block-sweep"),    # conditioned inside each sector: blocks stay blocks
    ("block", 1e8, "block-sweep"),
    ("mixing", 1e4, "charge-sweep"),  # a gauge that mixes charges on every bond
    ("mixing", 1e8, "charge-sweep"),  # rounding leaks weight out of the total charge
]


@pytest.mark.parametrize("gauge, cond, route", CHARGED)
def test_charge_engine_floors_bound_error(gauge, cond, route):
    # reference: scipy.linalg.svdvals of the exactly contracted stored state
    from reference import charges as symmetric
    from reference.exact import block_regauge

    from bondscope._charges import parse_charges
    from bondscope._kernels.sectors import charge_spectra

    rng = np.random.default_rng(5)
    qubit, n = np.array([[0], [1]]), 8
    tensors, labels = symmetric.random_symmetric_chain(rng, [qubit] * n, (0,), (4,), 3)
    tensors = block_regauge(rng, tensors, labels, cond) if gauge == "block" \
        else regauge(rng, tensors, cond)
    ref = direct_spectra(exact_vector(tensors), [2] * n)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResolutionWarning)
        result = charge_spectra(chain_from_arrays(tensors),
                                parse_charges("0,1", "0").bind([2] * n))
    assert result.route == route
    err, floors = spectrum_errors(result.spectra, ref), np.array(result.floors)
    assert np.all(err <= floors), f"errors {err} above floors {floors}"


def test_cli_says_when_the_gauge_costs_resolution(tmp_path):
    # the warning reaches the command line as one 'warning:' line; the profile is written
    import subprocess
    import sys

    from builders import write_chain

    rng = np.random.default_rng(9)
    tensors = regauge(rng, random_chain(rng, [2] * 6, [2, 4, 8, 4, 2]), 1e8)
    path = write_chain(tmp_path / "bad.h5", tensors)
    r = subprocess.run([sys.executable, "-m", "bondscope", "profile", str(path), "--json"],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    lines = [line for line in r.stderr.splitlines() if "resolved only to" in line]
    assert len(lines) == 1 and lines[0].startswith("warning: ")
    assert "Traceback" not in r.stderr
