"""Figures: every kind from checkpoints, saved profiles and a batch directory."""

import math
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest

pytest.importorskip("matplotlib")

import bondscope  # noqa: E402
from bondscope import CheckpointError  # noqa: E402
from bondscope._cli import main  # noqa: E402
from bondscope._figures._kinds import plot  # noqa: E402
from bondscope._figures._style import OKABE_ITO, save_figure  # noqa: E402
from bondscope._text import entropy_unit  # noqa: E402
from plotdata import (PNG_MAGIC, ROOT, batch_dir, series_checkpoints, time_checkpoints)
from reference import freefermion, states  # noqa: E402

DEMO = ROOT / "data" / "demo.h5"


@pytest.fixture(scope="module")
def series(tmp_path_factory):
    return series_checkpoints(tmp_path_factory.mktemp("series"))


@pytest.fixture(scope="module")
def timed(tmp_path_factory):
    return time_checkpoints(tmp_path_factory.mktemp("timed"))


@pytest.fixture(scope="module")
def batch(tmp_path_factory):
    return batch_dir(tmp_path_factory.mktemp("batch"))[0]


@pytest.fixture(scope="module")
def bare_profile(tmp_path_factory, series):
    """A saved profile without Schmidt values."""
    path = tmp_path_factory.mktemp("bare") / "bare.json"
    bondscope.profile(series[0]).save(path)
    return path


def _xx_profile(L, base="e", boundary="open"):
    """A profile document of the exact XX chain (Peschel's correlation-matrix method)."""
    scale = 1.0 if base == "e" else 1.0 / math.log(base)
    s = freefermion.xx_entropies(L, boundary) * scale
    return bondscope.Profile.from_dict({
        "format": "bondscope-profile", "version": 1, "sites": L, "kind": "mps",
        "log_base": base, "source": f"xx{L}.h5",
        "cuts": [{"position": l, "entropy": float(v)} for l, v in enumerate(s, 1)]})


# analysis module behind each kind that needs one besides the scaling fit
_ANALYSIS = {"budget": "bondscope._analyses.budget",
             "convergence": "bondscope._analyses.comparison"}


def _needs(kind):
    if kind in _ANALYSIS:
        pytest.importorskip(_ANALYSIS[kind])


def _legend(ax):
    return [t.get_text() for t in ax.get_legend().get_texts()]


# --- every kind renders, from each kind of source ----------------------------------------
KIND_SOURCES = [
    # kind, sources (names resolved below), options
    ("entropy", "demo", {}),                               # one checkpoint, with the fit
    ("entropy", "series", {"renyi": ["2"]}),               # a bond-dimension series + Renyi
    ("entropy", "batch", {}),                              # a batch results directory
    ("spectrum", "demo", {}),                              # checkpoint profiled with spectra
    ("spectrum", "batch", {}),                             # batch profiles hold spectra
    ("budget", "series-last", {"targets": [1e-4, 1e-8]}),  # the best-converged checkpoint
    ("budget", "batch", {}),                               # one panel per batch profile
    ("heatmap", "timed", {}),                              # time series of checkpoints
    ("heatmap", "batch", {}),                              # no times: name order
    ("convergence", "series", {}),                         # against the run's discarded weight
    ("convergence", "batch", {"against": "bond"}),         # against 1/chi
]


def _resolve(name, series, timed, batch):
    return {"demo": [DEMO], "series": series, "series-last": series[-1:], "timed": timed,
            "batch": [batch]}[name]


@pytest.mark.parametrize("kind, which, options", KIND_SOURCES)
def test_every_kind_renders(kind, which, options, series, timed, batch, tmp_path):
    _needs(kind)
    if which == "demo" and not DEMO.is_file():
        pytest.skip("data/demo.h5 not built (scripts/make_data.py)")
    out = tmp_path / f"{kind}.png"
    fig = plot(_resolve(which, series, timed, batch), kind, out, **options)
    assert out.read_bytes()[:8] == PNG_MAGIC
    assert fig.axes and all(ax.has_data() for ax in fig.axes if ax.get_label() != "<colorbar>")


# --- file formats ------------------------------------------------------------------------
def _is_svg(data):
    return ET.fromstring(data).tag.endswith("svg")


FORMATS = [
    # suffix, check of the bytes written
    (".png", lambda b: b[:8] == PNG_MAGIC),   # PNG signature (PNG spec, ISO/IEC 15948, 5.2)
    (".svg", _is_svg),                        # well-formed XML with an <svg> root
    (".pdf", lambda b: b[:5] == b"%PDF-"),    # PDF header (ISO 32000-1, 7.5.2)
    (".PNG", lambda b: b[:8] == PNG_MAGIC),   # suffix case does not matter
]


@pytest.mark.parametrize("suffix, valid", FORMATS)
def test_formats_by_suffix(suffix, valid, tmp_path):
    fig = plot(_xx_profile(16), "entropy", fit=False)
    path = save_figure(fig, tmp_path / f"f{suffix}")
    assert valid(path.read_bytes())


@pytest.mark.parametrize("suffix", [".png", ".svg", ".pdf"])  # each format
def test_same_data_same_bytes(suffix, tmp_path):
    first, again = tmp_path / f"a{suffix}", tmp_path / f"b{suffix}"
    for path in (first, again):
        plot(_xx_profile(16), "entropy", path, fit=False)
    assert first.read_bytes() == again.read_bytes()


@pytest.mark.parametrize("name", [
    "f.jpg",   # not one of the three formats
    "f",       # no suffix at all
])
def test_unknown_suffix_is_refused(name, tmp_path):
    with pytest.raises(ValueError, match=r"\.png, \.svg"):
        plot(_xx_profile(16), "entropy", tmp_path / name, fit=False)
    assert not (tmp_path / name).exists()


# --- entropy -----------------------------------------------------------------------------
# The XX chain is a free-boson CFT with c = 1 and the critical Ising chain has c = 1/2
# (Calabrese & Cardy, J. Stat. Mech. P06002 (2004)); exact XX entropies from
# reference.freefermion (Peschel, J. Phys. A 36, L205 (2003)).
CENTRAL_CHARGES = [
    # source, boundary, expected c, tolerance
    ("xx64", "periodic", 1.0, 0.05),   # exact XX ring, 64 sites
    ("demo", "open", 0.5, 0.05),       # demo: open critical transverse-field Ising chain
]


@pytest.mark.parametrize("which, boundary, c, tol", CENTRAL_CHARGES)
def test_entropy_legend_shows_fitted_central_charge(which, boundary, c, tol):
    if which == "demo" and not DEMO.is_file():
        pytest.skip("data/demo.h5 not built (scripts/make_data.py)")
    source = _xx_profile(64, boundary=boundary) if which == "xx64" else DEMO
    fig = plot(source, "entropy", boundary=boundary)
    (fit,) = fig.bondscope_fits
    assert fit["central_charge"] == pytest.approx(c, abs=tol)
    shown = re.search(r"c = (\d+\.(\d+)) ± (\d+\.\d+)", _legend(fig.axes[0])[0])
    half_digit = 0.5 * 10.0 ** -len(shown.group(2))  # the legend rounds c and its error
    assert abs(float(shown.group(1)) - fit["central_charge"]) <= half_digit
    assert abs(float(shown.group(3)) - fit["central_charge_error"]) <= half_digit


LINES = [
    # options, sources, lines on the main axes, lines on the residual axes
    ({}, 1, 3, 2),                          # data, fit, legend key for the fit; residual, zero
    ({}, 3, 7, 4),                          # three curves, three fits, key; three residuals
    ({"renyi": ["2", "inf"]}, 1, 7, 2),     # plus two Renyi curves and their legend keys
    ({"fit": False}, 2, 2, None),           # curves only, no residual panel
]


@pytest.mark.parametrize("options, n, main_lines, residual_lines", LINES)
def test_entropy_lines_and_panels(options, n, main_lines, residual_lines, series):
    fig = plot(series[:n], "entropy", **options)
    assert len(fig.axes[0].get_lines()) == main_lines
    if residual_lines is None:
        assert len(fig.axes) == 1
    else:
        assert len(fig.axes[1].get_lines()) == residual_lines
        assert fig.axes[1].get_ylabel() == "S − fit [nats]"


@pytest.mark.parametrize("base, unit", [
    ("e", "nats"),   # natural logarithm
    (2, "bits"),     # base 2
])
def test_entropy_axis_unit(base, unit):
    fig = plot(_xx_profile(32, base), "entropy", fit=False)
    assert fig.axes[0].get_ylabel() == f"S(l) [{unit}]"
    assert fig.axes[0].get_xlabel().startswith("cut position l")


def test_entropy_bases_are_put_on_one_scale():
    nats, bits = _xx_profile(32, "e"), _xx_profile(32, 2)
    fig = plot([nats, bits], "entropy", fit=False)
    a, b = (line.get_ydata() for line in fig.axes[0].get_lines())
    np.testing.assert_allclose(a, b, rtol=1e-12)  # the bits curve drawn in nats


@pytest.mark.parametrize("base, text", [
    (math.e, "nats"), (2.0, "bits"), (10.0, "log base 10"),  # the three spellings
])
def test_entropy_unit(base, text):
    assert entropy_unit(base) == text


def test_palette_is_okabe_ito():
    # Okabe & Ito, Color Universal Design (2008): the eight colours
    assert sorted(OKABE_ITO.values()) == sorted(["#000000", "#E69F00", "#56B4E9", "#009E73",
                                                 "#F0E442", "#0072B2", "#D55E00", "#CC79A7"])


# --- spectrum ----------------------------------------------------------------------------
def test_spectrum_levels_and_degeneracy():
    # AKLT chain with edge spins: spectrum (1/2, 1/2) at every cut (Affleck, Kennedy, Lieb,
    # Tasaki, PRL 59, 799 (1987)): one level ln 2, twofold, per cut
    prof = bondscope.profile(states.aklt(6), spectrum=True)
    fig = plot(prof, "spectrum")
    ax = fig.axes[0]
    (points,) = [c for c in ax.collections if len(c.get_offsets())]
    xy = np.asarray(points.get_offsets())
    np.testing.assert_array_equal(xy[:, 0], prof.positions)
    np.testing.assert_allclose(xy[:, 1], math.log(2), rtol=1e-12)
    assert sorted({t.get_text() for t in ax.texts}) == ["2"]


def test_spectrum_hides_levels_below_the_floor():
    prof = bondscope.profile(states.aklt(4), spectrum=True).to_dict()
    for cut in prof["cuts"]:
        cut["schmidt_values"] = [0.8, 0.6, 1e-9]
        cut["resolution_floor"] = 1e-6
    fig = plot(bondscope.Profile.from_dict(prof), "spectrum")
    (points,) = [c for c in fig.axes[0].collections if len(c.get_offsets())]
    levels = np.asarray(points.get_offsets())[:, 1]
    np.testing.assert_allclose(np.unique(levels.round(12)),
                               np.sort(-np.log(np.array([0.8, 0.6]) ** 2)).round(12))


@pytest.mark.parametrize("kind, options, needs", [
    ("spectrum", {}, "--spectrum"),              # levels need Schmidt values
    ("budget", {}, "--spectrum"),                # so does the bond budget
    ("entropy", {"renyi": ["2"]}, "--renyi 2"),  # Renyi curves need Renyi entropies
])
def test_saved_profile_lacking_what_the_figure_needs(kind, options, needs, bare_profile):
    with pytest.raises(CheckpointError, match=rf"bare.json: no .*bondscope profile .*{needs}"):
        plot(bare_profile, kind, **options)


def test_renyi_orders_match_by_value():
    prof = bondscope.profile(states.aklt(4), renyi=["2.0"])
    fig = plot(prof, "entropy", renyi=["2"], fit=False)
    # AKLT with edge spins: flat spectrum (1/2, 1/2), so S_2 = ln 2 at every cut (Affleck,
    # Kennedy, Lieb, Tasaki, PRL 59, 799 (1987))
    np.testing.assert_allclose(fig.axes[0].get_lines()[1].get_ydata(), math.log(2))


# --- heatmap -----------------------------------------------------------------------------
def test_heatmap_rows_follow_time_not_name(timed):
    fig = plot(timed, "heatmap")
    grid = fig.axes[0].collections[0].get_array().reshape(len(timed), -1)
    first = bondscope.profile(timed[0]).entropies  # time 0, named last
    np.testing.assert_allclose(grid[0], first, rtol=1e-12)
    assert fig.axes[0].get_ylabel() == "time t [1/J]"
    assert fig.axes[1].get_ylabel() == "S(l, t) [nats]"


def test_heatmap_refuses_mixed_lengths(timed):
    other = bondscope.profile(states.aklt(3))
    with pytest.raises(ValueError, match=r"one length; found \[5, 8\] sites"):
        plot([*timed, other], "heatmap")


# --- budget and convergence -----------------------------------------------------------------
BUDGETS = [
    # split, targets
    ("cut", [1e-3, 1e-5, 1e-7]),     # the discarded weight allowed at each cut
    ("equal", [1e-4, 1e-6]),         # a whole-state bound, spread equally
    ("pooled", [1e-4]),              # a whole-state bound, pooled over the cuts
]


@pytest.mark.parametrize("split, targets", BUDGETS)
def test_budget_lines_per_target(split, targets, series):
    _needs("budget")
    fig = plot(series[-1], "budget", targets=targets, split=split)
    ax = fig.axes[0]
    assert len(ax.get_lines()) == 1 + len(targets)  # stored bond dimension, one per target
    assert _legend(ax)[0].startswith("stored χ")
    assert ax.get_ylabel() == "bond dimension χ"
    stored = ax.get_lines()[0].get_ydata()
    for line in ax.get_lines()[1:]:
        assert np.all(line.get_ydata() <= stored)  # never more than is stored


def test_budget_of_a_known_spectrum():
    _needs("budget")
    # AKLT with edge spins: weights (1/2, 1/2) at every cut (Affleck, Kennedy, Lieb, Tasaki,
    # PRL 59, 799 (1987)), so any target below 1/2 needs chi = 2 everywhere
    fig = plot(bondscope.profile(states.aklt(6), spectrum=True), "budget", targets=[0.4, 1e-8])
    for line in fig.axes[0].get_lines()[1:]:
        np.testing.assert_array_equal(line.get_ydata(), 2)


@pytest.mark.parametrize("against, xlabel", [
    ("weight", "largest discarded weight ε"),   # the run's discarded weight
    ("bond", "inverse bond dimension 1/χ"),     # 1/chi
])
def test_convergence_axes_and_limit(against, xlabel, series):
    _needs("convergence")
    fig = plot(series, "convergence", against=against)
    ax = fig.axes[0]
    assert ax.get_xlabel() == xlabel and ax.get_xlim()[0] == 0.0
    (limit,) = fig.bondscope_limits
    assert f"extrapolated: {limit['value']:.6g}" in _legend(ax)
    assert len(ax.get_lines()) == 3  # extrapolation line, the runs, the limit


def test_convergence_limit_of_the_demo_series(series):
    _needs("convergence")
    if not (ROOT / "data" / "series").is_dir():
        pytest.skip("data/series not built (scripts/make_data.py)")
    # the series is the open critical Ising chain of 64 sites; its exact middle-cut entropy
    # from reference.freefermion (Peschel, J. Phys. A 36, L205 (2003))
    exact = freefermion.ising_entropies(64, 1.0)[31]
    (limit,) = plot(series, "convergence").bondscope_limits
    assert limit["value"] == pytest.approx(exact, abs=1e-3)


def test_convergence_needs_the_run_weight(timed):
    _needs("convergence")
    with pytest.raises(ValueError, match="max_discarded_weight"):
        plot(timed[:2], "convergence")


# --- command line ------------------------------------------------------------------------
CLI = [
    # arguments after SOURCE (batch directory), expected exit status
    (["--kind", "entropy", "--boundary", "open", "-o", "{out}.png"], 0),
    (["--kind", "budget", "--targets", "1e-4,1e-6", "--split", "equal", "-o", "{out}.pdf"], 0),
    (["--kind", "convergence", "--against", "bond", "-o", "{out}.svg"], 0),
    (["--kind", "budget", "--targets", "2", "-o", "{out}.png"], 2),   # target outside (0, 1)
    (["--kind", "entropy", "-o", "{out}.gif"], 2),                    # unknown format
    (["--kind", "sideways", "-o", "{out}.png"], 2),                   # unknown kind
]


@pytest.mark.parametrize("args, status", CLI)
def test_cli_plot(args, status, batch, tmp_path, capsys):
    _needs(args[1])
    args = [a.format(out=tmp_path / "fig") for a in args]
    assert main(["plot", str(batch), *args]) == status
    err = capsys.readouterr().err
    if status == 0:
        assert (tmp_path / f"fig{args[-1][-4:]}").is_file()
    else:
        assert err.startswith("error: ") and err.count("\n") == 1


def test_cli_plot_bare_profile_says_rerun(bare_profile, tmp_path, capsys):
    assert main(["plot", str(bare_profile), "--kind", "spectrum", "-o",
                 str(tmp_path / "s.png")]) == 3
    err = capsys.readouterr().err
    assert "bondscope profile" in err and "--spectrum" in err and err.count("\n") == 1
