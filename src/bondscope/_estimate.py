"""Pre-flight estimates: memory and time a profile will need, from metadata alone."""

import os
import time
from math import prod

import numpy as np

from ._errors import MemoryLimitError

__all__ = ["Estimate", "estimate", "available_memory", "check_memory", "format_bytes"]

# Fixed overhead of the interpreter with numpy/scipy loaded is not counted: the
# estimate is what the profile adds.


def format_bytes(n):
    for unit in ("B", "KiB", "MiB", "GiB", "TiB"):
        if abs(n) < 1024 or unit == "TiB":
            return f"{n:.0f} {unit}" if unit == "B" else f"{n:.1f} {unit}"
        n /= 1024


def available_memory():
    """Bytes this process may still use: MemAvailable, capped by a cgroup limit and by
    the room left under an address-space limit (RLIMIT_AS), if any."""
    avail = None
    try:
        with open("/proc/meminfo") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    avail = int(line.split()[1]) * 1024
    except OSError:
        pass
    if avail is None:
        try:
            avail = os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
        except (ValueError, OSError, AttributeError):
            return None
    for path in ("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory/memory.limit_in_bytes"):
        try:
            with open(path) as f:
                text = f.read().strip()
            if text != "max" and int(text) < 2**60:
                used = _cgroup_usage(path)
                avail = min(avail, int(text) - used)
        except (OSError, ValueError):
            continue
    room = _address_space_room()
    if room is not None:
        avail = min(avail, room)
    return max(avail, 0)


def _address_space_room():
    """Bytes left under a soft RLIMIT_AS (None when unlimited or unknown)."""
    try:
        import resource

        soft = resource.getrlimit(resource.RLIMIT_AS)[0]
        if soft == resource.RLIM_INFINITY:
            return None
        with open("/proc/self/statm") as f:
            return soft - int(f.read().split()[0]) * resource.getpagesize()
    except (ImportError, OSError, ValueError):
        return None


def _cgroup_usage(limit_path):
    usage = limit_path.replace("memory.max", "memory.current").replace(
        "limit_in_bytes", "usage_in_bytes")
    try:
        with open(usage) as f:
            return int(f.read().strip())
    except (OSError, ValueError):
        return 0


class Estimate:
    """What a profile will cost: ``memory`` (bytes), ``flops`` and a rough ``seconds``."""

    def __init__(self, memory, flops, detail):
        self.memory, self.flops, self.detail = int(memory), float(flops), detail

    @property
    def seconds(self):
        return self.flops / _flop_rate()

    def to_dict(self):
        return {"memory_bytes": self.memory, "flops": self.flops,
                "seconds": round(self.seconds, 3), "detail": self.detail}


_RATE = []


def _flop_rate():
    """Measured matrix-multiply rate of this machine (flop/s), once per process.

    Notes
    -----
    One warm-up and two timed 256 x 256 products: a few milliseconds, which
    keeps ``bondscope inspect`` quick (scripts/bench.py startup).
    """
    if not _RATE:
        n = 256
        a = np.random.default_rng(0).standard_normal((n, n))
        a @ a
        t = time.perf_counter()
        for _ in range(2):
            a @ a
        dt = max(time.perf_counter() - t, 1e-6)
        # factorisations run well below the multiply peak; 1/4 is common practice
        _RATE.append(2 * 2 * n**3 / dt / 4)
    return _RATE[0]


def estimate(src, route=None, truncating=False, charges=False, disentangle=False):
    """Memory and work of profiling ``src`` (a ChainSource or AmplitudeSource).

    With ``charges`` (or a block-sparse source) the charge-resolved routes'
    costs: :func:`bondscope._kernels.sectors.block_estimate` for block
    sources; for dense MPS the any-gauge charge sweep's (the worst case; a
    dense chain found to be block structured costs less); state vectors as
    the svd route (one block of each cut at a time).

    Notes
    -----
    MPS: two sweeps may run at once, each holding a site tensor as read (plus
    the stored copy when it is converted or transposed), its product with a
    bond matrix, and a few bond matrices; plus the in-memory part of the bond
    store (at most its budget, ``_kernels.store.STORE_BYTES``); truncation tracking adds
    two tensor-sized blocks.
    Work sums d chi_l chi_r (chi_l + chi_r) per site and chi^3 per bond SVD.
    Density matrices and purifications: the MPS sweep over the merged middle
    axes plus :func:`bondscope._kernels.mixed.mixed_cost` (the Rényi-2
    environments and, with ``disentangle``, the per-cut optimisation).
    State vectors: the larger of the read (the amplitudes, plus the stored
    array while it is converted) and the computation.  gram holds the state,
    the middle reduced density matrix while it is diagonalised, and the next
    matrix with its partial trace; svd the state and one reshaped copy.
    Truncation tracking adds three state-sized arrays (the normalised copy, the
    block being decomposed and its right singular vectors).  Checked against
    measured peaks by ``scripts/bench.py``.

    Both add the source's ``read_buffer`` (HDF5 chunk decompression and (re, im)
    combination, :mod:`bondscope._readcost`) to each read; the figure is the
    estimate for one checkpoint, so ``detail["read_buffer_bytes"]`` and
    ``memory`` are per checkpoint (a batch running W at once needs W times).
    """
    from ._kernels.amplitudes import gram_matrix_sizes
    from ._kernels.store import resident_bytes

    item = np.dtype(src.compute_dtype).itemsize
    stored = np.dtype(src.dtype).itemsize
    cplx = 4.0 if np.dtype(src.compute_dtype).kind == "c" else 1.0
    if hasattr(src, "bond_sectors"):
        from ._kernels.sectors import block_estimate

        memory, flops, detail = block_estimate(src)
        return Estimate(memory, flops * cplx, detail)
    if src.kind == "unit-cell":
        from ._kernels.cell import cell_estimate

        memory, flops, detail = cell_estimate(src)
        return Estimate(memory, flops * cplx, detail)
    if src.kind != "state-vector":
        shapes = src.shapes
        tensor = max(prod(s) for s in shapes) * item
        raw = max(prod(s) for s in shapes) * stored
        bond = max(max(s[0], s[2]) for s in shapes) ** 2 * item
        store = resident_bytes(s[0] ** 2 * item for s in shapes)
        memory = 2 * (2 * tensor + raw + 3 * bond) + store + (2 * tensor if truncating else 0)
        flops = sum(2 * 2 * s[0] * s[1] * s[2] * (s[0] + s[2]) for s in shapes)
        flops += sum(10 * s[2] ** 3 for s in shapes[:-1])
        flops *= 2 if truncating else 1
        if charges:
            from ._kernels.sectors import CHARGE_SWEEP_TENSORS, CHARGE_SWEEP_WORK

            memory += CHARGE_SWEEP_TENSORS * tensor
            flops *= CHARGE_SWEEP_WORK
        buffer = getattr(src, "read_buffer", 0)
        memory += 2 * buffer            # one read in flight per sweep
        detail = {"largest_tensor_bytes": tensor, "bond_matrix_bytes": bond,
                  "read_buffer_bytes": buffer}
        if src.kind != "mps":
            from ._kernels.mixed import mixed_cost

            more, work, extra = mixed_cost(src, disentangle)
            memory, flops = max(memory, more + 2 * tensor + 2 * buffer), flops + work
            detail.update(extra)
    else:
        dims = src.local_dims
        total = prod(dims)
        state = total * item
        left = 1
        best = total
        for d in dims[:-1]:
            left *= d
            best = min(best, max(left, total // left))
        # the read: the amplitudes, the stored array while it is converted, and the
        # NaN/Inf check's boolean mask
        buffer = getattr(src, "read_buffer", 0)
        read = state + (total * stored if stored != item else 0) + total + buffer
        work = 128 * best * item        # LAPACK workspace and the values, O(n)
        if route == "gram" and not charges:
            lefts, rights = gram_matrix_sizes(dims)
            rest = sorted(lefts[1:2] + rights[:1], reverse=True)
            second = rest[0] if rest else 0
            memory = max(read, state + (lefts[0] + second + second // 4) * item + work)
            flops = 2 * (2 * total * best) + 2 * 4 * best ** 3 / 3
        else:
            memory = max(read, 2 * state + work)
            flops = sum(4 * min(l, total // l) ** 2 * max(l, total // l)
                        for l in _left_dims(dims))
        if truncating:
            memory += 3 * state
            flops += 4 * total * best
        detail = {"state_bytes": state, "middle_matrix": [total // best, best],
                  "read_buffer_bytes": buffer}
    return Estimate(memory, flops * cplx, detail)


def _left_dims(dims):
    left = 1
    for d in dims[:-1]:
        left *= d
        yield left


def check_memory(est, max_memory=None):
    """Refuse (MemoryLimitError) when the estimate exceeds max_memory or what is available."""
    limit, what = max_memory, "--max-memory"
    if limit is None:
        limit, what = available_memory(), "available memory"
    if limit is not None and est.memory > limit:
        buffer = est.detail.get("read_buffer_bytes", 0)
        if 2 * buffer >= est.memory:
            raise MemoryLimitError(
                f"profiling needs about {format_bytes(est.memory)} but {what} is "
                f"{format_bytes(limit)}: {format_bytes(buffer)} of it for a chunk HDF5 "
                "decompresses whole; rewrite the checkpoint with smaller chunks (h5repack "
                "-l CHUNK=...) or raise --max-memory")
        raise MemoryLimitError(
            f"profiling needs about {format_bytes(est.memory)} but {what} is "
            f"{format_bytes(limit)}; free memory, raise --max-memory, use a machine with more "
            "memory, or (state vectors) profile a smaller state")
