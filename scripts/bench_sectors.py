"""Block-wise against dense sweeps of a U(1) MPS: time and peak memory as ratios.

    python scripts/bench_sectors.py [--sites 64] [--chi 1024] [--sectors 9] [--charge-sweep]
    python scripts/bench_sectors.py --pattern [--chi 1024]

Writes one random particle-number-conserving qubit MPS (half filling, bond
dimension min(2^b, 2^(L-b), chi) spread evenly over the ``--sectors`` charges
nearest b/2) twice: as a block-sparse checkpoint (packed form) and as a dense
one.  Each measurement runs in a fresh child process (``bench.child``: wall
time and peak resident memory above the child's after imports):

* dense:        ``bondscope.profile(dense file)``, the plain engine;
* block-wise:   the block-sparse file, block-wise sweeps (``charge_spectra``);
* detected:     the dense file, block structure inferred from its zeros;
* charge-sweep: (``--charge-sweep``) the dense file through the sweep for
  gauges that mix charges (``route="charge-sweep"``).

Every child saves its spectra; the script checks that all agree to 1e-12.
Goal (issue 10): block-wise >= 5x faster than dense, peak <= 0.25x.

``--pattern``: the bond-charge inference of one chi x 2 x chi block-structured
tensor, bondscope's vectorised numpy form against a numba loop over the
entries (defined here), best of 5 after a first call; and the numba loop's
first call (import and compile).  Needs numba: ``pip install -e ".[bench]"``.
"""

import argparse
import os
import tempfile

import numpy as np

from bench import _fill, _line, child

PREFIX = """
import warnings
warnings.simplefilter("ignore")
"""

DENSE = PREFIX + """
from bondscope import profile
prof = profile(PATH, spectrum=True)
np.savez(OUT, *[np.array(c["schmidt_values"]) for c in prof.to_dict()["cuts"]])
"""

SECTORS = PREFIX + """
from bondscope._blocksparse import open_blocks
from bondscope._checkpoint import open_source
from bondscope._charges import parse_charges
from bondscope._kernels.sectors import charge_spectra
src = open_blocks(PATH) if FORM == "packed" else open_source(PATH)
with src:
    charges = parse_charges("0,1").bind(src.local_dims)
    res = charge_spectra(src, charges, route=ROUTE)
np.savez(OUT, *[s[s > f] for s, f in zip(res.spectra, res.floors)])
extra = {"route": res.route}
"""


PATTERN = """
import time
from bondscope._charges import parse_charges
from bondscope._kernels.blocksweep import infer_left_charges
charges = parse_charges("0,1").bind([2])
rng = np.random.default_rng(0)
q = np.repeat(np.arange(9), CHI // 9 + 1)[:CHI].reshape(-1, 1)
a = rng.standard_normal((CHI, 2, CHI)) * (q[None, None, :, 0] == q[:, None, None, 0]
                                         + np.array([0, 1])[None, :, None])
known, phys = np.ones(CHI, dtype=bool), charges.sites[0]

t = time.perf_counter()
import numba

@numba.njit
def loop(a, right, known, phys):
    k, d, c = a.shape
    left = np.zeros(k, dtype=np.int64)
    has = np.zeros(k, dtype=np.bool_)
    for i in range(k):
        for s in range(d):
            for b in range(c):
                if a[i, s, b] != 0 and known[b]:
                    v = right[b] - phys[s]
                    if has[i] and left[i] != v:
                        return left, False
                    left[i], has[i] = v, True
    return left, True
loop(a, q[:, 0], known, phys[:, 0])
first = time.perf_counter() - t

def best(f):
    out = []
    for _ in range(5):
        t = time.perf_counter()
        f()
        out.append(time.perf_counter() - t)
    return min(out)
left, _ = infer_left_charges(a, q, known, phys, charges)
assert np.array_equal(left[:, 0], loop(a, q[:, 0], known, phys[:, 0])[0])
extra = {"numba": best(lambda: loop(a, q[:, 0], known, phys[:, 0])),
         "numpy": best(lambda: infer_left_charges(a, q, known, phys, charges)),
         "first": first}
"""


def pattern(chi):
    rep = child(_fill(PATTERN, CHI=chi))
    if "failed" in rep:
        print(f"pattern: failed: {rep['failed']}")
        return
    e = rep["extra"]
    print(f"bond-charge inference, {chi} x 2 x {chi}: bondscope (numpy) "
          f"{e['numpy'] * 1e3:.1f} ms, numba loop {e['numba'] * 1e3:.1f} ms (ratio "
          f"{e['numpy'] / e['numba']:.1f}); numba's first call (import and compile) "
          f"{e['first']:.2f} s")


def chain_sectors(sites, chi, sectors, particles):
    """Per bond b the {charge: dim} sectors (charges nearest b/2, reachable both ways)."""
    out = [{0: 1}]
    for b in range(1, sites):
        total = min(2**b, 2**(sites - b), chi)
        ok = [q for q in range(b + 1) if 0 <= particles - q <= sites - b]
        ok = sorted(sorted(ok, key=lambda q: abs(q - b / 2))[:sectors])
        dims = [total // len(ok) + (k < total % len(ok)) for k in range(len(ok))]
        out.append({q: d for q, d in zip(ok, dims) if d > 0})
    out.append({particles: 1})
    return out


def write_files(tmp, sites, chi, sectors, seed=0):
    """The same state, packed block-sparse and dense; returns (paths, chi per sector)."""
    import h5py

    rng = np.random.default_rng(seed)
    bonds = chain_sectors(sites, chi, sectors, sites // 2)
    packed, dense = os.path.join(tmp, "packed.h5"), os.path.join(tmp, "dense.h5")
    with h5py.File(packed, "w") as fp, h5py.File(dense, "w") as fd:
        for i in range(sites):
            left, right = bonds[i], bonds[i + 1]
            lo = np.cumsum([0, *left.values()])
            ro = np.cumsum([0, *right.values()])
            full = np.zeros((lo[-1], 2, ro[-1]))
            g = fp.create_group(f"/state/site{i}")
            g.attrs["local_charges"] = np.array([0, 1])
            parts, index, at = [], [], 0
            for a, (ql, kl) in enumerate(left.items()):
                for s in (0, 1):
                    if ql + s not in right:
                        continue
                    c = list(right).index(ql + s)
                    kr = right[ql + s]
                    blk = rng.standard_normal((kl, 1, kr)) / np.sqrt(2 * kr)
                    full[lo[a]:lo[a + 1], s:s + 1, ro[c]:ro[c + 1]] = blk
                    parts.append(blk.reshape(-1))
                    index.append([at, kl, 1, kr, ql, s, ql + s])
                    at += blk.size
            g.create_dataset("data", data=np.concatenate(parts))
            g.create_dataset("block_index", data=np.array(index, dtype=np.int64))
            fd.create_dataset(f"/psi/T{i}", data=full)
    return packed, dense, bonds


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sites", type=int, default=64)
    ap.add_argument("--chi", type=int, default=1024)
    ap.add_argument("--sectors", type=int, default=9)
    ap.add_argument("--charge-sweep", action="store_true")
    ap.add_argument("--dir", default=None, help="directory for the two checkpoints")
    ap.add_argument("--pattern", action="store_true",
                    help="only the bond-charge inference: numba against numpy")
    args = ap.parse_args(argv)
    if args.pattern:
        import importlib.util
        if importlib.util.find_spec("numba") is None:
            ap.error('--pattern needs numba: pip install -e ".[bench]"')
        pattern(args.chi)
        return
    with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
        packed, dense, bonds = write_files(tmp, args.sites, args.chi, args.sectors)
        mid = bonds[args.sites // 2]
        print(f"U(1) MPS: L = {args.sites}, chi = {sum(mid.values())} over {len(mid)} "
              f"sectors at the middle (chi_q = {sorted(set(mid.values()))}); files: packed "
              f"{os.path.getsize(packed) / 2**20:.1f} MiB, dense "
              f"{os.path.getsize(dense) / 2**20:.1f} MiB")
        runs = {"dense": child(_fill(DENSE, PATH=dense, OUT=f"{tmp}/dense.npz")),
                "block-wise": child(_fill(SECTORS, PATH=packed, FORM="packed", ROUTE="auto",
                                          OUT=f"{tmp}/block-wise.npz")),
                "detected": child(_fill(SECTORS, PATH=dense, FORM="dense", ROUTE="auto",
                                        OUT=f"{tmp}/detected.npz"))}
        if args.charge_sweep:
            runs["charge-sweep"] = child(_fill(SECTORS, PATH=dense, FORM="dense",
                                               ROUTE="charge-sweep", OUT=f"{tmp}/charge-sweep.npz"))
        ref = np.load(f"{tmp}/dense.npz")
        for name, rep in runs.items():
            if "extra" in rep and rep["extra"]:
                name = f"{name} ({rep['extra']['route']})"
            print(_line(name, rep, runs["dense"]))
        for name in runs:
            if name == "dense" or "failed" in runs[name]:
                continue
            got = np.load(f"{tmp}/{name}.npz")
            worst = max(float(np.abs(got[k][:min(got[k].size, ref[k].size)] -
                                     ref[k][:min(got[k].size, ref[k].size)]).max())
                        for k in ref.files)
            print(f"  {name}: largest difference from dense {worst:.1e} (goal <= 1e-12)")
    d, b = runs["dense"], runs["block-wise"]
    if "seconds" in d and "seconds" in b:
        print(f"block-wise / dense: time {b['seconds'] / d['seconds']:.3f} (goal <= 0.2), "
              f"peak {b['peak'] / d['peak']:.3f} (goal <= 0.25)")


if __name__ == "__main__":
    main()
