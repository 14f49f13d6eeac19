"""Unit cells of infinite chains: spectra, transfer eigenvalues, correlation lengths.

Sources: the AKLT state (Affleck, Kennedy, Lieb, Tasaki, PRL 59, 799 (1987));
dense transfer matrices from numpy.linalg.eig and long finite chains of
repeated cells profiled by the validated finite sweep (tests/reference/cells.py).
"""

import math
import warnings

import h5py
import numpy as np
import pytest
from reference import cells

import bondscope
from bondscope._errors import ConvergenceError

EPS = np.finfo(np.float64).eps


def quiet_profile(source, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        return bondscope.profile(source, **kw)


def write_cell(path, cell, name="/ifc/cell/site_{n}"):
    with h5py.File(path, "w") as f:
        for n, a in enumerate(cell):
            f[name.format(n=n)] = a
    return path


def test_aklt_cell():
    # AKLT (Affleck, Kennedy, Lieb, Tasaki 1987): Schmidt values (1/2, 1/2) on every bond,
    # transfer eigenvalues 1 and -1/3 (three times), correlation length 1/ln 3
    p = bondscope.profile(cells.aklt_cell(), spectrum=True)
    assert p.kind == "unit-cell" and p.sites == 1 and p["injective"] is True
    np.testing.assert_allclose(p.cuts[0]["schmidt_values"], [2 ** -0.5] * 2, atol=10 * EPS)
    assert p.cuts[0]["entropy"] == pytest.approx(math.log(2), abs=10 * EPS)
    np.testing.assert_allclose(p["transfer_eigenvalues"], [1, 1 / 3, 1 / 3, 1 / 3], atol=10 * EPS)
    np.testing.assert_allclose(np.abs(p["transfer_phases"][1:]), math.pi, atol=1e-12)
    assert p["correlation_length"] == pytest.approx(1 / math.log(3), rel=1e-13)
    assert p.cuts[0]["resolution_floor"] < 1e-7


CELL_CASES = [
    # one site, real, chi 3
    pytest.param([3], [2], np.float64, id="n1-real"),
    # two sites, mixed bonds and local dims, complex
    pytest.param([4, 6], [2, 3], np.complex128, id="n2-complex"),
    # three sites, mixed everything, real
    pytest.param([2, 5, 3], [3, 2, 4], np.float64, id="n3-real"),
    # four sites, complex
    pytest.param([3, 4, 2, 5], [2, 2, 3, 2], np.complex128, id="n4-complex"),
    # iterative route (chi above the dense limit), two sites
    pytest.param([14, 13], [2, 2], np.float64, id="n2-arnoldi"),
]


@pytest.mark.parametrize("bonds, dims, dtype", CELL_CASES)
def test_random_cells(bonds, dims, dtype):
    rng = np.random.default_rng(len(bonds) * 7 + bonds[0])
    cell = cells.random_cell(bonds, dims, rng, dtype)
    p = quiet_profile(cell, spectrum=True)
    # transfer eigenvalues against the dense matrix's (numpy.linalg.eig, LAPACK geev)
    w = np.linalg.eigvals(cells.dense_transfer(cell))
    w = np.sort(np.abs(w))[::-1]
    k = len(p["transfer_eigenvalues"])
    np.testing.assert_allclose(p["transfer_eigenvalues"], (w / w[0])[:k], atol=1e-10)
    assert p["correlation_length"] == pytest.approx(-len(dims) / math.log(w[1] / w[0]), rel=1e-8)
    # Schmidt values between cells from the dense matrix's eigenvectors (numpy eig)
    ref = cells.dense_outer_schmidt(cell)
    got = np.asarray(p.cuts[-1]["schmidt_values"])
    m = min(got.size, np.count_nonzero(ref > 1e-6))
    np.testing.assert_allclose(got[:m], ref[:m], atol=1e-7)
    # the same state in a scrambled, ill-conditioned, unnormalised gauge: same spectra
    q = quiet_profile(cells.scrambled(cell, rng, scale=3.7), spectrum=True)
    # against the middle of a long finite chain of repeated cells (validated finite sweep)
    repeats = 40
    finite = quiet_profile(cells.repeated_chain(cell, repeats, rng), spectrum=True)
    n = len(dims)
    middle = (repeats // 2) * n
    # the finite chain's ends reach the middle as |lambda_2/lambda_1|^(cells to the end)
    edge = max(1e-9, 100 * (w[1] / w[0]) ** (repeats // 2 - 1))
    for k, cut in enumerate(p.cuts):
        ref = np.asarray(finite.cuts[middle + k].get("schmidt_values"))
        floor = max(cut["resolution_floor"], 1e-12)
        for other in (cut, q.cuts[k]):
            s = np.asarray(other["schmidt_values"])
            m = min(s.size, ref.size)
            np.testing.assert_allclose(s[:m], ref[:m], atol=10 * floor + edge)
            assert other["entropy"] == pytest.approx(finite.cuts[middle + k]["entropy"],
                                                     abs=edge)
        assert cut["bond_dimension"] == bonds[k]


def test_truncation_fields():
    # kept rank and discarded weight per cut as for finite chains; no infidelity for
    # an infinite state (not tracked, not zero)
    p = bondscope.profile(cells.aklt_cell(), bond_dim=1)
    assert p.cuts[0]["kept"] == 1
    assert p.cuts[0]["discarded_weight"] == pytest.approx(0.5, abs=10 * EPS)
    assert p.truncation["infidelity"] is None


def ghz_cell():
    a = np.zeros((2, 2, 2))
    a[0, 0, 0] = a[1, 1, 1] = 1.0
    return [a]


def test_checkpoint_detection_and_inspect(tmp_path):
    path = write_cell(tmp_path / "cell.h5", cells.aklt_cell())
    info = bondscope.inspect(path)
    assert info["kind"] == "unit-cell" and info["unit_cell"] == "detected"
    assert bondscope.profile(path)["correlation_length"] == pytest.approx(1 / math.log(3))
    forced = bondscope.inspect(path, unit_cell=True)
    assert forced["unit_cell"] == "requested"
    # a product-state cell (bond 1) is a cell only when asked
    product = write_cell(tmp_path / "product.h5", [np.ones((1, 2, 1)), np.ones((1, 2, 1))])
    assert bondscope.inspect(product)["kind"] == "mps"
    assert quiet_profile(product, unit_cell=True)["correlation_length"] == 0.0


def test_cli_profile_and_inspect(tmp_path, capsys):
    from bondscope._cli import main

    path = write_cell(tmp_path / "cell.h5", cells.aklt_cell())
    assert main(["inspect", str(path)]) == 0
    assert "detected: first left bond = last right bond != 1" in capsys.readouterr().out
    assert main(["profile", str(path), "--unit-cell", "--json"]) == 0
    assert '"kind": "unit-cell"' in capsys.readouterr().out
    bad = write_cell(tmp_path / "ghz.h5", ghz_cell())
    assert main(["profile", str(bad)]) == 3
    err = capsys.readouterr().err
    assert err.startswith("error:") and "injective" in err and err.count("\n") == 1


BAD_CASES = [
    # bonds that do not close into a cell
    pytest.param([np.ones((4, 2, 3)), np.ones((3, 2, 5))], {"unit_cell": True},
                 bondscope.CheckpointError, "do not close", id="not-closing"),
    # a cat of two product states: degenerate dominant eigenvalue
    pytest.param(ghz_cell(), {}, bondscope.CheckpointError, "not injective", id="ghz"),
    # the iterative eigensolver stopped after one restart
    pytest.param(cells.random_cell([16], [2], np.random.default_rng(5)),
                 {"transfer_iterations": 1}, ConvergenceError, "did not converge",
                 id="no-convergence"),
    # NaN in one tensor
    pytest.param([np.full((2, 2, 2), np.nan), np.ones((2, 2, 2))], {},
                 bondscope.CheckpointError, "NaN", id="nan"),
    # the pre-flight estimate refuses work over the memory limit
    pytest.param(cells.aklt_cell(), {"max_memory": 1}, bondscope.MemoryLimitError,
                 "needs about", id="memory"),
    # charges are not implemented for cells
    pytest.param(cells.aklt_cell(), {"charges": "1,0,-1"}, ValueError, "not implemented",
                 id="charges"),
]


@pytest.mark.parametrize("cell, kw, error, text", BAD_CASES)
def test_bad_cells(cell, kw, error, text, tmp_path):
    with pytest.raises(error, match=text):
        quiet_profile(cell, **kw)
    path = write_cell(tmp_path / "bad.h5", cell)
    before = path.read_bytes()
    with pytest.raises(error, match=text):
        quiet_profile(path, **kw)
    assert path.read_bytes() == before
