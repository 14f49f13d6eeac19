"""Throughput of the batch runner: one worker process against two.

Not a test.  Writes COUNT random MPS checkpoints (a made-up scan of a
spin-ladder quench at fixed bond dimension) into a temporary directory, profiles
them with ``run_batch`` once with one worker and once with two (one BLAS thread
each, pool start-up included), and prints both wall times and their ratio.  The
goal on a machine with two free cores is a ratio >= 1.7.  What keeps it below 2 is
the fixed start-up of a run (about 0.6 s: imports in the batch process and in
each new worker) and, for much larger tensors, the cache and memory bandwidth
the two workers share.

    python scripts/bench_batch.py [--count 16] [--sites 24] [--chi 384]
"""

import argparse
import os
import tempfile
import time
from pathlib import Path

import h5py
import numpy as np
from threadpoolctl import threadpool_limits

from bondscope._batch.run import run_batch


def random_mps(rng, sites, chi, d=2):
    """Random normalised MPS (left, phys, right), bonds min(chi, d^distance to an end)."""
    bonds = [1] + [min(chi, d ** min(i, sites - i)) for i in range(1, sites)] + [1]
    tensors = [rng.standard_normal((bonds[i], d, bonds[i + 1])) for i in range(sites)]
    for i in range(sites - 1):  # left-orthonormalise; the norm moves into the last tensor
        left, phys, right = tensors[i].shape
        q, rest = np.linalg.qr(tensors[i].reshape(left * phys, right))
        tensors[i] = q.reshape(left, phys, -1)
        tensors[i + 1] = np.tensordot(rest, tensors[i + 1], axes=(1, 0))
    tensors[-1] /= np.linalg.norm(tensors[-1])
    return tensors


def write_scan(root, count, sites, chi):
    rng = np.random.default_rng(2024)
    for step in range(count):
        with h5py.File(root / f"ladder_t{step:03d}.h5", "w") as f:
            f.attrs.update(time=0.1 * step, bond_dim=chi, run="ladder-quench-demo")
            for i, t in enumerate(random_mps(rng, sites, chi)):
                f[f"psi/T{i}"] = t


def timed(scan, out, workers):
    start = time.perf_counter()
    summary = run_batch(scan, out, workers=workers, threads=1, force=True)
    seconds = time.perf_counter() - start
    if summary.done != len(summary):
        raise SystemExit(f"{summary.failed} checkpoints failed; see {summary.files['csv']}")
    return seconds, sum(r["wall_seconds"] for r in summary.rows) / len(summary)


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--count", type=int, default=16, help="checkpoints (default 16)")
    parser.add_argument("--sites", type=int, default=24, help="sites per chain (default 24)")
    parser.add_argument("--chi", type=int, default=384, help="bond dimension (default 384)")
    args = parser.parse_args()
    load = os.getloadavg()[0]
    if load > 0.5:
        print(f"note: load average {load:.1f} before starting; other work on these cores "
              "lowers the ratio")
    with tempfile.TemporaryDirectory(prefix="bondscope-bench-") as tmp:
        scan = Path(tmp) / "scan"
        scan.mkdir()
        with threadpool_limits(limits=1):
            write_scan(scan, args.count, args.sites, args.chi)
        (one, each_one), (two, each_two) = (timed(scan, Path(tmp) / f"out{n}", n)
                                            for n in (1, 2))
    print(f"{args.count} checkpoints, {args.sites} sites, chi {args.chi}")
    print(f"1 worker : {one:7.2f} s  ({args.count / one:.2f} checkpoints/s, "
          f"{each_one:.2f} s per checkpoint in its worker)")
    print(f"2 workers: {two:7.2f} s  ({args.count / two:.2f} checkpoints/s, "
          f"{each_two:.2f} s per checkpoint in its worker)")
    print(f"throughput ratio 2 vs 1 workers: {one / two:.2f}  (goal >= 1.7)")


if __name__ == "__main__":
    main()
