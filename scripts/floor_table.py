"""Measured error against the resolution floor, as the Markdown rows of docs/validation.md.

    python scripts/floor_table.py

For each engine and gauge: the largest |computed - reference| over every value of every
cut, the smallest floor, and the smallest ratio floor / error over the cuts (>= 1 means
the floor bounds the error everywhere).  The reference is scipy's SVD of the state the
stored tensors define, contracted in exact rational arithmetic (tests/reference/exact.py).
"""

import sys
import warnings
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT / "src"))

from builders import contract, direct_spectra, random_chain  # noqa: E402
from reference import charges as symmetric  # noqa: E402
from reference.exact import block_regauge, exact_vector, regauge, spectrum_errors  # noqa: E402

from bondscope._charges import parse_charges  # noqa: E402
from bondscope._kernels.amplitudes import amplitude_spectra  # noqa: E402
from bondscope._kernels.chain import chain_spectra  # noqa: E402
from bondscope._kernels.sectors import charge_spectra  # noqa: E402
from bondscope._source import amplitudes_from_array, chain_from_arrays  # noqa: E402


def _row(label, spectra, floors, ref):
    err, floors = spectrum_errors(spectra, ref), np.array(floors)
    ratio = float(np.min(floors / np.maximum(err, 1e-300)))
    return f"| {label} | {err.max():.1e} | {floors.min():.1e} | {ratio:.2g} |"


def chains():
    dims, bonds = [2] * 7, [2, 4, 8, 8, 4, 2]
    for dtype in (np.float64, np.complex128):
        for cond in (1, 1e2, 1e4, 1e6, 1e8, 1e10):
            rng = np.random.default_rng(14)
            t = random_chain(rng, dims, bonds, dtype)
            t = regauge(rng, t, cond) if cond > 1 else t
            res = chain_spectra(chain_from_arrays(t))
            yield _row(f"qr-sweep, {np.dtype(dtype).name}, cond {cond:.0e}", res.spectra,
                       res.floors, direct_spectra(exact_vector(t), dims))
    for cond, precision in ((1, "stored"), (1e2, "stored"), (1e3, "stored"),
                            (1e2, "promote")):
        rng = np.random.default_rng(32)
        t = random_chain(rng, dims, bonds)
        t = [x.astype(np.float32) for x in (regauge(rng, t, cond) if cond > 1 else t)]
        res = chain_spectra(chain_from_arrays(t, precision=precision))
        ref = direct_spectra(exact_vector([x.astype(np.float64) for x in t]), dims)
        yield _row(f"qr-sweep, float32 data, {precision}, cond {cond:.0e}", res.spectra,
                   res.floors, ref)


def charged():
    qubit, n = np.array([[0], [1]]), 8
    charges = parse_charges("0,1", "0").bind([2] * n)
    for gauge in ("block", "mixing"):
        for cond in (1e2, 1e4, 1e6, 1e8):
            rng = np.random.default_rng(5)
            t, labels = symmetric.random_symmetric_chain(rng, [qubit] * n, (0,), (4,), 3)
            t = block_regauge(rng, t, labels, cond) if gauge == "block" else regauge(rng, t, cond)
            res = charge_spectra(chain_from_arrays(t), charges)
            yield _row(f"{res.route}, {gauge} gauge, cond {cond:.0e}", res.spectra, res.floors,
                       direct_spectra(exact_vector(t), [2] * n))


def vectors():
    for sites, route in ((12, "svd"), (12, "gram"), (16, "gram")):
        rng = np.random.default_rng(4)
        bonds = [min(2 ** k, 4, 2 ** (sites - k)) for k in range(1, sites)]
        psi = contract(random_chain(rng, [2] * sites, bonds))
        psi /= np.linalg.norm(psi)
        res = amplitude_spectra(amplitudes_from_array(psi.astype(np.float32)), route=route)
        ref = direct_spectra(psi, [2] * sites)
        ranks = [int(np.count_nonzero(s > f)) for s, f in zip(res.spectra, res.floors)]
        kept = [s[:k] for s, k in zip(res.spectra, ranks)]
        label = f"{route}, float32 rank-4 vector, {sites} qubits (ranks {max(ranks)})"
        yield _row(label, kept, res.floors, [r[:k] for r, k in zip(ref, bonds)])


def main():
    warnings.simplefilter("ignore")
    print("| engine, data, gauge | largest error | smallest floor | min floor / error |")
    print("|---|---|---|---|")
    for rows in (chains(), charged(), vectors()):
        for row in rows:
            print(row, flush=True)


if __name__ == "__main__":
    main()
