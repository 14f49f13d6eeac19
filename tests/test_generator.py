"""The ground-state generator (scripts/groundstate.py) and the data it wrote.

DMRG runs are checked against exact diagonalisation and against the exact
free-fermion solutions (Peschel, J. Phys. A 36, L205 (2003)); the committed
demo checkpoints are checked against the same exact results.
"""

from pathlib import Path

import h5py
import numpy as np
import pytest
from threadpoolctl import threadpool_limits

import bondscope
import groundstate
import make_data
from reference import freefermion, spin, states

EPS = np.finfo(np.float64).eps
ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(autouse=True)
def one_blas_thread():
    # DMRG works on small matrices: one thread is faster and bit-reproducible
    with threadpool_limits(limits=1):
        yield


def mpo_matrix(mpo):
    """Dense matrix of an MPO (small L only)."""
    M = mpo[0][0]  # (right, out, in)
    M = M.transpose(1, 2, 0)  # out, in, right
    for W in mpo[1:]:
        M = np.einsum("abw,wxst->asbtx", M, W)
        a, s, b, t, x = M.shape
        M = M.reshape(a * s, b * t, x)
    return M[:, :, 0]


MPO_CASES = [
    # transverse-field Ising, critical field
    pytest.param(lambda L: groundstate.tfim_mpo(L, 1.0), lambda L: spin.tfim(L, 1.0), id="tfim"),
    # transverse-field Ising, ordered side
    pytest.param(lambda L: groundstate.tfim_mpo(L, 0.3), lambda L: spin.tfim(L, 0.3),
                 id="tfim-0.3"),
    # XX chain
    pytest.param(groundstate.xx_mpo, spin.xx, id="xx"),
    # anisotropic XXZ with J != 1
    pytest.param(lambda L: groundstate.xxz_mpo(L, 0.4, J=1.7), lambda L: spin.xxz(L, 0.4, J=1.7),
                 id="xxz"),
]


@pytest.mark.parametrize("make_mpo, make_sparse", MPO_CASES)
def test_mpo_equals_sparse_hamiltonian(make_mpo, make_sparse):
    # the MPO and the Pauli-string ED builder must be the same operator (common practice)
    L = 7
    np.testing.assert_allclose(mpo_matrix(make_mpo(L)), make_sparse(L).toarray(), atol=10 * EPS)


ED_CASES = [
    # critical Ising, open, L = 12 (ED reference: scipy eigsh)
    pytest.param(groundstate.tfim_mpo(12, 1.0), spin.tfim(12, 1.0), id="tfim-crit"),
    # Heisenberg antiferromagnet, open
    pytest.param(groundstate.xxz_mpo(12, 1.0), spin.xxz(12, 1.0), id="heisenberg"),
    # XX chain, open
    pytest.param(groundstate.xx_mpo(12), spin.xx(12), id="xx"),
]


@pytest.mark.parametrize("mpo, H", ED_CASES)
def test_dmrg_matches_exact_diagonalisation(mpo, H):
    # bond dimension 64 = 2^(L/2) is exact at L = 12: DMRG must reach the ED ground state
    run = groundstate.two_site_ground_state(mpo, 64)
    energy, psi = spin.ground_state(H)
    assert run.energy == pytest.approx(energy, abs=1e3 * EPS * abs(energy))
    assert abs(states.overlap(states.from_vector(psi, [2] * 12), run.tensors)) == pytest.approx(
        1.0, abs=1e-10)
    np.testing.assert_allclose(bondscope.profile(run.tensors).entropies,
                               bondscope.profile(psi, local_dim=2).entropies, atol=1e-9)


def test_dmrg_is_deterministic():
    mpo = groundstate.xxz_mpo(10, 0.5)
    first = groundstate.two_site_ground_state(mpo, 16, seed=3)
    second = groundstate.two_site_ground_state(mpo, 16, seed=3)
    assert first.energy == second.energy
    for a, b in zip(first.tensors, second.tensors):
        np.testing.assert_array_equal(a, b)


def test_dmrg_energy_is_variational_in_bond_dim():
    # the variational energy cannot rise when the manifold grows (Rayleigh-Ritz);
    # allow for the Lanczos tolerance
    mpo = groundstate.xxz_mpo(16, 1.0)
    energies = [groundstate.two_site_ground_state(mpo, chi).energy for chi in (2, 4, 8, 16)]
    assert all(b <= a + 1e-9 for a, b in zip(energies, energies[1:]))
    assert energies[-1] < energies[0]


def xx_chain_check(L, bond_dim, entropy_tol, energy_tol):
    run = groundstate.two_site_ground_state(groundstate.xx_mpo(L), bond_dim, energy_tol=1e-9)
    exact = freefermion.xx_ground_energy(L)
    # variational: never below the exact energy (beyond rounding)
    assert exact - 1e3 * EPS * abs(exact) <= run.energy <= exact + energy_tol
    prof = bondscope.profile(run.tensors)
    assert np.abs(prof.entropies - freefermion.xx_entropies(L)).max() < entropy_tol


def test_dmrg_xx_chain_matches_peschel():
    # L = 64 at bond dimension 64: discarded weight ~1e-9 gives entropies within 1e-5
    # and energy within 1e-6 of the exact free-fermion values (Peschel 2003)
    xx_chain_check(64, 64, entropy_tol=1e-5, energy_tol=1e-6)


@pytest.mark.slow
def test_dmrg_long_xx_chain_matches_peschel():
    # L = 100: central entropy grows as (1/6) ln L (Calabrese & Cardy 2004), so more bonds
    xx_chain_check(100, 96, entropy_tol=1e-5, energy_tol=1e-6)


# --- committed data -------------------------------------------------------------


def test_demo_checkpoint_is_the_critical_ising_ground_state():
    path = ROOT / "data" / "demo.h5"
    with h5py.File(path, "r") as f:
        L, g = int(f.attrs["sites"]), float(f.attrs["g"])
        energy, exact = float(f.attrs["energy"]), float(f.attrs["energy_exact"])
    assert exact == pytest.approx(freefermion.ising_ground_energy(L, g), abs=1e3 * EPS * L)
    assert energy == pytest.approx(exact, abs=1e-9)
    prof = bondscope.profile(path)
    assert prof.sites == L
    np.testing.assert_allclose(prof.entropies, freefermion.ising_entropies(L, g), atol=1e-8)


def test_series_converges_with_bond_dim():
    exact = freefermion.ising_entropies(make_data.DEMO_SITES, make_data.DEMO_FIELD)
    errors, energies = [], []
    for chi in make_data.SERIES_BOND_DIMS:
        path = ROOT / "data" / "series" / f"kp0417_chi{chi}.h5"
        with h5py.File(path, "r") as f:
            assert int(f.attrs["bond_dim"]) == chi
            energies.append(float(f.attrs["energy"]))
        prof = bondscope.profile(path)
        assert prof.bond_dimensions.max() <= chi
        errors.append(np.abs(prof.entropies - exact).max())
    # more bonds: lower variational energy and closer entropies
    assert all(b <= a + 1e-9 for a, b in zip(energies, energies[1:]))
    assert all(b < a for a, b in zip(errors, errors[1:]) if a > 1e-8)


def test_fixtures_are_reproducible(tmp_path):
    # the committed fixtures are what scripts/make_data.py writes now
    make_data.make_fixtures(tmp_path)
    for name in make_data.FIXTURES:
        with h5py.File(tmp_path / name, "r") as new, \
                h5py.File(ROOT / "tests" / "fixtures" / name, "r") as old:
            paths = []
            old.visititems(lambda p, obj: paths.append(p) if isinstance(obj, h5py.Dataset)
                           else None)
            assert paths, name
            for p in paths:
                a, b = old[p][()], new[p][()]
                assert a.dtype == b.dtype and a.shape == b.shape, (name, p)
                if a.dtype.names:
                    a = a[a.dtype.names[0]] + 1j * a[a.dtype.names[1]]
                    b = b[b.dtype.names[0]] + 1j * b[b.dtype.names[1]]
                np.testing.assert_allclose(a, b, atol=1e3 * np.finfo(a.real.dtype).eps)
