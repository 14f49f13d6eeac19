"""The HTML report of a batch results directory."""

import base64
import json
import shutil
from html.parser import HTMLParser
from pathlib import Path

import pytest

pytest.importorskip("matplotlib")
pytest.importorskip("bondscope._analyses.comparison")  # the convergence figure of each series

from bondscope._cli import main  # noqa: E402
from bondscope._report import report_html, write_report  # noqa: E402
from plotdata import PNG_MAGIC, batch_dir  # noqa: E402


class _Page(HTMLParser):
    """Collects what the tests look at: tags, table cells, headings, images, links, scripts."""

    def __init__(self):
        super().__init__()
        self.tags, self.cells, self.headings, self.images = [], [], [], []
        self.external, self.scripts = [], 0
        self._text = None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append(tag)
        if tag in ("td", "h2", "li"):
            self._text = [tag, ""]
        if tag == "img":
            self.images.append(attrs.get("src", ""))
        if tag == "script":
            self.scripts += 1
            if attrs.get("src"):
                self.external.append(attrs["src"])
        if tag == "link" and attrs.get("href"):
            self.external.append(attrs["href"])

    def handle_data(self, data):
        if self._text is not None:
            self._text[1] += data

    def handle_endtag(self, tag):
        if self._text is not None and tag == self._text[0]:
            (self.cells if tag in ("td", "li") else self.headings).append(self._text[1].strip())
            self._text = None


@pytest.fixture(scope="module")
def batch(tmp_path_factory):
    return batch_dir(tmp_path_factory.mktemp("report"))


@pytest.fixture(scope="module")
def page(batch):
    parsed = _Page()
    parsed.feed(report_html(batch[0]))
    parsed.close()
    return parsed


def test_every_checkpoint_is_in_the_table(batch, page):
    _, inputs = batch
    for path in inputs:
        assert path.name in page.cells


def test_failures_are_listed_with_their_error(batch, page):
    rows = json.loads((batch[0] / "summary.json").read_text())["rows"]
    failed = [r for r in rows if r["status"] == "failed"]
    assert len(failed) == 1
    # the error as the summary holds it, with the checkpoint's path shortened to its name
    error = failed[0]["error"].replace(failed[0]["source"], Path(failed[0]["source"]).name)
    assert any(error in cell for cell in page.cells)
    assert "Failures (1)" in page.headings


def test_series_figures_are_inline_png(page):
    series = [h for h in page.headings if h.startswith("Series ")]
    assert len(series) == 1
    # entropy, spectrum and convergence of the one series
    assert len(page.images) == 3
    for src in page.images:
        head, data = src.split(",", 1)
        assert head == "data:image/png;base64"
        assert base64.b64decode(data)[:8] == PNG_MAGIC


def test_nothing_is_fetched(page):
    assert page.external == [] and page.scripts == 1
    assert page.tags[0] == "html" and "table" in page.tags


def test_spectra_missing_leaves_a_note(batch, tmp_path):
    out = Path(shutil.copytree(batch[0], tmp_path / "out"))
    for path in (out / "profiles").glob("*.json"):
        doc = json.loads(path.read_text())
        for cut in doc["cuts"]:
            del cut["schmidt_values"]
        path.write_text(json.dumps(doc))
    text = report_html(out)
    assert "not drawn" in text and "--spectrum" in text
    assert text.count("data:image/png;base64") == 2  # entropy and convergence


def test_checkpoints_gone_converges_against_bond(batch, tmp_path):
    # a results directory read where its checkpoints are not: no run discarded weight
    out = Path(shutil.copytree(batch[0], tmp_path / "out"))
    summary = json.loads((out / "summary.json").read_text())
    for row in summary["rows"]:
        row["source"] = row["checkpoint"] = "/elsewhere/" + Path(row["source"]).name
    (out / "summary.json").write_text(json.dumps(summary))
    text = report_html(out)
    assert "against the inverse bond dimension" in text
    assert text.count("data:image/png;base64") == 3


def test_time_series_gets_a_heatmap(batch, tmp_path):
    out = Path(shutil.copytree(batch[0], tmp_path / "out"))
    summary = json.loads((out / "summary.json").read_text())
    for t, row in enumerate(summary["rows"]):
        row["time"] = 0.5 * t
    (out / "summary.json").write_text(json.dumps(summary))
    text = report_html(out)
    assert "Entropy S(l, t) through the series" in text and "extrapolated" not in text


def test_sharded_summaries_are_merged(batch, tmp_path):
    # an array job writes summary.shard-I-of-N.json files and no summary.json
    out = Path(shutil.copytree(batch[0], tmp_path / "out"))
    summary = json.loads((out / "summary.json").read_text())
    (out / "summary.json").unlink()
    for i in range(2):
        part = dict(summary, rows=summary["rows"][i::2])
        (out / f"summary.shard-{i}-of-2.json").write_text(json.dumps(part))
    page = _Page()
    page.feed(report_html(out))
    assert sorted(c for c in page.cells if c.endswith(".h5")) == \
        sorted(Path(r["source"]).name for r in summary["rows"])


def test_write_report(batch, tmp_path):
    path = write_report(batch[0], tmp_path / "r.html")
    text = path.read_text(encoding="utf-8")
    assert text.startswith("<!DOCTYPE html>")
    assert f"bondscope report: {Path(batch[0]).resolve().name}</title>" in text


CLI = [
    # target, output name, exit status
    ("results", "r.html", 0),     # a batch results directory
    ("results", "r.pdf", 2),      # the report is a page
    ("missing", "r.html", 3),     # no such directory
    ("profiles", "r.html", 3),    # a directory without a summary
]


@pytest.mark.parametrize("which, name, status", CLI)
def test_cli_report(which, name, status, batch, tmp_path, capsys):
    target = {"results": batch[0], "missing": tmp_path / "nope",
              "profiles": batch[0] / "profiles"}[which]
    out = tmp_path / name
    assert main(["report", str(target), "-o", str(out)]) == status
    assert out.is_file() == (status == 0)
    if status:
        assert capsys.readouterr().err.startswith("error: ")
