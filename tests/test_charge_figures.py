"""Charge figures (spectrum by sector, entropy split) and the report's charge section."""

import numpy as np
import pytest

from reference import charges as ref

import bondscope
from bondscope import CheckpointError

pytest.importorskip("matplotlib")


@pytest.fixture(scope="module")
def charged():
    """An exact 12-site Slater determinant (6 particles), profiled with charges and spectra."""
    return bondscope.profile(ref.slater_state(np.ones(11), 6), charges="0,1", spectrum=True)


def test_sector_levels_are_the_documents(charged):
    """One bar per Schmidt value of each sector, at xi = -ln(p lambda^2)."""
    from bondscope._figures.sectors import sectors_figure

    fig = sectors_figure(charged, cut=5)
    ax = fig.axes[0]
    sectors = charged.cuts[4]["sectors"]
    bars = [np.asarray(c.get_segments())[:, 0, 1] for c in ax.collections]
    assert len(bars) == len(sectors)
    for levels, sec in zip(bars, sectors):
        want = -np.log(sec["probability"] * np.square(sec["schmidt_values"]))
        np.testing.assert_allclose(np.sort(levels), np.sort(want), rtol=1e-12)
    # the levels together are the whole spectrum's -ln lambda^2 (common practice)
    whole = -np.log(np.square(charged.cuts[4]["schmidt_values"]))
    np.testing.assert_allclose(np.sort(np.concatenate(bars))[:5], np.sort(whole)[:5],
                               atol=1e-9)


def test_entropy_split_curves(charged):
    from bondscope._figures.entropysplit import entropysplit_figure

    fig = entropysplit_figure(charged)
    lines = {ln.get_label(): ln.get_ydata() for ln in fig.axes[0].lines}
    total = np.array(lines["S_num"]) + np.array(lines["S_conf"])
    np.testing.assert_allclose(total, lines["S"], atol=1e-12)        # S = S_num + S_conf


@pytest.mark.parametrize("kind, kwargs, error, fragment", [
    ("sectors", {"cut": 40}, ValueError, "cut 40 is not one of 1..11"),       # no such cut
    ("sectors", {}, CheckpointError, "--charges Q --spectrum"),               # no sectors
    ("entropysplit", {}, CheckpointError, "no charge sectors"),               # no sectors
])
def test_figure_errors(charged, kind, kwargs, error, fragment):
    plain = bondscope.profile(ref.slater_state(np.ones(11), 6), spectrum=True)
    source = charged if kwargs else plain
    with pytest.raises(error, match=None) as err:
        bondscope.plot(source, kind=kind, **kwargs)
    assert fragment in str(err.value)


def test_report_shows_charge_figures(tmp_path):
    from blockdata import example_files

    inputs = tmp_path / "in"
    example_files(inputs)
    out = tmp_path / "out"
    summary = bondscope.run_batch(str(inputs), str(out), spectrum=True, workers=1)
    assert summary.failed == 0
    charges = {r["source"].rsplit("/", 1)[-1]: r["total_charge"] for r in summary.rows}
    # block-sparse files carry their charges; the dense one was profiled without
    assert charges == {"blocks.h5": 4, "dense.h5": None, "labelled.h5": 4, "packed.h5": 4}
    page = bondscope.write_report(str(out), str(tmp_path / "r.html"))
    text = open(page).read() if not hasattr(page, "read_text") else page.read_text()
    assert "entropy split of" in text and "sector spectrum of" in text
