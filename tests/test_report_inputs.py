"""Reports and figures of batches as they are found: odd names, odd metadata, shards.

One batch runs over a table of checkpoints, good and hostile together; every row must
reach the report's table once, show its name as text, and never abort the page or a plot.
"""

import json
import math
import os
import re
import shutil
from html.parser import HTMLParser
from pathlib import Path

import h5py
import numpy as np
import pytest

pytest.importorskip("matplotlib")

from bondscope._cli import main  # noqa: E402
from bondscope._figures._gather import checked_meta, read_results  # noqa: E402
from bondscope._figures._kinds import plot  # noqa: E402
from bondscope._figures._names import figure_text, visible  # noqa: E402
from bondscope._report import report_html, write_report  # noqa: E402
from builders import random_chain, write_chain  # noqa: E402
from plotdata import series_checkpoints, time_checkpoints  # noqa: E402


class _Page(HTMLParser):
    """Table rows (cell texts), notes list items, section headings and images of a page."""

    def __init__(self, text):
        super().__init__()
        self.rows, self.headings, self.images, self.notes = [], [], 0, []
        self._cell = self._heading = self._note = None
        self._in_notes = False
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "tr":
            self.rows.append([])
        elif tag == "td":
            self._cell = ""
        elif tag == "h2":
            self._heading = ""
            self._in_notes = attrs.get("id") == "notes"
        elif tag == "img":
            self.images += 1
        elif tag == "li" and self._in_notes:
            self._note = ""

    def handle_data(self, data):
        for name in ("_cell", "_heading", "_note"):
            if getattr(self, name) is not None:
                setattr(self, name, getattr(self, name) + data)

    def handle_endtag(self, tag):
        if tag == "td":
            self.rows[-1].append(self._cell.strip())
            self._cell = None
        elif tag == "h2":
            self.headings.append(self._heading.strip())
            self._heading = None
        elif tag == "li" and self._note is not None:
            self.notes.append(self._note.strip())
            self._note = None


# file name, root attributes, what the report must say of it (a note, or None)
CHECKPOINTS = [
    ("plain_run.h5", {"time": 0.5, "bond_dim": 16}, None),             # good row
    ("$x^{2}$ normal.h5", {}, None),                                   # '$' pairs: text, not math
    ("$\\foo$.h5", {}, None),                                          # bad mathtext if parsed
    ("ev\u202eil_5h.h5", {}, None),                                    # right-to-left override
    ("esc\x1b]0;title\x07.h5", {}, None),                              # terminal OSC escape
    ("zero\u200bwidth.h5", {}, None),                                  # zero-width space
    ("two_boundaries.h5", {"boundary": [1, 2]}, "'boundary' = [1, 2] ignored"),
    ("two_times.h5", {"time": [0.5, 1.0]}, "'time' = [0.5, 1.0] ignored"),
    ("two_chis.h5", {"bond_dim": [4, 8]}, "'bond_dim' = [4, 8] ignored"),
    ("text_time.h5", {"time": "soon"}, "'time' = 'soon' ignored"),
    ("odd_weight.h5", {"max_discarded_weight": 3.0}, "'max_discarded_weight' = 3.0 ignored"),
]


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    """A batch over CHECKPOINTS (10-site random chains, not normalised, so that each row
    records a warning naming its checkpoint), with spectra."""
    from bondscope._batch.run import run_batch

    root = tmp_path_factory.mktemp("hostile")
    (root / "in").mkdir()
    rng = np.random.default_rng(16)
    for name, attrs, _ in CHECKPOINTS:
        tensors = random_chain(rng, [2] * 10, [2, 4, 8, 16, 16, 16, 8, 4, 2])
        write_chain(root / "in" / name, tensors, pattern="/psi/T{site}")
        with h5py.File(root / "in" / name, "a") as f:
            f.attrs.update(attrs)
    run_batch(sorted((root / "in").glob("*.h5")), root / "out", workers=1, threads=1,
              spectrum=True)
    return root


@pytest.fixture(scope="module")
def hostile_text(hostile):
    return report_html(hostile / "out")


@pytest.fixture(scope="module")
def hostile_page(hostile_text):
    return _Page(hostile_text)


def _row(page, name):
    found = [r for r in page.rows if r and r[0] == visible(name)]
    assert len(found) == 1, f"{visible(name)} appears {len(found)} times in the table"
    return found[0]


@pytest.mark.parametrize("name, attrs, note", CHECKPOINTS, ids=[visible(r[0]) for r in CHECKPOINTS])
def test_every_checkpoint_is_listed_once_as_text(name, attrs, note, hostile_page):
    row = _row(hostile_page, name)
    assert row[1] == "done"
    mine = [n for n in hostile_page.notes if n.startswith(visible(name))]
    if note is None:
        assert not any("ignored" in n for n in mine)
    else:
        assert any(note in n for n in mine), mine


def test_invisible_characters_are_spelled_out(hostile_text):
    text = hostile_text
    for bad in ("\u202e", "\x1b", "\x07", "\u200b"):
        assert bad not in text
    assert "ev&lt;U+202E&gt;il_5h.h5" in text
    assert "esc&lt;U+001B&gt;]0;title&lt;U+0007&gt;.h5" in text


def test_the_page_holds_every_figure(hostile_page):
    # ungrouped: one section of all checkpoints, with entropy and spectrum figures
    assert [h for h in hostile_page.headings if h.startswith(("Series", "All", "Checkpoint"))] \
        == ["All checkpoints"]
    assert hostile_page.images >= 2


@pytest.mark.parametrize("kind", ["entropy", "heatmap"])  # every name in one figure
def test_plot_of_the_hostile_batch(kind, hostile, tmp_path):
    fig = plot(hostile / "out", kind, tmp_path / f"{kind}.svg")
    svg = (tmp_path / f"{kind}.svg").read_text(encoding="utf-8")
    for name, _, _ in CHECKPOINTS:
        stem = visible(Path(name).stem)
        # drawn as the literal text (SVG keeps text as text), never as mathematics
        assert stem.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;") in svg
    texts = [t.get_text() for ax in fig.axes for t in ax.get_yticklabels()]
    texts += [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().texts]
    texts += [ax.get_title(loc="left") for ax in fig.axes]
    assert any(t.startswith(figure_text("$x^{2}$ normal")) for t in texts)


@pytest.mark.parametrize("name", ["$x^{2}$ normal.h5", "$\\foo$.h5", "ev\u202eil_5h.h5"])
def test_hostile_name_on_its_own(name, hostile, tmp_path, capsys):
    # --quiet: the profiling warnings are the pipeline's to print
    output = tmp_path / f"{name}.png"
    status = main(["plot", str(hostile / "in" / name), "--kind", "spectrum", "--quiet",
                   "-o", str(output)])
    out = capsys.readouterr()
    assert status == 0 and output.read_bytes()[:4] == b"\x89PNG"
    assert out.out == f"spectrum figure written to {visible(output)}\n" and out.err == ""


@pytest.mark.parametrize("meta, kept, noted", [
    ({"time": 1.5, "time_unit": "1/J", "bond_dim": 8.0}, {"time": 1.5, "time_unit": "1/J",
                                                          "bond_dim": 8}, 0),   # good values
    ({"boundary": "periodic", "series": 7}, {"boundary": "periodic", "series": "7"}, 0),
    ({"boundary": [1, 2]}, {}, 1),                   # two elements
    ({"time": True}, {}, 1),                         # a flag is not a time
    ({"time": math.nan}, {}, 1),                     # not finite
    ({"bond_dim": 0}, {}, 1),                        # no bond has dimension 0
    ({"bond_dim": 2.5}, {}, 1),                      # nor a fraction
    ({"series": [1, 2]}, {}, 1),                     # a series name is one value
    ({"max_discarded_weight": -1e-3}, {}, 1),        # a weight is in [0, 1]
    ({"boundary": "x" * 500}, {}, 1),                # a huge value: the note is cut short
])
def test_checked_meta(meta, kept, noted):
    clean, notes = checked_meta(meta, "ck.h5")
    assert clean == kept and len(notes) == noted
    assert all(n.startswith("ck.h5: run metadata") and len(n) < 160 for n in notes)


def test_odd_metadata_in_a_plot_is_a_warning_not_an_error(hostile, tmp_path):
    with pytest.warns(UserWarning, match=r"'boundary' = \[1, 2\] ignored"):
        fig = plot(hostile / "in" / "two_boundaries.h5", "entropy")
    assert fig.bondscope_fits[0]["boundary"] == "open"


# --- the documented sharded workflow: shards, then the final unsharded run ------------------
@pytest.fixture(scope="module")
def sharded(tmp_path_factory):
    from bondscope._batch.run import run_batch

    root = tmp_path_factory.mktemp("sharded")
    inputs = time_checkpoints(root / "in")
    for shard in ("0/2", "1/2", None):
        run_batch(inputs, root / "out", workers=1, threads=1, shard=shard,
                  group_pattern=r"(snap)_\d+")
    return root / "out", inputs


@pytest.fixture(scope="module")
def sharded_text(sharded):
    return report_html(sharded[0])


def test_shards_and_final_run_list_each_checkpoint_once(sharded, sharded_text):
    out, inputs = sharded
    assert len(list(out.glob("series*.json"))) == 3 and len(list(out.glob("summary*.json"))) == 3
    index = read_results(out)
    assert sorted(r["source"] for r in index.rows) == sorted(str(p) for p in inputs)
    (members,) = index.series.values()
    assert [r["time"] for r in members] == [0.0, 0.5, 1.0, 1.5]
    page = _Page(sharded_text)
    assert sorted(r[0] for r in page.rows if r) == sorted(p.name for p in inputs)


def test_time_series_stays_a_time_series_after_shards(sharded_text):
    text = sharded_text
    assert "Entropy S(l, t) through the series" in text and "extrapolated" not in text


def test_a_newer_shard_row_wins(sharded, tmp_path):
    # a shard task resubmitted after the final run: its row is the newer one
    out = Path(shutil.copytree(sharded[0], tmp_path / "out"))
    shard = out / "summary.shard-0-of-2.json"
    doc = json.loads(shard.read_text())
    doc["rows"][0]["status"] = "failed"
    doc["rows"][0]["error"] = "WorkerDied: resubmitted"
    shard.write_text(json.dumps(doc))
    later = (out / "summary.json").stat().st_mtime_ns + 10**9
    os.utime(shard, ns=(later, later))
    rows = read_results(out).rows
    assert len(rows) == 4 and sum(r["status"] == "failed" for r in rows) == 1


def test_an_unreadable_summary_beside_good_ones_is_a_note(sharded, tmp_path):
    out = Path(shutil.copytree(sharded[0], tmp_path / "out"))
    (out / "summary.shard-1-of-2.json").write_text("{not json")
    page = _Page(report_html(out))
    assert any("summary.shard-1-of-2.json: not a JSON batch summary" in n for n in page.notes)
    assert len([r for r in page.rows if r]) == 4


def test_an_unreadable_profile_is_a_note(sharded, tmp_path):
    out = Path(shutil.copytree(sharded[0], tmp_path / "out"))
    victim = sorted((out / "profiles").glob("*.json"))[0]
    victim.write_text("{}")
    page = _Page(report_html(out))
    assert any("left out, its profile cannot be read" in n for n in page.notes)
    assert page.images >= 2  # the other three still drawn


# --- the summary table ----------------------------------------------------------------------
@pytest.fixture(scope="module")
def grouped(tmp_path_factory):
    """A bond-dimension series plus one checkpoint outside it, grouped by pattern."""
    from bondscope._batch.run import run_batch

    root = tmp_path_factory.mktemp("grouped")
    inputs = series_checkpoints(root / "in", small=True)
    alone = root / "in" / "lonely.h5"
    shutil.copy(inputs[-1], alone)
    run_batch([*inputs, alone], root / "out", workers=1, threads=1, spectrum=True,
              group_pattern=r"(\w+)_chi\d+")
    return root / "out", inputs, alone


@pytest.fixture(scope="module")
def grouped_text(grouped):
    return report_html(grouped[0])


def _columns(page_text):
    return re.findall(r'<th scope="col"[^>]*><button type="button">([^<]*)</button>', page_text)


def test_table_shows_c_and_law_of_the_analysis_fit(grouped):
    from bondscope import load_profile
    from bondscope._analyses.scaling import fit_scaling
    from bondscope._figures._style import plus_minus

    out, inputs, _ = grouped
    text = report_html(out, fit={"window": "2:8"})
    heads, page = _columns(text), _Page(text)
    c_at, law_at = heads.index("c"), heads.index("law")
    for row in read_results(out).rows:
        found = fit_scaling(load_profile(row["profile"]), window="2:8")
        cells = _row(page, Path(row["source"]).name)
        assert cells[law_at] == found["law"]
        shown = plus_minus(found["central_charge"], found["central_charge_error"])
        assert cells[c_at] == (shown if found["law"] == "logarithmic" else "")
    assert "scaling fit with window 2:8" in text


def test_inconclusive_is_shown_as_such(sharded, monkeypatch):
    import bondscope._analyses.scaling as scaling

    real = scaling.fit_scaling

    def withheld(source, **settings):  # an analysis that cannot decide withholds c
        found = dict(real(source, **settings))
        found.update(law="inconclusive", central_charge=None, central_charge_error=None)
        return found

    monkeypatch.setattr(scaling, "fit_scaling", withheld)
    text = report_html(sharded[0])
    heads, page = _columns(text), _Page(text)
    for row in (r for r in page.rows if r):
        assert row[heads.index("law")] == "inconclusive" and row[heads.index("c")] == ""
    fig = plot(sharded[0], "entropy")
    assert all(t.endswith(": law inconclusive") for t in
               [t.get_text() for t in fig.axes[0].get_legend().texts][:len(sharded[1])])


def test_stand_alone_checkpoint_gets_its_figures(grouped, grouped_text):
    alone = grouped[2]
    page = _Page(grouped_text)
    sections = [h for h in page.headings if h.startswith(("Series", "Checkpoint"))]
    assert sections == ["Series chain", f"Checkpoint {alone.name}"]
    # series: entropy, spectrum, convergence; the lone checkpoint: entropy and spectrum
    assert page.images == 5


NUMBER_FORMATS = [
    # column heading, pattern every filled cell matches
    ("max S", r"\d+\.\d{4}"),             # entropies: four decimals
    ("S(N/2)", r"\d+\.\d{4}"),
    ("seconds", r"\d+\.\d{2}"),           # wall time: two decimals
    ("N", r"\d+"),                        # counts: integers
]


@pytest.mark.parametrize("heading, pattern", NUMBER_FORMATS)
def test_number_formats_are_one_per_column(heading, pattern, grouped_text):
    text = grouped_text
    at = _columns(text).index(heading)
    cells = [r[at] for r in _Page(text).rows if r and r[at]]
    assert cells and all(re.fullmatch(pattern, c) for c in cells), cells


def test_c_cells_are_value_plus_minus_error(grouped, monkeypatch):
    # random chains get no logarithmic verdict; force one to see how c is written
    import bondscope._analyses.scaling as scaling

    real = scaling.fit_scaling

    def critical(source, **settings):
        return {**real(source, **settings), "law": "logarithmic"}

    monkeypatch.setattr(scaling, "fit_scaling", critical)
    text = report_html(grouped[0])
    at = _columns(text).index("c")
    cells = [r[at] for r in _Page(text).rows if r and r[at]]
    # value ± error, rounded to the error
    assert cells and all(re.fullmatch(r"-?\d+(\.\d+)? ± \d+(\.\d+)?", c) for c in cells), cells


def test_warnings_name_files_not_paths(hostile, hostile_page, hostile_text):
    # unnormalised states: each row carries the norm warning, which names the checkpoint
    norms = [n for n in hostile_page.notes if "state norm" in n]
    assert len(norms) == len(CHECKPOINTS)
    assert not any(str(hostile) in n for n in hostile_page.notes)
    assert "notes" in _columns(hostile_text)  # a count in the table; the texts under Notes
    assert not any("state norm" in cell for row in hostile_page.rows for cell in row)


# --- never over an input --------------------------------------------------------------------
@pytest.mark.parametrize("target, refused", [
    ("checkpoint", True),     # a checkpoint of the batch that is named like a page
    ("new", False),           # a new page
])
def test_report_never_writes_over_an_input(target, refused, tmp_path):
    from bondscope._batch.run import run_batch

    rng = np.random.default_rng(3)
    checkpoint = tmp_path / "page.html"
    write_chain(checkpoint, random_chain(rng, [2] * 6, [2, 4, 8, 4, 2]), pattern="/psi/T{site}")
    run_batch([checkpoint], tmp_path / "out", workers=1, threads=1)
    before = checkpoint.read_bytes()
    output = checkpoint if target == "checkpoint" else tmp_path / "report.html"
    if refused:
        with pytest.raises(ValueError, match="refusing to write over an input of the report"):
            write_report(tmp_path / "out", output)
    else:
        write_report(tmp_path / "out", output)
        assert output.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert checkpoint.read_bytes() == before


@pytest.mark.parametrize("fit, error", [
    ({"windw": "1:5"}, TypeError),         # misspelt fit setting, refused before any work
    ("yes", TypeError),                    # not a bool or dict
])
def test_report_fit_settings_are_checked_first(fit, error, tmp_path):
    with pytest.raises(error):
        report_html(tmp_path / "no such directory", fit=fit)


def test_figures_of_the_report_are_deterministic(sharded, sharded_text):
    # the same directory gives the same page, figures included, but for its time stamp
    first, again = (re.sub(r"on \d{4}-\d\d-\d\d \d\d:\d\d UTC", "", text)
                    for text in (sharded_text, report_html(sharded[0])))
    assert first == again and "data:image/png;base64" in first


@pytest.mark.parametrize("flags, status, shown", [
    (["--window", "2:8", "--corrections", "parity"], 0,
     "scaling fit with window 2:8, corrections parity"),          # the user's fit, in the page
    (["--no-fit"], 0, None),                                        # no c or law columns
    (["--no-fit", "--window", "2:8"], 2, None),                     # contradictory: usage error
])
def test_cli_report_fit_flags(flags, status, shown, sharded, tmp_path, capsys):
    page = tmp_path / "r.html"
    assert main(["report", str(sharded[0]), "-o", str(page), *flags]) == status
    if status:
        assert "--no-fit with fit settings" in capsys.readouterr().err and not page.exists()
        return
    text = page.read_text(encoding="utf-8")
    heads = _columns(text)
    if shown is None:
        assert "c" not in heads and "law" not in heads
    else:
        assert shown in text and {"c", "law"} <= set(heads)
