"""Speed and memory figures of bondscope, each printed as a ratio.

Every measurement runs in a fresh child process of this script (same
interpreter, same environment), one after the other, and reports its wall time
and its peak resident memory (``VmHWM`` of /proc/self/status) above the child's
resident memory after imports.  Ratios of measurements taken
side by side in one run hold on a noisy, shared machine where absolute times
do not.

Sub-commands, one per figure (docs/performance.md has the measured values)::

    python scripts/bench.py mps      [--sites 128] [--chi 512] [--dtype float64]
    python scripts/bench.py memory   [--sites 128] [--chi 512] [--limit-fraction 0.5]
    python scripts/bench.py state    [--qubits 22 24] [--dtype complex128] [--no-successive]
    python scripts/bench.py startup
    python scripts/bench.py mutual   [--sites 16] [--chi 32] [--local-dim 2] [--only-first]

``mps``: ``bondscope.profile(path)`` against (a) the bare LAPACK calls it needs
on the same shapes (one QR per site per sweep and one values-only SVD per bond,
in memory, only the calls timed) and (b) the in-memory script a user would
write (load every tensor, QR sweep to canonical form, SVD sweep with singular
vectors); also the peak memory of each over the checkpoint's size.
``memory``: peak memory over file size for the profile (at L and L/2) and the
in-memory script, and both run under an address-space limit (RLIMIT_AS) that
leaves room for only a fraction of the file.
``state``: the gram route on all cuts against one values-only SVD of the
middle cut and a successive-SVD sweep; peak memory and the pre-flight
estimate over the state's size; the refusal of a state that will not fit.
``mutual``: all-pairs mutual information against one profile of the same
checkpoint, at (L, chi), (2L, chi) and (L, 2chi): the time ratios test the
claimed O(N^2 chi^3) growth.
``startup``: ``bondscope --help`` and ``bondscope inspect`` import no scipy,
numba, matplotlib or dask; their wall time against a bare ``import numpy``.
"""

import argparse
import json
import os
import subprocess
import sys
import tempfile
import textwrap
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("scipy", "numba", "matplotlib", "dask")

# Prologue of every child: imports, then the baseline for the memory figure.
_PROLOGUE = """
import json, resource, sys, time
import numpy as np, scipy.linalg, h5py
import bondscope, bondscope._pipeline, bondscope._kernels.chain, bondscope._checkpoint
def rss():
    # VmHWM: this process image's peak resident set.  (ru_maxrss would also count the
    # parent's resident set inherited through fork, which survives exec on Linux.)
    with open("/proc/self/status") as f:
        return next(int(l.split()[1]) * 1024 for l in f if l.startswith("VmHWM:"))
with open("/proc/self/statm") as f:
    base = int(f.read().split()[1]) * resource.getpagesize()   # resident now
t0 = time.perf_counter()
"""
_EPILOGUE = """
print(json.dumps({"seconds": time.perf_counter() - t0, "peak": rss() - base,
                  "extra": globals().get("extra")}))
"""


BLAS_ENV = {}


def child(body, env=None, limit=None):
    """Run ``body`` after the prologue in a fresh interpreter; its JSON report.

    The child's BLAS thread variables are those of ``--blas-threads`` when given.
    """
    code = _PROLOGUE + textwrap.dedent(body) + _EPILOGUE
    if limit is not None:
        code = ("import resource\nresource.setrlimit(resource.RLIMIT_AS, "
                f"({limit}, {limit}))\n") + code
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          env={**os.environ, "PYTHONPATH": str(ROOT / "src"), **BLAS_ENV,
                               **(env or {})})
    if proc.returncode != 0:
        tail = proc.stderr.strip().splitlines()[-1:] or ["(no message)"]
        return {"failed": tail[0]}
    return json.loads(proc.stdout.strip().splitlines()[-1])


def write_mps(path, sites, chi, dtype, seed=0, d=2):
    """A random non-canonical MPS, local dimension d (qubits by default), bonds
    min(d^i, d^(N-i), chi), one dataset per site.

    Entries have variance 1/(d chi_right), which keeps the norm near 1 on average.
    """
    import h5py

    rng = np.random.default_rng(seed)
    bonds = [1] + [min(d**i, d**(sites - i), chi) for i in range(1, sites)] + [1]
    with h5py.File(path, "w") as f:
        for i in range(sites):
            shape = (bonds[i], d, bonds[i + 1])
            t = rng.standard_normal(shape)
            if np.dtype(dtype).kind == "c":
                t = (t + 1j * rng.standard_normal(shape)) / np.sqrt(2)
            f.create_dataset(f"/psi/T{i}", data=(t / np.sqrt(d * shape[2])).astype(dtype))
    return bonds


PROFILE = """
from bondscope import profile
import warnings
warnings.simplefilter("ignore")
prof = profile(PATH, **OPTS)
extra = {"entropy_mid": float(prof.entropies[len(prof.entropies) // 2])}
"""

# (a) the LAPACK floor: the engine's factorisations on the same shapes, in memory;
# only the calls are timed (their inputs are prepared outside the clock).
FLOOR = """
from scipy.linalg import lapack, svdvals
dtype = np.dtype(DTYPE)
rng = np.random.default_rng(1)
geqrf = lapack.get_lapack_funcs("geqrf", dtype=dtype)
inputs, lwork = {}, {}
def prepared(kind, m, n):
    if (kind, m, n) not in inputs:
        x = rng.standard_normal((m, n))
        inputs[kind, m, n] = np.asfortranarray(x + 1j * x[::-1] if dtype.kind == "c" else x,
                                               dtype=dtype)
        if kind == "qr":
            lwork[m, n] = max(int(geqrf(inputs[kind, m, n].copy(order="F"),
                                        lwork=-1)[2][0].real), 1)
    return inputs[kind, m, n].copy(order="F")
spent = 0.0
for kind, m, n in CALLS:
    a = prepared(kind, m, n)
    t = time.perf_counter()
    if kind == "qr":
        geqrf(a, lwork=lwork[m, n], overwrite_a=1)
    else:
        svdvals(a, overwrite_a=True, check_finite=False)
    spent += time.perf_counter() - t
extra = {"lapack_seconds": spent}
"""


def lapack_calls(shapes):
    """The (kind, rows, columns) of every QR and bond SVD the engine does on ``shapes``."""
    calls, k, right = [], 1, [None] * len(shapes)
    for i in range(len(shapes) - 1, 0, -1):        # right-to-left: QR of (A_i L)^T
        l, d, _ = shapes[i]
        calls.append(("qr", d * k, l))
        k = right[i] = min(d * k, l)
    k = 1
    for i in range(len(shapes) - 1):               # left-to-right: QR of R A_i, bond SVD
        _, d, r = shapes[i]
        calls.append(("qr", k * d, r))
        k = min(k * d, r)
        calls.append(("svd", k, right[i + 1]))
    return calls


# (b) the script a user would write: everything in memory, canonical form by QR,
# then an SVD sweep with singular vectors.
TEXTBOOK = """
with h5py.File(PATH, "r") as f:
    a = [f[f"/psi/T{i}"][()] for i in range(len(f["psi"]))]
n = len(a)
for i in range(n - 1):
    l, d, r = a[i].shape
    q, rr = np.linalg.qr(a[i].reshape(l * d, r))
    a[i] = q.reshape(l, d, -1)
    a[i + 1] = np.tensordot(rr, a[i + 1], axes=(1, 0))
spectra = [None] * (n - 1)
for i in range(n - 1, 0, -1):
    l, d, r = a[i].shape
    u, s, vh = np.linalg.svd(a[i].reshape(l, d * r), full_matrices=False)
    spectra[i - 1] = s / np.linalg.norm(s)
    a[i] = vh.reshape(-1, d, r)
    a[i - 1] = np.tensordot(a[i - 1], u * s, axes=(2, 0))
p = spectra[n // 2 - 1] ** 2
extra = {"entropy_mid": float(-(p[p > 0] * np.log(p[p > 0])).sum())}
"""


def _fill(body, **values):
    for k, v in values.items():
        body = body.replace(k, repr(v))
    return body


def _line(name, rep, ref=None, size=None):
    if "failed" in rep:
        return f"  {name:<34} failed: {rep['failed']}"
    text = f"  {name:<34} {rep['seconds']:8.2f} s"
    if "peak" in rep:
        text += f"   peak {rep['peak'] / 2**20:8.1f} MiB"
    if size and "peak" in rep:
        text += f" = {rep['peak'] / size:5.2f} x size"
    if ref is not None and "seconds" in ref:
        text += f"   time ratio {rep['seconds'] / ref['seconds']:.2f}"
    return text


def _mps_file(args, tmp):
    path = os.path.join(tmp, f"mps-{args.sites}-{args.chi}-{args.dtype}.h5")
    bonds = write_mps(path, args.sites, args.chi, args.dtype)
    shapes = [(bonds[i], 2, bonds[i + 1]) for i in range(args.sites)]
    size = os.path.getsize(path)
    print(f"random MPS: L = {args.sites}, chi = {args.chi}, {args.dtype}, "
          f"file {size / 2**20:.1f} MiB")
    return path, shapes, size


def cmd_mps(args):
    with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
        path, shapes, size = _mps_file(args, tmp)
        floor = child(_fill(FLOOR, CALLS=lapack_calls(shapes), DTYPE=args.dtype))
        prof = child(_fill(PROFILE, PATH=path, OPTS={}))
        seq = child(_fill(PROFILE, PATH=path, OPTS={"threads": 1}))
        book = child(_fill(TEXTBOOK, PATH=path))
    lapack = {"seconds": floor["extra"]["lapack_seconds"]} if "extra" in floor else floor
    print(_line("(a) LAPACK calls only", lapack))
    print(_line("(b) in-memory textbook script", book, size=size))
    print(_line("bondscope.profile(path)", prof, size=size))
    print(_line("bondscope.profile(path, threads=1)", seq, size=size))
    if "seconds" in prof and "seconds" in lapack and "seconds" in book:
        print(f"profile / (a) = {prof['seconds'] / lapack['seconds']:.2f}   (goal <= 1.15)")
        print(f"profile / (b) = {prof['seconds'] / book['seconds']:.2f}   (goal <= 0.85)")
        print(f"peak / file: profile {prof['peak'] / size:.3f}, textbook "
              f"{book['peak'] / size:.3f}   (goal <= 0.25, textbook >= 1)")
        same = abs(prof["extra"]["entropy_mid"] - book["extra"]["entropy_mid"])
        print(f"middle-cut entropy, profile - textbook: {same:.1e}")


def cmd_memory(args):
    with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
        path, _, size = _mps_file(args, tmp)
        small = _mps_file(argparse.Namespace(**{**vars(args), "sites": args.sites // 2}),
                          tmp)
        prof = child(_fill(PROFILE, PATH=path, OPTS={}))
        half = child(_fill(PROFILE, PATH=small[0], OPTS={}))
        book = child(_fill(TEXTBOOK, PATH=path))
        base = child("extra = {'vm': int(open('/proc/self/statm').read().split()[0]) "
                     "* resource.getpagesize()}")
        limit = base["extra"]["vm"] + int(args.limit_fraction * size)
        # one lane: each thread that calls the BLAS reserves its own buffers, which count
        # against an address-space limit although they are barely touched
        capped = child(_fill(PROFILE, PATH=path, OPTS={"threads": 1}), limit=limit)
        capped_book = child(_fill(TEXTBOOK, PATH=path), limit=limit)
    print(_line("profile", prof, size=size))
    print(_line(f"profile, half the sites (L = {args.sites // 2})", half, size=small[2]))
    print(_line("textbook", book, size=size))
    print(f"address-space limit: imports + {args.limit_fraction:.2f} x file "
          f"= {limit / 2**20:.0f} MiB")
    print(_line("profile (threads=1) under the limit", capped, size=size))
    print(_line("textbook under the limit", capped_book, size=size))


STATE_PROFILE = PROFILE + """
extra["estimate"] = bondscope._estimate.estimate(
    bondscope._checkpoint.open_source(PATH), "gram").memory
"""

MIDDLE_SVD = """
from scipy.linalg import svdvals
with h5py.File(PATH, "r") as f:
    psi = f["psi"][()]
n = psi.size
m = 1 << ((n.bit_length() - 1) // 2)
t0 = time.perf_counter()
svdvals(psi.reshape(m, n // m), overwrite_a=True, check_finite=False)
"""

SUCCESSIVE = """
with h5py.File(PATH, "r") as f:
    rest = f["psi"][()]
n = rest.size.bit_length() - 1
t0 = time.perf_counter()
rest = rest.reshape(1, -1)
for cut in range(1, n):
    u, s, vh = np.linalg.svd(rest.reshape(rest.shape[0] * 2, -1), full_matrices=False)
    rest = s[:, None] * vh
"""

REFUSE = """
import bondscope._checkpoint as ck
from bondscope import MemoryLimitError
reads = []
src = ck.open_source(PATH)
est = bondscope._estimate.estimate(src, "gram").memory
src.close()
try:
    bondscope.profile(PATH, max_memory=est - 1)
    extra = {"refused": False}
except MemoryLimitError as exc:
    extra = {"refused": True, "message": str(exc)}
"""


def cmd_state(args):
    import h5py

    for q in args.qubits:
        with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
            path = os.path.join(tmp, f"state-{q}.h5")
            rng = np.random.default_rng(q)
            psi = rng.standard_normal(2**q)
            if np.dtype(args.dtype).kind == "c":
                psi = psi + 1j * rng.standard_normal(2**q)
            psi = (psi / np.linalg.norm(psi)).astype(args.dtype)
            with h5py.File(path, "w") as f:
                f.create_dataset("psi", data=psi)
            size = psi.nbytes
            del psi
            print(f"state vector: 2^{q} amplitudes, {args.dtype}, {size / 2**20:.0f} MiB")
            prof = child(_fill(STATE_PROFILE, PATH=path, OPTS={"route": "gram"}))
            svd = child(_fill(MIDDLE_SVD, PATH=path))
            succ = None if args.no_successive else child(_fill(SUCCESSIVE, PATH=path))
            refuse = child(_fill(REFUSE, PATH=path))
        print(_line("one values-only SVD, middle cut", svd))
        if succ:
            print(_line("successive-SVD sweep", succ, ref=svd))
        print(_line("profile, gram route, all cuts", prof, ref=svd, size=size))
        if "extra" in prof:
            print(f"  pre-flight estimate {prof['extra']['estimate'] / size:.2f} x size, "
                  f"measured peak {prof['peak'] / size:.2f} x size (goal <= 2.5)")
        if succ and "seconds" in succ and "seconds" in prof:
            print(f"  successive / profile = {succ['seconds'] / prof['seconds']:.1f}  "
                  "(goal >= 5)")
        if "extra" in refuse:
            print(f"  max_memory = estimate - 1 byte: refused={refuse['extra']['refused']} "
                  f"in {refuse['seconds']:.2f} s")


MUTUAL = """
import warnings
warnings.simplefilter("ignore")
cpu = time.process_time()
m = bondscope.mutual_information(PATH, reorder=False)
extra = {"max_site_entropy": max(m.site_entropies), "cpu": time.process_time() - cpu}
"""


def cmd_mutual(args):
    """All pairs against one profile of the same checkpoint, at (N, chi), (2N, chi), (N, 2chi)."""
    sizes = [(args.sites, args.chi), (2 * args.sites, args.chi), (args.sites, 2 * args.chi)]
    if args.only_first:
        sizes = sizes[:1]
    base = None
    for sites, chi in sizes:
        with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
            path = os.path.join(tmp, f"mutual-{sites}-{chi}.h5")
            write_mps(path, sites, chi, "float64", d=args.local_dim)
            size = os.path.getsize(path)
            prof = child(_fill(PROFILE, PATH=path, OPTS={}))
            mut = child(_fill(MUTUAL, PATH=path))
        print(f"random MPS: L = {sites}, chi = {chi}, d = {args.local_dim}, "
              f"file {size / 2**20:.1f} MiB")
        print(_line("profile", prof, size=size))
        print(_line("mutual (all pairs, no reordering)", mut, ref=prof, size=size))
        if "seconds" not in mut:
            continue
        # on a shared machine the wall time includes waiting for a core; CPU time does not
        print(f"  mutual CPU time {mut['extra']['cpu']:.2f} s "
              f"({mut['extra']['cpu'] / mut['seconds']:.2f} cores on average)")
        if base is None:
            base = (sites, chi, mut["seconds"])
        else:
            n0, c0, t0 = base
            print(f"  time / time at (L = {n0}, chi = {c0}) = {mut['seconds'] / t0:.2f}  "
                  f"(claim O(N^2 chi^3): {(sites / n0) ** 2 * (chi / c0) ** 3:.0f})")


def cmd_startup(args):
    import h5py

    with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
        path = os.path.join(tmp, "small.h5")
        with h5py.File(path, "w") as f:
            for i, shape in enumerate([(1, 2, 2), (2, 2, 2), (2, 2, 1)]):
                f.create_dataset(f"/psi/T{i}", data=np.ones(shape))
        probe = ("import sys, time; t = time.perf_counter(); {run}; "
                 "sys.stdout.flush(); print('\\n' + repr((time.perf_counter() - t, sorted("
                 "m for m in sys.modules if m.split('.')[0] in " + repr(HEAVY) + "))))")
        runs = {
            "import numpy": "import numpy",
            "import numpy, h5py": "import numpy, h5py",
            "bondscope --help": ("from bondscope._cli import main\n"
                                 "try: main(['--help'])\nexcept SystemExit: pass"),
            "bondscope inspect small.h5": f"from bondscope._cli import main; "
                                          f"main(['inspect', {path!r}])",
        }
        env = {**os.environ, "PYTHONPATH": str(ROOT / "src")}
        times = {}
        for name, run in runs.items():
            best = None
            for _ in range(args.repeat):
                out = subprocess.run([sys.executable, "-c", probe.format(run=run)],
                                     capture_output=True, text=True, env=env, check=True)
                seconds, heavy = eval(out.stdout.strip().splitlines()[-1])
                best = seconds if best is None else min(best, seconds)
            times[name] = best
            print(f"  {name:<28} {best * 1e3:7.1f} ms   heavy modules imported: "
                  f"{', '.join(heavy) or 'none'}")
        ref = times["import numpy, h5py"]
        for name in ("bondscope --help", "bondscope inspect small.h5"):
            print(f"  {name} / import numpy, h5py = {times[name] / ref:.2f}")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--dir", help="directory for the generated checkpoints (default: "
                                      "the system temporary directory)")
    parser.add_argument("--blas-threads", type=int,
                        help="set OPENBLAS/OMP/MKL_NUM_THREADS in every child (default: "
                             "inherit the environment)")
    sub = parser.add_subparsers(dest="cmd", required=True)
    for name in ("mps", "memory"):
        p = sub.add_parser(name)
        p.add_argument("--sites", type=int, default=128)
        p.add_argument("--chi", type=int, default=512)
        p.add_argument("--dtype", default="float64", choices=("float64", "complex128",
                                                              "float32", "complex64"))
        if name == "memory":
            p.add_argument("--limit-fraction", type=float, default=0.5,
                           help="address-space room above the imports, as a fraction of "
                                "the file size")
    p = sub.add_parser("state")
    p.add_argument("--qubits", type=int, nargs="+", default=[22, 24])
    p.add_argument("--dtype", default="complex128", choices=("float64", "complex128"))
    p.add_argument("--no-successive", action="store_true",
                   help="skip the successive-SVD sweep (minutes at 2^24)")
    p = sub.add_parser("mutual")
    p.add_argument("--sites", type=int, default=16)
    p.add_argument("--chi", type=int, default=32)
    p.add_argument("--local-dim", type=int, default=2)
    p.add_argument("--only-first", action="store_true",
                   help="measure (sites, chi) only, not the doubled sizes")
    p = sub.add_parser("startup")
    p.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args(argv)
    if args.blas_threads:
        BLAS_ENV.update({v: str(args.blas_threads) for v in
                         ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")})
        print(f"BLAS threads in every child: {args.blas_threads}")
    {"mps": cmd_mps, "memory": cmd_memory, "state": cmd_state, "startup": cmd_startup,
     "mutual": cmd_mutual}[args.cmd](args)


if __name__ == "__main__":
    main()
