"""Write bondscope's unit-cell demo series and test fixtures, deterministically.

    python scripts/make_cells.py                 # everything (several minutes)
    python scripts/make_cells.py --only gapped   # one part: critical, gapped or xx

What is written
---------------
data/cells/kp0911_chi{8,12,16,24}.h5
    Run "KP-0911" of the fictional Kestrel Point quantum-simulation group:
    the infinite transverse-field Ising chain at its critical field g = 1, as
    two-site cells found by imaginary-time evolution (`cellstate`, the
    self-dual gates `ising_gates`) at growing bond dimension; for
    finite-entanglement scaling (`bondscope fit data/cells/kp0911_chi*.h5`).
data/cells/kp0912_chi{4,6,8,12}.h5
    Run "KP-0912": the same chain in its paramagnetic phase, g = 1.5, whose
    correlation length saturates.
tests/fixtures/cells/xx_chi{8,12,16,24,32,48,64}.h5
    The infinite XX chain (critical, c = 1), for the tests; each bond dimension
    continues from the state of the one before (``warm``).

Each file holds ``/cell/site_0`` and ``/cell/site_1`` (left, phys, right)
and run attributes (model, field, bond_dim, dt, steps, energy per site and
its exact value).  One BLAS thread, fixed seeds.
"""

import argparse
import sys
from pathlib import Path

import cellstate
import h5py
from threadpoolctl import threadpool_limits

ROOT = Path(__file__).resolve().parent.parent
CRITICAL_DIMS = (8, 12, 16, 24)
GAPPED_DIMS = (4, 6, 8, 12)
XX_DIMS = (8, 12, 16, 24, 32, 48, 64)
# the self-dual gates keep g = 1 critical at any step; the O(dt) truncation bias of the
# gate updates sets the last step (measured: c = 0.497 +- 0.021 over chi 8-24)
CRITICAL_STEPS = (0.1, 0.03)
GAPPED_STEPS = (0.1, 0.03, 0.01, 0.003, 0.001)
GAPPED_FIELD = 1.5


def write_cell(path, run, attrs):
    path.parent.mkdir(parents=True, exist_ok=True)
    with h5py.File(path, "w", track_order=True) as f:
        for k, a in enumerate(run.tensors):
            f.create_dataset(f"cell/site_{k}", data=a, track_times=False)
        f.attrs.update({**attrs, "steps": run.steps, "converged": run.converged})


def part(kind):
    """(directory, name prefix, bond dims, gates, steps, bond Hamiltonian, exact energy, attrs)."""
    if kind == "critical":
        return (ROOT / "data" / "cells", "kp0911", CRITICAL_DIMS, cellstate.ising_gates(1.0),
                CRITICAL_STEPS, cellstate.tfim_bond(1.0), cellstate.tfim_energy(1.0),
                {"lab": "Kestrel Point", "run_id": "KP-0911", "model": "transverse-field Ising",
                 "g": 1.0, "description": "infinite chain at its critical field"})
    if kind == "gapped":
        g = GAPPED_FIELD
        return (ROOT / "data" / "cells", "kp0912", GAPPED_DIMS,
                cellstate.trotter_gates(cellstate.tfim_bond(g)), GAPPED_STEPS,
                cellstate.tfim_bond(g), cellstate.tfim_energy(g),
                {"lab": "Kestrel Point", "run_id": "KP-0912", "model": "transverse-field Ising",
                 "g": g, "description": "infinite chain in its paramagnetic phase"})
    return (ROOT / "tests" / "fixtures" / "cells", "xx", XX_DIMS,
            cellstate.trotter_gates(cellstate.xx_bond()), CRITICAL_STEPS, cellstate.xx_bond(),
            cellstate.xx_energy(), {"model": "XX", "start": "Neel"})


def make(kind, dims=None, out=None):
    """Write one part; ``out`` redirects the directory (reproducibility checks)."""
    folder, prefix, all_dims, gates, steps, h, exact, attrs = part(kind)
    run = None
    for chi in dims or all_dims:
        # XX: from a Neel state, each bond dimension warm-started from the last (the slow
        # critical relaxation then takes 4 min at chi 48, not 9)
        run = cellstate.cell_ground_state(gates, chi, steps=steps, max_steps=200000,
                                          start=(0, 1) if kind == "xx" else None,
                                          warm=run if kind == "xx" else None)
        energy = cellstate.cell_energy(run.tensors, h)
        write_cell(Path(out or folder) / f"{prefix}_chi{chi}.h5", run,
                   {**attrs, "bond_dim": chi, "dt": steps[-1], "energy": energy,
                    "energy_exact": exact})
        print(f"{kind} chi {chi}: {run.steps} steps, converged {run.converged}, energy error "
              f"{energy - exact:.3g}", flush=True)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", choices=("critical", "gapped", "xx"))
    args = ap.parse_args(argv)
    with threadpool_limits(limits=1):
        for kind in ([args.only] if args.only else ("gapped", "critical", "xx")):
            make(kind)
    return 0


if __name__ == "__main__":
    sys.exit(main())
