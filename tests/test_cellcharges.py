"""Unit cells with U(1) charges: transfer eigenvalues per charge sector.

Sources: the AKLT state (Affleck, Kennedy, Lieb, Tasaki, PRL 59, 799 (1987)), whose
transfer eigenvalue -1/3 is threefold, one per S^z difference -1, 0, 1; the dense
transfer matrix from numpy.linalg.eigvals, whose spectrum is the union of the sectors';
XX cells from the generator scripts/cellstate.py (iTEBD from a Neel state).
"""

import math
import re
import warnings
from pathlib import Path

import cellstate
import h5py
import numpy as np
import pytest
from reference import cells

import bondscope
from bondscope._charges import parse_charges
from bondscope._kernels.cellcharges import bond_charges, charge_gauge, sector_spectra
from bondscope._kernels.transfer import left_map

ROOT = Path(__file__).resolve().parents[1]

EPS = np.finfo(np.float64).eps


def xx_cell(chi=8, steps=300, seed=1):
    """A U(1) XX cell: 300 steps of dt 0.1 from a Neel state, split sector by sector so
    finite-chi symmetry breaking cannot grow out of rounding, in a scrambled gauge."""
    state = cellstate.cell_ground_state(cellstate.trotter_gates(cellstate.xx_bond()), chi,
                                        start=(0, 1), steps=(0.1,), max_steps=steps,
                                        charges=(1, -1))
    a, b = state.tensors
    g = np.random.default_rng(seed).standard_normal((a.shape[0],) * 2)
    return [np.einsum("ij,jsk->isk", g, a), np.einsum("isk,kl->isl", b, np.linalg.inv(g))]


def fixture_cell(chi):
    with h5py.File(ROOT / "tests" / "fixtures" / "cells" / f"xx_chi{chi}.h5", "r") as f:
        return [f[f"cell/site_{k}"][()] for k in (0, 1)]


def quiet_profile(source, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        return bondscope.profile(source, **kw)


def test_sectors_are_the_whole_spectrum():
    # numpy.linalg.eigvals of the dense chi^2 x chi^2 matrix: the sectors' union
    cell = xx_cell()
    charges = parse_charges("0,1").bind([2, 2])
    labels, gauge, residual = bond_charges(cell, charges)
    assert residual < 1e-10
    chi = cell[0].shape[0]
    dense = np.stack([left_map(cell, e.reshape(chi, chi)).reshape(-1)
                      for e in np.eye(chi * chi)], axis=1)
    full = np.linalg.eigvals(dense)
    eta = np.abs(full).max()
    turned = charge_gauge(cell, gauge)
    union = np.concatenate([v for _, v in sector_spectra(turned, labels[0], eta, chi * chi)])
    assert union.size == full.size
    np.testing.assert_allclose(np.sort_complex(union), np.sort_complex(full / eta),
                               atol=1e4 * EPS)


CASES = [
    # AKLT (Affleck et al. 1987), S^z charges: -1/3 once in each of dq = -1, 0, 1
    pytest.param(cells.aklt_cell(), "1,0,-1", {-1: [1 / 3], 0: [1, 1 / 3], 1: [1 / 3]},
                 id="aklt"),
    # generated XX cell, particle number: eigenvalue 1 in dq = 0, dq and -dq alike
    # (complex conjugation maps one sector onto the other: common practice)
    pytest.param(xx_cell(), "0,1", None, id="xx-generated"),
]


@pytest.mark.parametrize("cell, charges, expected", CASES)
def test_transfer_sectors(cell, charges, expected):
    p = quiet_profile(cell, charges=charges, spectrum=True)
    plain = quiet_profile(cell, spectrum=True)
    for cut, ref in zip(p.cuts, plain.cuts):
        # the sectors' values, times sqrt(p(q)), are the bond's spectrum (common practice)
        union = np.concatenate([np.sqrt(s["probability"]) * np.array(s["schmidt_values"])
                                for s in cut["sectors"]])
        np.testing.assert_allclose(np.sort(union)[::-1], ref["schmidt_values"][:union.size],
                                   atol=cut["resolution_floor"])
        assert sum(s["probability"] for s in cut["sectors"]) == pytest.approx(1, abs=1e-12)
        # S = S_num + S_conf (Lukin et al., Science 364, 256 (2019))
        assert cut["number_entropy"] + cut["configurational_entropy"] == \
            pytest.approx(ref["entropy"], abs=1e-10)
    sectors = {s["charge"]: s for s in p["transfer_sectors"]}
    assert sectors[0]["eigenvalues"][0] == pytest.approx(1, abs=1e3 * EPS)
    top = sorted((v for s in sectors.values() for v in s["eigenvalues"]), reverse=True)
    np.testing.assert_allclose(top[:len(p["transfer_eigenvalues"])], p["transfer_eigenvalues"],
                               atol=1e3 * EPS)
    for q, s in sectors.items():
        np.testing.assert_allclose(s["eigenvalues"], sectors[-q]["eigenvalues"],
                                   atol=1e3 * EPS)
        assert s["eigenvalue_error"] < 1e-8
    if expected:
        for q, values in expected.items():
            np.testing.assert_allclose(sectors[q]["eigenvalues"][:len(values)], values,
                                       atol=1e3 * EPS)
        assert sectors[1]["correlation_length"] == pytest.approx(1 / math.log(3), rel=1e-12)


BAD = [
    # the XX fixture at chi 8: 9240 steps let finite-chi U(1) breaking grow (its mixed
    # transfer eigenvalue for a twist of pi is 0.93, not 1), so charges are refused
    pytest.param(fixture_cell(8), "0,1", None, bondscope.CheckpointError, "does not conserve",
                 id="fixture-mixes"),
    # random cell: no symmetry at all
    pytest.param(cells.random_cell([3, 3], [2, 2], np.random.default_rng(4)), "0,1", None,
                 bondscope.CheckpointError, "does not conserve", id="random"),
    # Z_2 parity is not implemented for cells
    pytest.param(xx_cell(), "0,1", "2", ValueError, "not implemented", id="cyclic"),
]


@pytest.mark.parametrize("cell, charges, modulus, error, text", BAD)
def test_refused(cell, charges, modulus, error, text):
    with pytest.raises(error, match=text):
        quiet_profile(cell, charges=charges, modulus=modulus)


CLI = [
    # generated symmetric cell: profiled, the text names the relative bond charges
    pytest.param(xx_cell(), 0, "bond charges relative", id="symmetric"),
    # the fixture that mixes charges: one-line error, exit status 3
    pytest.param(fixture_cell(8), 3, "error: .*does not conserve", id="mixing"),
]


@pytest.mark.parametrize("cell, status, text", CLI)
def test_cli(cell, status, text, tmp_path, capsys):
    from bondscope._cli import main

    path = tmp_path / "cell.h5"
    with h5py.File(path, "w") as f:
        for k, a in enumerate(cell):
            f[f"cell/site_{k}"] = a
    before = path.read_bytes()
    assert main(["profile", str(path), "--charges", "0,1"]) == status
    out = capsys.readouterr()
    assert re.search(text, out.out + out.err)
    assert len((out.err.strip() or "x").splitlines()) == 1 and path.read_bytes() == before
