"""Memory: the pre-flight estimate against measured peaks, refusal before reading, and a
checkpoint profiled in far less memory than its size.

Peaks are measured with tracemalloc, which sees every numpy allocation
(numpy reports its buffers to it: NumPy C-API docs, "Memory management"), or,
in the slow test, as the peak resident set of a child process (VmHWM in
/proc/self/status, Linux proc(5)).
"""

import json
import os
import subprocess
import sys
import tracemalloc
import warnings
from pathlib import Path

import h5py
import numpy as np
import pytest

import bondscope
from bondscope import MemoryLimitError
from bondscope._checkpoint import open_source
from bondscope._estimate import available_memory, estimate
from builders import random_chain, write_chain

SRC = Path(__file__).resolve().parents[1] / "src"


def _peak(job):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        job()   # once unmeasured, so that lazy imports and first-call set-up are not counted
        tracemalloc.start()
        try:
            job()
            return tracemalloc.get_traced_memory()[1]
        finally:
            tracemalloc.stop()


def _state_file(path, qubits, dtype, seed=0):
    rng = np.random.default_rng(seed)
    psi = rng.standard_normal(2**qubits)
    if np.dtype(dtype).kind == "c":
        psi = psi + 1j * rng.standard_normal(2**qubits)
    with h5py.File(path, "w") as f:
        f.create_dataset("psi", data=psi.astype(dtype))
    return path


STATE_CASES = [
    # (qubits, stored dtype, route, options)
    (16, "complex128", "gram", {}),                 # even split
    (15, "complex128", "gram", {}),                 # odd: uneven middle
    (16, "float64", "svd", {}),                     # per-cut SVDs
    (16, "complex64", "gram", {}),                  # promoted on read
    (14, "float64", "gram", {"bond_dim": 8}),       # with truncation tracking
]


@pytest.mark.parametrize("qubits, dtype, route, opts", STATE_CASES)
def test_state_estimate_bounds_the_measured_peak(tmp_path, qubits, dtype, route, opts):
    # the estimate is an upper bound, and not a loose one (within 2x of the measured peak)
    path = _state_file(tmp_path / "s.h5", qubits, dtype)
    with open_source(path) as src:
        est = estimate(src, route, truncating=bool(opts)).memory
    peak = _peak(lambda: bondscope.profile(path, route=route, **opts))
    assert peak <= est
    assert peak >= est / 2


_BONDS = [min(2**i, 2**(16 - i), 128) for i in range(1, 16)]
MPS_CASES = [
    # (local dims, internal bonds, dtype, options); bonds up to 128, so that the data
    # and not the document's fixed few hundred kB dominates
    ([2] * 16, _BONDS, np.float64, {}),                    # plain
    ([2] * 16, _BONDS, np.complex128, {}),                 # complex
    ([2] * 16, _BONDS, np.float64, {"bond_dim": 8}),       # truncation tracking
]


@pytest.mark.parametrize("dims, bonds, dtype, opts", MPS_CASES)
def test_mps_estimate_bounds_the_measured_peak(tmp_path, dims, bonds, dtype, opts):
    # upper bound on what the sweeps allocate (common practice: estimate before work)
    rng = np.random.default_rng(5)
    path = write_chain(tmp_path / "m.h5", random_chain(rng, dims, bonds, dtype))
    with open_source(path) as src:
        est = estimate(src, truncating=bool(opts)).memory
    peak = _peak(lambda: bondscope.profile(path, **opts))
    assert peak <= est


@pytest.mark.parametrize("kind", ["state", "mps"])   # both sources refuse before reading
def test_refusal_comes_before_any_read(tmp_path, monkeypatch, kind):
    # max_memory below the estimate: MemoryLimitError and no data read
    from bondscope import _source

    if kind == "state":
        path = _state_file(tmp_path / "s.h5", 12, "float64")
        monkeypatch.setattr(_source.AmplitudeSource, "amplitudes",
                            lambda self: pytest.fail("amplitudes were read"))
    else:
        path = write_chain(tmp_path / "m.h5",
                           random_chain(np.random.default_rng(1), [2] * 6, [2, 4, 8, 4, 2]))
        monkeypatch.setattr(_source.ChainSource, "tensor",
                            lambda self, i: pytest.fail("a tensor was read"))
    with pytest.raises(MemoryLimitError, match="needs about"):
        bondscope.profile(path, max_memory=1000)


def test_available_memory_honours_an_address_space_limit():
    # RLIMIT_AS caps what may still be allocated (POSIX setrlimit(2))
    code = ("import resource, sys; sys.path.insert(0, %r)\n"
            "from bondscope._estimate import available_memory\n"
            "vm = int(open('/proc/self/statm').read().split()[0]) * resource.getpagesize()\n"
            "resource.setrlimit(resource.RLIMIT_AS, (vm + 2**30, resource.RLIM_INFINITY))\n"
            "print(available_memory() <= 2**30)") % str(SRC)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "True"
    assert available_memory() > 0


_CHILD = """
import json, resource, sys, warnings
sys.path.insert(0, {src!r})
import numpy, scipy.linalg, h5py, bondscope, bondscope._pipeline, bondscope._kernels.chain
with open("/proc/self/statm") as f:
    base = int(f.read().split()[1]) * resource.getpagesize()
warnings.simplefilter("ignore")
prof = bondscope.profile({path!r})
with open("/proc/self/status") as f:     # VmHWM: peak of this image, not the parent's
    peak = next(int(l.split()[1]) * 1024 for l in f if l.startswith("VmHWM:")) - base
print(json.dumps({{"peak": peak, "cuts": len(prof.cuts)}}))
"""


def test_checkpoint_profiled_in_a_fraction_of_its_size(tmp_path):
    # a ~160 MB checkpoint profiled in a child: its peak resident memory above the
    # imports stays under 3/4 of the file, which a whole-file load (>= 1x) cannot
    sites, chi = 56, 512
    bonds = [min(2**i, 2**(sites - i), chi) for i in range(1, sites)]
    path = tmp_path / "big.h5"
    rng = np.random.default_rng(9)
    full = [1, *bonds, 1]
    with h5py.File(path, "w") as f:
        for i in range(sites):
            t = rng.standard_normal((full[i], 2, full[i + 1])) / np.sqrt(2 * full[i + 1])
            f.create_dataset(f"/psi/T{i}", data=t)
    size = os.path.getsize(path)
    assert size > 150 * 2**20
    out = subprocess.run([sys.executable, "-c", _CHILD.format(src=str(SRC), path=str(path))],
                         capture_output=True, text=True, timeout=600)
    assert out.returncode == 0, out.stderr[-2000:]
    report = json.loads(out.stdout.strip().splitlines()[-1])
    assert report["cuts"] == sites - 1
    assert report["peak"] < 0.75 * size
