"""Finite-entanglement scaling of unit-cell series, and the generator's cells against exact results.

Sources: S = (c/6) ln xi + s0 (Calabrese & Cardy, J. Stat. Mech. P06002 (2004));
kappa = 6 / (c (sqrt(12/c) + 1)) (Pollmann, Mukerjee, Turner, Moore, PRL 102, 255701
(2009)); the transverse-field Ising energy (Pfeuty, Ann. Phys. 57, 79 (1970)) and its
half-chain entropy from the corner-transfer-matrix levels eps_l = (2l + 1) eps
(Peschel, J. Stat. Mech. P12005 (2004)).
"""

import math
import warnings
from pathlib import Path

import cellstate
import h5py
import make_cells
import numpy as np
import pytest
from scipy.special import ellipk

import bondscope
from bondscope._analyses.cellscaling import predicted_kappa

ROOT = Path(__file__).resolve().parent.parent
CELLS = ROOT / "data" / "cells"
XX = ROOT / "tests" / "fixtures" / "cells"


def cell_doc(chi, xi, entropies, kind="unit-cell"):
    cuts = [{"position": k + 1, "entropy": s, "bond_dimension": chi}
            for k, s in enumerate(entropies)]
    sites = len(entropies) + (kind != "unit-cell")
    return {"format": "bondscope-profile", "version": 1, "sites": sites,
            "log_base": "e", "kind": kind, "cuts": cuts, "correlation_length": xi}


def critical_series(c, kappa, s0=0.3, chis=(8, 16, 32, 64)):
    return [cell_doc(chi, 0.7 * chi ** kappa, [c / 6 * math.log(0.7 * chi ** kappa) + s0] * 2)
            for chi in chis]


def test_predicted_kappa():
    # Pollmann et al. 2009: kappa = 6 / (c (sqrt(12/c) + 1)); 2.034 for Ising, 1.344 for c = 1
    assert predicted_kappa(0.5) == pytest.approx(6 / (0.5 * (math.sqrt(24) + 1)), rel=1e-15)
    assert predicted_kappa(1.0) == pytest.approx(1.3441, abs=1e-4)


FIT_CASES = [
    # exact Calabrese-Cardy data, c = 1/2 and kappa from Pollmann's formula: critical
    (critical_series(0.5, predicted_kappa(0.5)), "critical", 0.5, None),
    # c = 1
    (critical_series(1.0, predicted_kappa(1.0)), "critical", 1.0, None),
    # entropy and xi saturated (gapped): c ~ 0
    ([cell_doc(chi, 2.4 - 1 / chi, [0.1535 + 1e-6 / chi] * 2) for chi in (4, 8, 16)],
     "gapped", 0.0, None),
    # two runs: c without an error bar
    (critical_series(0.5, 2.0, chis=(8, 16)), "inconclusive", 0.5, None),
    # a finite chain is not a cell
    ([cell_doc(8, 3.0, [0.2, 0.3, 0.2], kind="mps"), cell_doc(16, 5.0, [0.3, 0.4])], None, None,
     "unit-cell profiles"),
    # one run only
    ([cell_doc(8, 3.0, [0.2, 0.3])], None, None, "at least 2"),
    # a product state has no finite positive correlation length
    ([cell_doc(8, 0.0, [0.0, 0.0]), cell_doc(16, 5.0, [0.3, 0.4])], None, None,
     "correlation length"),
]


@pytest.mark.parametrize("docs, verdict, c, error", FIT_CASES)
def test_fit_cell_scaling(docs, verdict, c, error):
    if error:
        with pytest.raises(ValueError, match=error):
            bondscope.fit_cell_scaling(docs)
        return
    res = bondscope.fit_cell_scaling(docs)
    assert res.verdict == verdict, res.reason
    assert res.central_charge == pytest.approx(c, abs=1e-4)
    if verdict == "critical":
        assert res.kappa == pytest.approx(predicted_kappa(c), rel=1e-9)
        assert res.kappa_predicted == pytest.approx(predicted_kappa(c), rel=1e-6)
        assert res.central_charge_error < 1e-9
    if len(docs) == 2:
        assert res.central_charge_error is None and res.kappa_error is None


def quiet(fn, *args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        return fn(*args, **kw)


def gapped_files():
    return sorted(CELLS.glob("kp0912_chi*.h5"), key=lambda p: int(p.stem.split("chi")[1]))


def test_gapped_cells_against_exact_results():
    g = make_cells.GAPPED_FIELD
    # Peschel 2004: half-chain entropy of the paramagnet from eps_l = (2l + 1) eps,
    # eps = pi K(k') / K(k), k = 1/g (our H = -sum XX - g sum Z)
    k = 1 / g
    eps = math.pi * ellipk(1 - k * k) / ellipk(k * k)
    levels = (2 * np.arange(60) + 1) * eps
    exact_s = float(np.sum(np.log1p(np.exp(-levels)) + levels / (np.exp(levels) + 1)))
    xis = []
    for path in gapped_files():
        with h5py.File(path, "r") as f:
            energy, exact = float(f.attrs["energy"]), float(f.attrs["energy_exact"])
            cell = [f[f"cell/site_{n}"][()] for n in (0, 1)]
        # Pfeuty 1970: exact energy per site; first-order Trotter at dt = 1e-3 leaves < 1e-6
        assert exact == pytest.approx(cellstate.tfim_energy(g), abs=1e-12)
        assert energy == pytest.approx(exact, abs=1e-6)
        assert cellstate.cell_energy(cell, cellstate.tfim_bond(g)) == pytest.approx(energy,
                                                                                   abs=1e-12)
        p = quiet(bondscope.profile, path)
        # the two bonds' mean cancels the O(dt) splitting asymmetry of the cell
        if p.bond_dimensions.max() >= 8:
            assert p.entropies.mean() == pytest.approx(exact_s, abs=1e-6)
        xis.append(p["correlation_length"])
    # the exact correlation length 1/ln g (Pfeuty 1970) is approached from below as chi
    # grows (the r^-1/2 prefactor of the order-parameter correlation, from memory, is not
    # a finite sum of exponentials); within 5% at chi 12
    exact_xi = 1 / math.log(g)
    assert all(b > a for a, b in zip(xis, xis[1:])) and xis[-1] < exact_xi
    assert xis[-1] == pytest.approx(exact_xi, rel=0.05)
    assert quiet(bondscope.fit_cell_scaling, gapped_files()).verdict == "gapped"


def test_critical_ising_cells_give_c_one_half():
    # critical transverse-field Ising: c = 1/2 (Calabrese & Cardy 2004) within 0.03 and
    # within the fit's own error bar (measured 0.497 +- 0.021 over chi 8-24); kappa within
    # its error of Pollmann's 2.034
    files = sorted(CELLS.glob("kp0911_chi*.h5"))
    for path in files:
        with h5py.File(path, "r") as f:
            # the self-dual gates at dt = 0.03 are the Ising model up to O(dt^2) ~ 1e-3
            # (common practice); Pfeuty's exact -4/pi
            assert float(f.attrs["energy_exact"]) == pytest.approx(-4 / math.pi, abs=1e-12)
            assert float(f.attrs["energy"]) == pytest.approx(-4 / math.pi, abs=1e-3)
    res = quiet(bondscope.fit_cell_scaling, files)
    assert res.verdict == "critical", res.reason
    assert res.central_charge == pytest.approx(0.5, abs=0.03)
    assert abs(res.central_charge - 0.5) <= res.central_charge_error
    assert abs(res.kappa - predicted_kappa(0.5)) <= res.kappa_error


def test_xx_cells_give_c_one():
    # critical XX chain: c = 1 (Calabrese & Cardy 2004) within 0.03 and within the fit's
    # own error bar, over the whole series chi 8-64 (measured: 0.979 +- 0.029; the U(1)
    # sectors make these small-chi cells scatter more than Ising's); the measured kappa
    # agrees with the one predicted from the fitted c (Pollmann et al. 2009)
    files = sorted(XX.glob("xx_chi*.h5"))
    assert len(files) == 7
    for path in files:
        with h5py.File(path, "r") as f:
            # exact -2/pi; the Trotter step dt = 0.03 leaves O(dt^2) (common practice)
            assert float(f.attrs["energy"]) == pytest.approx(cellstate.xx_energy(), abs=1e-3)
    res = quiet(bondscope.fit_cell_scaling, files)
    assert res.verdict == "critical", res.reason
    assert res.central_charge == pytest.approx(1.0, abs=0.03)
    assert abs(res.central_charge - 1.0) <= res.central_charge_error < 0.05
    assert abs(res.kappa - res.kappa_predicted) <= 2 * math.hypot(res.kappa_error,
                                                                  res.kappa_predicted_error)


def test_cli_fit_plot_and_compare_cells(tmp_path, capsys):
    from bondscope._cli import main

    files = [str(p) for p in gapped_files()]

    def run(*argv):
        code = main(list(argv))
        return code, capsys.readouterr()
    code, out = run("fit", *files, "--quiet")
    assert code == 0 and "verdict         gapped" in out.out, out.err
    code, out = run("plot", "--kind", "cellscaling", *files, "-o", str(tmp_path / "fes.png"),
                    "--quiet")
    assert code == 0 and (tmp_path / "fes.png").stat().st_size > 0, out.err
    code, out = run("plot", "--kind", "convergence", "--against", "bond", *files, "-o",
                    str(tmp_path / "conv.png"), "--quiet")
    assert code == 0 and (tmp_path / "conv.png").stat().st_size > 0, out.err
    code, out = run("compare", *files, "--quiet")
    assert code == 0 and "converged" in out.out, out.err
    code, out = run("fit", files[0], "--quiet")
    assert code == 2 and "at least 2" in out.err


@pytest.mark.slow
def test_cells_are_reproducible(tmp_path):
    # the committed gapped cell is what scripts/make_cells.py writes now
    make_cells.make("gapped", dims=(4,), out=tmp_path)
    with h5py.File(tmp_path / "kp0912_chi4.h5", "r") as new, \
            h5py.File(CELLS / "kp0912_chi4.h5", "r") as old:
        for n in (0, 1):
            np.testing.assert_allclose(new[f"cell/site_{n}"][()], old[f"cell/site_{n}"][()],
                                       atol=1e-12)


def test_batch_and_report_take_cells(tmp_path):
    # cells go through a batch like any checkpoint; the report says why they are not
    # given a finite-chain scaling fit
    files = [str(p) for p in gapped_files()[:2]]
    summary = quiet(bondscope.run_batch, files, tmp_path / "out", workers=1)
    assert [r["kind"] for r in summary.rows] == ["unit-cell", "unit-cell"]
    page = bondscope.write_report(tmp_path / "out", tmp_path / "report.html")
    text = Path(page).read_text()
    assert "unit cell of an infinite chain has no finite-size scaling" in text
