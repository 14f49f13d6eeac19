"""Mixed states: pre-flight estimate against the measured peak memory and time.

Each size runs in a child process (a fresh peak): a random purification of N sites with
d = D = 2 and bond chi, profiled once.  Purifications only: their chi^4 replica
environment is what the estimate must get right (a density matrix holds chi x chi
matrices).

    python scripts/bench_mixed.py --chi 16,32,48 --sites 10 [--disentangle]

Prints, per chi, the estimate (memory, seconds) and the measured rise of the peak resident
memory and the wall time; docs/mixed.md and docs/performance.md record the figures.
"""

import argparse
import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

CHILD = """
import json, resource, sys, time, warnings
import numpy as np
import bondscope
chi, n, dis = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3] == "1"
rng = np.random.default_rng(0)
bonds = [1] + [min(chi, 4 ** min(i + 1, n - 1 - i)) for i in range(n - 1)] + [1]
tensors = [rng.standard_normal((bonds[i], 2, 2, bonds[i + 1])) for i in range(n)]
warnings.simplefilter("ignore")
axes = "left,phys,ancilla,right"
est = bondscope.inspect(tensors, axes=axes, disentangle=dis)["estimate"]
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
start = time.perf_counter()
bondscope.profile(tensors, axes=axes, disentangle=dis)
wall = time.perf_counter() - start
peak = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - base) * 1024
print(json.dumps({"estimate": est["memory_bytes"], "seconds": est["seconds"],
                  "peak": peak, "wall": wall}))
"""


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--chi", default="16,32", help="bond dimensions, comma-separated")
    p.add_argument("--sites", type=int, default=10)
    p.add_argument("--disentangle", action="store_true")
    args = p.parse_args()
    env = {"PYTHONPATH": str(ROOT / "src"), "OMP_NUM_THREADS": "1",
           "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}
    for chi in (int(c) for c in args.chi.split(",")):
        out = subprocess.run([sys.executable, "-c", CHILD, str(chi), str(args.sites),
                              "1" if args.disentangle else "0"], capture_output=True,
                             text=True, env=env, check=True)
        r = json.loads(out.stdout)
        print(f"chi {chi:4d}: estimate {r['estimate'] / 2**20:8.1f} MiB {r['seconds']:8.2f} s"
              f" | measured peak rise {r['peak'] / 2**20:8.1f} MiB {r['wall']:8.2f} s"
              f" | peak/estimate {r['peak'] / r['estimate']:.2f}")


if __name__ == "__main__":
    main()
