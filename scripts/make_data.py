"""Write bondscope's demo checkpoints and test fixtures, deterministically.

Regenerate everything that is committed (about 15 seconds)::

    python scripts/make_data.py

Parts can be written alone with ``--only demo``, ``--only series``,
``--only fixtures``, ``--only charges`` or ``--only mixed``. Large checkpoints (not
committed) are written on
demand::

    python scripts/make_data.py --large out/large            # L = 100, 200, 500
    python scripts/make_data.py --large out/large --sizes 300

They hold the open Heisenberg chain (run "KP-0502") at bond dimension 64,
where the bond dimension saturates (a critical Ising chain would stop near
30 at the same cutoff). L = 500 takes several minutes.

What is written
---------------
data/demo.h5
    The demo checkpoint: run "KP-0417" of the fictional Kestrel Point
    quantum-simulation group, a 64-site open transverse-field Ising chain at
    its critical field g = 1, found by two-site DMRG (`groundstate`) at bond
    dimension 32. Site tensors ``/state/site_{n}`` (left, phys, right),
    n = 0..63; run metadata as attributes of ``/`` and ``/state``.
data/series/kp0417_chi{4,8,16,32}.h5
    The same run at bond dimensions 4, 8, 16 and 32 (attribute ``bond_dim``),
    for comparison and convergence studies.
data/charges/{blocks,packed,labelled,dense}.h5
    Run "KP-0733" of the same fictional group: an 8-site lattice gas holding
    4 particles (a random particle-number-conserving MPS, `blockdata`), once
    in each block-sparse form bondscope reads and once dense; profile any of
    them with ``bondscope profile FILE`` (the block-sparse ones carry their
    local charges) or ``--charges 0,1``.
data/mixed/{thermal_mpo,thermal_purified}.h5
    Run "KP-0861" of the same fictional group: the open 6-site Heisenberg chain
    at inverse temperature beta = 2, exp(-beta H)/Z by exact diagonalisation,
    stored as its exact density-matrix MPO (``/rho/site_{n}``, axes
    (left, ket, bra, right), group attribute ``kind = "density-matrix"``) and as
    the purification with rho^(1/2) as amplitudes (``/purified/site_{n}``,
    attribute ``axes = "left,phys,ancilla,right"``); ``bondscope profile FILE``
    finds the form (docs/mixed.md).
tests/fixtures/*.h5
    Tiny files in several layouts, listed in `FIXTURES`. All but the AKLT file
    hold the exact ground state of the open 6-site critical Ising chain (exact
    diagonalisation, `reference.spin`), whose block entropies are
    `reference.freefermion.ising_entropies(6, 1.0)`; local phase rotations in
    the complex files leave the entropies unchanged.

Files are byte-for-byte reproducible with the same library versions: fixed
seeds, one BLAS thread (threaded reductions may change the last bits), no
HDF5 timestamps.
"""

import argparse
import sys
from pathlib import Path

import h5py
import numpy as np
from threadpoolctl import threadpool_limits

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))

import groundstate  # noqa: E402
from reference import freefermion, spin, states  # noqa: E402

DEMO_SITES = 64
DEMO_FIELD = 1.0
DEMO_BOND_DIM = 32
SERIES_BOND_DIMS = (4, 8, 16, 32)
LARGE_SIZES = (100, 200, 500)
LARGE_BOND_DIM = 64
FIXTURE_SITES = 6

LAB = "Kestrel Point quantum-simulation group (fictional)"

DEMO_SCENARIO = {
    "lab": LAB,
    "run_id": "KP-0417",
    "description": "calibration run of a Rydberg-dressed spin chain tuned to its critical "
    "transverse field; ground state prepared numerically before the quench",
    "model": "transverse-field Ising chain",
    "hamiltonian": "H = -J sum_i X_i X_{i+1} - g sum_i Z_i (Pauli matrices)",
    "boundary": "open",
    "J": 1.0,
    "g": DEMO_FIELD,
}

LARGE_SCENARIO = {
    "lab": LAB,
    "run_id": "KP-0502",
    "description": "long antiferromagnetic chain for throughput tests of the analysis pipeline",
    "model": "Heisenberg chain",
    "hamiltonian": "H = J/4 sum_i (X_i X_{i+1} + Y_i Y_{i+1} + Z_i Z_{i+1}) (Pauli matrices)",
    "boundary": "open",
    "J": 1.0,
}


def _dataset(group, name, data, **kw):
    return group.create_dataset(name, data=data, track_times=False, **kw)


def _new_file(path):
    path.parent.mkdir(parents=True, exist_ok=True)
    return h5py.File(path, "w", track_order=False)


def ising_run(L, bond_dim):
    """DMRG ground state of the demo's open critical Ising chain.

    Parameters
    ----------
    L : int
        Number of sites.
    bond_dim : int
        Largest bond dimension.

    Returns
    -------
    groundstate.GroundState
    """
    return groundstate.two_site_ground_state(
        groundstate.tfim_mpo(L, DEMO_FIELD), bond_dim, energy_tol=1e-10
    )


def write_run(path, run, attrs):
    """Write one DMRG run as a checkpoint with ``/state/site_{n}`` tensors.

    Parameters
    ----------
    path : Path
        Output file.
    run : groundstate.GroundState
        The run to store.
    attrs : dict
        Scenario and run attributes of the file root.
    """
    with _new_file(path) as f:
        f.attrs.update(attrs)
        f.attrs.update(
            {
                "sites": len(run.tensors),
                "energy": run.energy,
                "sweep_energies": np.asarray(run.sweep_energies),
                "max_discarded_weight": run.max_discarded,
                "method": "two-site DMRG (scripts/groundstate.py), seed 0",
            }
        )
        grp = f.create_group("state")
        grp.attrs["axes"] = "left,phys,right"
        for n, A in enumerate(run.tensors):
            _dataset(grp, f"site_{n}", A)


def _demo_attrs(bond_dim):
    exact = freefermion.ising_ground_energy(DEMO_SITES, DEMO_FIELD)
    return {**DEMO_SCENARIO, "bond_dim": bond_dim, "energy_exact": exact}


def _cached_run(runs, bond_dim):
    if bond_dim not in runs:
        runs[bond_dim] = ising_run(DEMO_SITES, bond_dim)
    return runs[bond_dim]


def make_demo(data_dir, runs):
    """Write ``data/demo.h5``; ``runs`` caches DMRG runs by bond dimension."""
    write_run(data_dir / "demo.h5", _cached_run(runs, DEMO_BOND_DIM), _demo_attrs(DEMO_BOND_DIM))


def make_series(data_dir, runs):
    """Write ``data/series/kp0417_chi{D}.h5`` for each bond dimension D."""
    for chi in SERIES_BOND_DIMS:
        write_run(data_dir / "series" / f"kp0417_chi{chi}.h5", _cached_run(runs, chi),
                  _demo_attrs(chi))


def make_large(out_dir, sizes):
    """Write large Heisenberg-chain checkpoints (not committed)."""
    for L in sizes:
        run = groundstate.two_site_ground_state(
            groundstate.xxz_mpo(L, 1.0), LARGE_BOND_DIM, energy_tol=1e-8, sweeps=8
        )
        path = Path(out_dir) / f"heisenberg_L{L}_chi{LARGE_BOND_DIM}.h5"
        write_run(path, run, {**LARGE_SCENARIO, "bond_dim": LARGE_BOND_DIM})
        print(f"{path}: energy {run.energy:.10f}, max discarded {run.max_discarded:.2e}")


def _phased(tensors, rng):
    """Apply a random diagonal phase on each site (a local unitary)."""
    out = []
    for A in tensors:
        phases = np.exp(2j * np.pi * rng.random(A.shape[1]))
        out.append(A * phases[None, :, None])
    return out


def _compound(array, fields, dtype):
    ct = np.dtype([(fields[0], dtype), (fields[1], dtype)])
    out = np.empty(array.shape, dtype=ct)
    out[fields[0]] = array.real
    out[fields[1]] = array.imag
    return out


REFERENCE_NOTE = "reference.freefermion.ising_entropies(6, 1.0): open critical Ising chain"

# name -> (dataset pattern, description); `make_fixtures` writes each
FIXTURES = {
    "mps_basic.h5": ("/run/psi/T{site}", "rank-3 left,phys,right, numbered from 0, float64"),
    "mps_permuted.h5": ("/mps/W{site}", "axes stored phys,right,left (attribute axes)"),
    "mps_groups_one_based.h5": ("/chain/site_{site}/data",
                                "one group per site, from 1, complex128"),
    "mps_float32.h5": ("/tensors/A{site}", "float32"),
    "mps_compound.h5": ("/psi/B{site}", "complex128 as compound (re, im)"),
    "mps_compound_f32.h5": ("/psi/B{site}", "complex64 as compound (real, imag)"),
    "mps_rank2_ends.h5": ("/run/psi/T{site}",
                          "rank-2 ends: first (phys, right), last (left, phys)"),
    "state_flat.h5": ("/wavefunction", "1-D state vector, float64, length 2**6"),
    "state_nd.h5": ("/ground/psi", "N-D state vector (2,)*6, complex64"),
    "aklt_edges.h5": ("/vbs/site{site}", "AKLT with spin-1/2 edges, local dims 2,3,3,3,3,2"),
}


def make_fixtures(fixture_dir):
    """Write the tiny layout fixtures listed in `FIXTURES`."""
    rng = np.random.default_rng(20260417)
    _, psi = spin.ground_state(spin.tfim(FIXTURE_SITES, 1.0))
    chain = states.from_vector(psi, [2] * FIXTURE_SITES)
    complex_chain = _phased(chain, rng)

    def write(name, tensors, pattern, note=REFERENCE_NOTE, **attrs):
        with _new_file(fixture_dir / name) as f:
            f.attrs.update({"layout": FIXTURES[name][1], "reference": note, **attrs})
            for n, A in enumerate(tensors, start=1 if "one_based" in name else 0):
                path = pattern.format(site=n)
                _dataset(f, path, A)

    write("mps_basic.h5", chain, FIXTURES["mps_basic.h5"][0])
    # stored order (phys, right, left) = transpose (1, 2, 0) of (left, phys, right)
    write("mps_permuted.h5", [A.transpose(1, 2, 0) for A in chain],
          FIXTURES["mps_permuted.h5"][0], axes="phys,right,left")
    write("mps_groups_one_based.h5", complex_chain, FIXTURES["mps_groups_one_based.h5"][0])
    write("mps_float32.h5", [A.astype(np.float32) for A in chain], FIXTURES["mps_float32.h5"][0])
    write("mps_compound.h5", [_compound(A, ("re", "im"), np.float64) for A in complex_chain],
          FIXTURES["mps_compound.h5"][0])
    write("mps_compound_f32.h5",
          [_compound(A, ("real", "imag"), np.float32) for A in complex_chain],
          FIXTURES["mps_compound_f32.h5"][0])
    write("mps_rank2_ends.h5", [chain[0][0]] + chain[1:-1] + [chain[-1][..., 0]],
          FIXTURES["mps_rank2_ends.h5"][0])
    with _new_file(fixture_dir / "state_flat.h5") as f:
        f.attrs.update({"layout": FIXTURES["state_flat.h5"][1], "reference": REFERENCE_NOTE})
        _dataset(f, "wavefunction", psi)
    with _new_file(fixture_dir / "state_nd.h5") as f:
        f.attrs.update({"layout": FIXTURES["state_nd.h5"][1], "reference": REFERENCE_NOTE})
        _dataset(f, "ground/psi", states.to_vector(complex_chain).astype(np.complex64)
                 .reshape((2,) * FIXTURE_SITES))
    write("aklt_edges.h5", states.aklt(4), FIXTURES["aklt_edges.h5"][0],
          note="AKLT valence-bond solid with edge spins: ln 2 at every cut")


def make_mixed(data_dir):
    from reference import mixed

    L, beta = 6, 2.0
    rho = mixed.thermal(spin.xxz(L, 1.0), beta)
    forms = (("thermal_mpo.h5", "rho", mixed.mpo_from_dense, {"kind": "density-matrix"}),
             ("thermal_purified.h5", "purified", mixed.purification_from_dense,
              {"axes": "left,phys,ancilla,right"}))
    (data_dir / "mixed").mkdir(parents=True, exist_ok=True)
    for name, group, build, attrs in forms:
        with _new_file(data_dir / "mixed" / name) as f:
            f.attrs["run_id"] = "KP-0861"
            f.attrs["beta"] = beta
            g = f.create_group(group)
            for key, value in attrs.items():
                g.attrs[key] = value
            for i, t in enumerate(build(rho, [2] * L)):
                _dataset(g, f"site_{i}", t)


def main(argv=None):
    """Command line: see the module docstring."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", choices=("demo", "series", "fixtures", "charges", "mixed"))
    parser.add_argument("--large", metavar="DIR", help="write large checkpoints to DIR")
    parser.add_argument("--sizes", type=int, nargs="+", default=list(LARGE_SIZES),
                        help="chain lengths for --large")
    args = parser.parse_args(argv)
    if args.large:
        make_large(args.large, args.sizes)
        return
    data_dir = ROOT / "data"
    runs = {}
    if args.only in (None, "demo"):
        make_demo(data_dir, runs)
    if args.only in (None, "series"):
        make_series(data_dir, runs)
    if args.only in (None, "fixtures"):
        make_fixtures(ROOT / "tests" / "fixtures")
    if args.only in (None, "charges"):
        import blockdata

        blockdata.example_files(data_dir / "charges", run="KP-0733")
    if args.only in (None, "mixed"):
        make_mixed(data_dir)


if __name__ == "__main__":
    # one BLAS thread: reproducible sums, and no oversubscription on small matrices
    with threadpool_limits(limits=1):
        main()
