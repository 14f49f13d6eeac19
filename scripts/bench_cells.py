"""Unit cells: dense transfer matrix against Arnoldi, side by side, and time against chi.

    python scripts/bench_cells.py            # chi 6..16 both routes, then Arnoldi to chi 64

Prints, per bond dimension, the best of three profiles of a random two-site cell
(d = 2, seed 0) with each route and their ratio; the crossover sets
`bondscope._kernels.transfer.DENSE_BOND`.  One BLAS thread.
"""

import time
import warnings

import numpy as np
from threadpoolctl import threadpool_limits

import bondscope
from bondscope._kernels import transfer


def best(cell, repeats=3):
    out = []
    for _ in range(repeats):
        t = time.perf_counter()
        bondscope.profile(cell)
        out.append(time.perf_counter() - t)
    return min(out)


def main():
    warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
    rng = np.random.default_rng(0)
    keep = transfer.DENSE_BOND
    with threadpool_limits(limits=1):
        bondscope.profile([rng.standard_normal((3, 2, 3))])       # imports, first call
        for chi in (6, 8, 10, 12, 16):
            cell = [rng.standard_normal((chi, 2, chi)) for _ in range(2)]
            transfer.DENSE_BOND = 10 ** 6
            dense = best(cell)
            transfer.DENSE_BOND = 0
            arnoldi = best(cell)
            print(f"chi {chi:>3}: dense {dense:.4f} s  arnoldi {arnoldi:.4f} s  "
                  f"dense/arnoldi {dense / arnoldi:.2f}", flush=True)
        transfer.DENSE_BOND = keep
        for chi in (32, 64):
            cell = [rng.standard_normal((chi, 2, chi)) for _ in range(2)]
            print(f"chi {chi:>3}: arnoldi {best(cell, 1):.3f} s", flush=True)


if __name__ == "__main__":
    main()
