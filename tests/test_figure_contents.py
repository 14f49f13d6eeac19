"""What each figure shows: limits, labels, legends, lines (the defects of issue 14 as tests)."""

import math

import numpy as np
import pytest

pytest.importorskip("matplotlib")

import bondscope  # noqa: E402
from bondscope._cli import build_parser, main  # noqa: E402
from bondscope._cli.plot import figure_options  # noqa: E402
from bondscope._figures._kinds import figure_function, plot  # noqa: E402
from bondscope._figures._style import OKABE_ITO, figure_bytes  # noqa: E402
from plotdata import series_checkpoints, spin_one_checkpoint, time_checkpoints  # noqa: E402
from reference import freefermion  # noqa: E402


@pytest.fixture(scope="module")
def series(tmp_path_factory):
    return series_checkpoints(tmp_path_factory.mktemp("series"))


@pytest.fixture(scope="module")
def spin_one(tmp_path_factory):
    return spin_one_checkpoint(tmp_path_factory.mktemp("spin1"))


def _xx(L, base="e", boundary="open", name=None):
    """Exact XX entropies (Peschel's correlation-matrix method, J. Phys. A 36, L205 (2003))."""
    s = freefermion.xx_entropies(L, boundary) / (1.0 if base == "e" else math.log(base))
    return bondscope.Profile.from_dict({
        "format": "bondscope-profile", "version": 1, "sites": L, "kind": "mps",
        "log_base": base, "source": name or f"xx{L}.h5", "boundary": boundary,
        "cuts": [{"position": l, "entropy": float(v)} for l, v in enumerate(s, 1)]})


def _renderer(fig):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig).draw()
    return fig.canvas.get_renderer()


def _overlapping(texts, renderer):
    boxes = [t.get_window_extent(renderer) for t in texts if t.get_visible() and t.get_text()]
    return [(a, b) for i, a in enumerate(boxes) for b in boxes[i + 1:] if a.overlaps(b)]


def _data_lines(ax):
    return [ln for ln in ax.get_lines() if not ln.get_label().startswith("_")
            and ln.get_marker() not in (None, "None", "")]


def _legend(ax):
    return [t.get_text() for t in ax.get_legend().get_texts()]


# --- budget: one scale that holds the largest chi -----------------------------------------
def test_budget_panels_hold_every_chi(series):
    pytest.importorskip("bondscope._analyses.budget")
    fig = plot([series[0], series[-1]], "budget")  # the smallest and largest bond dimension
    stored = max(int(bondscope.profile(p).bond_dimensions.max()) for p in (series[0], series[-1]))
    for ax in fig.axes:
        bottom, top = ax.get_ylim()
        assert bottom == 1 and top >= stored
        for line in ax.get_lines():
            assert np.max(line.get_ydata()) <= top


# --- convergence: log ticks and chi labels ---------------------------------------------------
@pytest.mark.parametrize("against", ["weight", "bond"])  # decades; a tick per run (1/chi)
def test_convergence_labels_do_not_collide_or_leave_the_panel(against, series):
    pytest.importorskip("bondscope._analyses.comparison")
    fig = plot(series, "convergence", against=against)
    renderer = _renderer(fig)
    zoom = fig.axes[1]
    labels = [t for t in zoom.get_xticklabels(which="both") if t.get_text()]
    assert labels and not _overlapping(labels, renderer)
    if against == "bond":
        chis = sorted(bondscope.profile(p).bond_dimensions.max() for p in series)
        assert [t.get_text() for t in labels] == [f"1/{c}" for c in reversed(chis)]
    box = zoom.get_window_extent(renderer)
    runs = [t for t in zoom.texts if t.get_text().startswith("χ=")]
    assert len(runs) == len(series)
    for text in runs:
        inner = text.get_window_extent(renderer)
        assert box.y0 - 0.5 <= inner.y0 and inner.y1 <= box.y1 + 0.5


# --- spectrum: spin-1 multiplets -----------------------------------------------------------
def test_spin_one_spectrum_key_and_labels(spin_one):
    # the open spin-1 Heisenberg chain has a singlet ground state (Lieb & Mattis, J. Math.
    # Phys. 3, 749 (1962)), so the spectrum splits into SU(2) multiplets of odd size 2S + 1
    fig = plot(spin_one, "spectrum")
    ax = fig.axes[0]
    counts = sorted({int(t.get_text()) for t in ax.texts})
    assert counts and all(n % 2 == 1 for n in counts)
    key = _legend(ax)
    assert key[0] == "1" and {"3", "5"} <= set(key)   # the sizes found, not 1, 2, 4
    assert not _overlapping(ax.texts, _renderer(fig))
    assert _has_close_multiplets(ax)


def _has_close_multiplets(ax):
    """The data hold multiplets closer than a label's height at one cut (levels 6.90 and
    7.16 at l = 3), the case that made the labels overlap: a real test of the layout."""
    x, y = ax.collections[0].get_offsets().T
    at = np.isclose(x, 3)
    return np.min(np.diff(np.sort(y[at]))) < 0.5


def test_spectrum_max_level_on_the_command_line(spin_one, tmp_path):
    args = build_parser().parse_args(["plot", str(spin_one), "--kind", "spectrum",
                                      "--max-level", "5", "-o", str(tmp_path / "s.png")])
    options = figure_options(args, figure_function("spectrum"))
    assert options["max_level"] == 5.0
    fig = plot(spin_one, "spectrum", max_level=options["max_level"])
    assert fig.axes[0].get_ylim()[1] == 5.0
    assert all(t.xy[1] <= 5.0 for t in fig.axes[0].texts)


@pytest.mark.parametrize("value", [0, -1.0, "high"])  # not a positive number
def test_spectrum_max_level_is_checked(value, spin_one):
    with pytest.raises(ValueError, match=r"max_level \(--max-level\)"):
        plot(spin_one, "spectrum", max_level=value)


# --- legends -----------------------------------------------------------------------------
def test_batch_profiles_are_named_after_their_checkpoints(series, tmp_path):
    from bondscope._batch.run import run_batch

    run_batch(series, tmp_path / "out", workers=1, threads=1)
    saved = sorted((tmp_path / "out" / "profiles").glob("*.json"))
    fig = plot(saved, "entropy", fit=False)
    assert sorted(_legend(fig.axes[0])) == sorted(p.stem for p in series)


def test_repeated_stems_are_told_apart_by_folder():
    a, b = _xx(16, name="scan/J0.5/state.h5"), _xx(16, name="scan/J1.0/state.h5")
    fig = plot([a, b], "entropy", fit=False)
    assert _legend(fig.axes[0]) == ["J0.5/state", "J1.0/state"]


@pytest.mark.parametrize("n", [3, 7, 8, 12])  # Okabe-Ito up to seven curves, a gradient beyond
def test_no_two_curves_share_a_colour(n):
    fig = plot([_xx(L) for L in range(16, 16 + 2 * n, 2)], "entropy", fit=False)
    colours = [ln.get_color() for ln in _data_lines(fig.axes[0])]
    assert len(colours) == n and len(set(colours)) == n
    if n <= 7:
        assert set(colours) <= set(OKABE_ITO.values())


# --- heatmap title -------------------------------------------------------------------------
@pytest.mark.parametrize("which, title", [
    ("timed", "Entanglement entropy in time"),            # a time series
    ("one", "Entanglement entropy per checkpoint"),       # a single checkpoint without time
    ("untimed", "Entanglement entropy per checkpoint"),   # several, no times
])
def test_heatmap_title_says_what_the_rows_are(which, title, tmp_path):
    sources = {"timed": lambda: time_checkpoints(tmp_path, times=(0.0, 1.0)),
               "one": lambda: [_xx(12)], "untimed": lambda: [_xx(12), _xx(12, name="b.h5")]}
    fig = plot(sources[which](), "heatmap")
    assert fig.axes[0].get_title(loc="left") == title


# --- entropy: the fit ----------------------------------------------------------------------
def test_each_source_shows_its_own_fitted_cuts():
    # default windows drop L//8 cuts at each end: 4:28 for 32 sites, 8:56 for 64
    fig = plot([_xx(32), _xx(64)], "entropy")
    ax = fig.axes[0]
    assert not [p for p in ax.patches if p.get_label() == "cuts fitted"]  # no shared band
    bars = [ln for ln in ax.get_lines() if ln.get_linewidth() == 2.2]
    spans = [(min(f["positions"]), max(f["positions"])) for f in fig.bondscope_fits]
    assert [tuple(b.get_xdata()) for b in bars] == spans == [(4, 28), (8, 56)]


def test_one_window_is_one_band():
    fig = plot([_xx(32), _xx(32, name="b.h5")], "entropy")
    (band,) = [p for p in fig.axes[0].patches if p.get_label() == "cuts fitted"]
    x0, x1 = band.get_x(), band.get_x() + band.get_width()
    assert (x0, x1) == (3.5, 28.5)


def test_fit_curve_is_drawn_above_the_data():
    fig = plot(_xx(32), "entropy")
    ax = fig.axes[0]
    (data,) = _data_lines(ax)
    fits = [ln for ln in ax.get_lines() if ln.get_label().startswith("_")
            and ln.get_color() == data.get_color() and ln.get_linestyle() == "--"]
    # drawn later, and set apart from the curve it follows: the curve faded, the fit bolder
    assert len(fits) == 1 and fits[0].get_zorder() > data.get_zorder()
    assert data.get_alpha() < 1 and fits[0].get_linewidth() >= 1.5 * data.get_linewidth()


@pytest.mark.parametrize("base, log, not_shown", [
    ("e", "ln x", "log"),   # nats
    (2, "log₂ x", "ln"),    # bits: the formula in the entropy's own logarithm
    (10, "log₁₀ x", "ln"),  # decimal digits
])
def test_fit_formula_in_the_entropy_unit(base, log, not_shown):
    fig = plot(_xx(32, base), "entropy")
    (key,) = [t for t in _legend(fig.axes[0]) if t.startswith("fit,")]
    formula = key.split("\n")[1]
    assert log in formula and not_shown not in formula


def test_fit_settings_reach_the_figure():
    # the fit the user chose: its window, corrections and exponent, in the legend and band
    fit = {"window": "6:26", "corrections": ["parity"], "parity_exponent": 0.5}
    fig = plot(_xx(32), "entropy", fit=fit)
    (result,) = fig.bondscope_fits
    assert result["window"] == [6, 26] and result["corrections"] == ["parity"]
    (band,) = [p for p in fig.axes[0].patches if p.get_label() == "cuts fitted"]
    assert band.get_x() == 5.5
    (key,) = [t for t in _legend(fig.axes[0]) if t.startswith("fit,")]
    assert "(−1)ˡ/x^0.5" in key and "f/x" not in key


def test_fit_flags_reach_the_figure_from_the_command_line(tmp_path):
    args = build_parser().parse_args(["plot", "x.json", "-o", str(tmp_path / "e.png"),
                                      "--window", "6:26", "--corrections", "none",
                                      "--parity-exponent", "0.5", "--boundary", "periodic"])
    options = figure_options(args, figure_function("entropy"))
    assert options["fit"] == {"window": "6:26", "corrections": (), "parity_exponent": 0.5,
                              "boundary": "periodic"}


@pytest.mark.parametrize("fit, error", [
    ({"windw": "1:5"}, TypeError),          # misspelt setting
    ("yes", TypeError),                     # not a bool or dict
    ({"window": "30:40"}, ValueError),      # a window no source can be fitted with
])
def test_bad_fit_settings(fit, error):
    with pytest.raises(error):
        plot(_xx(32), "entropy", fit=fit)


def test_one_source_that_cannot_be_fitted_is_marked():
    fig = plot([_xx(32), _xx(4)], "entropy", fit={"corrections": ["parity", "smooth"]})
    labels = _legend(fig.axes[0])
    assert labels[0].startswith("xx32: c = ") and labels[1] == "xx4: not fitted"
    assert "error" in fig.bondscope_fits[1]


# --- entropy: other axes ---------------------------------------------------------------------
def test_entropy_against_the_chord_length_reads_c_from_the_slope():
    # exact XX ring: S = (c/3) ln x + s0 with x = (L/pi) sin(pi l/L) and c = 1 (Calabrese &
    # Cardy, J. Stat. Mech. P06002 (2004)); without corrections the fit is a line in ln x
    L = 64
    fig = plot(_xx(L, boundary="periodic"), "entropy", against="chord")
    ax = fig.axes[0]
    (data,) = _data_lines(ax)
    l = np.arange(1, L)
    np.testing.assert_allclose(data.get_xdata(), np.log(L / np.pi * np.sin(np.pi * l / L)),
                               rtol=1e-12)
    (fit,) = [ln for ln in ax.get_lines() if ln.get_linestyle() == "--"
              and ln.get_label().startswith("_")]
    slope = np.polyfit(fit.get_xdata(), fit.get_ydata(), 1)[0]
    (result,) = fig.bondscope_fits
    assert 3 * slope == pytest.approx(result["central_charge"], rel=1e-9)
    assert result["central_charge"] == pytest.approx(1.0, abs=0.05)
    assert ax.get_xlabel() == "" and fig.axes[1].get_xlabel().startswith("ln x,  x = (N/π)")


def test_entropy_against_the_fraction():
    fig = plot([_xx(20), _xx(40)], "entropy", against="fraction", fit=False)
    for line in _data_lines(fig.axes[0]):
        x = line.get_xdata()
        assert 0 < x.min() and x.max() < 1 and x[0] == pytest.approx(1 / (len(x) + 1))
    assert fig.axes[0].get_xlabel().startswith("cut position l/N")


@pytest.mark.parametrize("kind, against", [("entropy", "weight"), ("convergence", "chord")])
def test_against_values_belong_to_their_kind(kind, against):
    with pytest.raises(ValueError, match="against must be"):
        plot([_xx(16), _xx(16, name="b.h5")], kind, against=against)


# --- never over an input ---------------------------------------------------------------------
@pytest.mark.parametrize("output, refused", [
    ("ck.pdf", True),        # the checkpoint itself, named like a figure
    ("fig.pdf", False),      # a new file
])
def test_plot_never_writes_over_an_input(output, refused, series, tmp_path, capsys):
    checkpoint = tmp_path / "ck.pdf"
    checkpoint.write_bytes(series[0].read_bytes())
    before = checkpoint.read_bytes()
    status = main(["plot", str(checkpoint), "--no-fit", "-o", str(tmp_path / output)])
    assert checkpoint.read_bytes() == before
    if refused:
        assert status == 2 and "refusing to write over an input" in capsys.readouterr().err
    else:
        assert status == 0 and (tmp_path / output).read_bytes()[:5] == b"%PDF-"


# --- rendering is deterministic ---------------------------------------------------------------
@pytest.mark.parametrize("kind", ["spectrum", "entropy"])  # labels laid out; fit and bars
def test_same_figure_same_bytes(kind, spin_one):
    source = spin_one if kind == "spectrum" else [_xx(32), _xx(64)]
    first, again = (figure_bytes(plot(source, kind), "svg") for _ in range(2))
    assert first == again
