"""One self-contained HTML page for a batch results directory.

The page holds the batch's summary table (sortable by clicking a column
heading), the failed checkpoints with their errors, and for each series its
entropy, spectrum and convergence (or, for a time series, heatmap) figures.
Figures are inlined as base64 PNG; the style sheet and the few lines of
sorting script are inline too, so the file opens offline, anywhere, and
nothing is fetched from the network.
"""

import base64
import html
import math
from datetime import datetime, timezone
from pathlib import Path

from ._errors import CheckpointError, one_line
from ._figures._gather import entries_of_rows, read_results

__all__ = ["write_report", "report_html"]

# summary columns shown, with headings; the rest stay in summary.json
_COLUMNS = (
    ("source", "checkpoint", "the checkpoint file (full path on hover)"),
    ("status", "status", "done: profiled now; skipped: result already up to date; failed"),
    ("series", "series", "the series the batch grouped it into"),
    ("time", "t", "the checkpoint's time attribute"),
    ("bond_dim", "χ (run)", "the checkpoint's bond_dim attribute"),
    ("sites", "N", "number of sites"),
    ("max_bond_dimension", "max χ", "largest stored bond dimension"),
    ("max_entropy", "max S", "largest entropy over the cuts"),
    ("middle_entropy", "S(N/2)", "entropy at the middle cut"),
    ("max_discarded_weight", "max discarded",
     "largest per-cut discarded weight of the truncation asked of the batch"),
    ("infidelity", "infidelity", "1 - fidelity of that truncation"),
    ("wall_seconds", "seconds", "wall time of profiling"),
    ("warnings", "warnings", "warnings raised while profiling"),
)

_CSS = """
:root { --ink: #1f2328; --muted: #5c6670; --rule: #d8dde3; --band: #f4f6f8;
        --ok: #009E73; --bad: #D55E00; --link: #0072B2; }
* { box-sizing: border-box; }
body { margin: 0 auto; max-width: 1100px; padding: 24px 28px 60px; color: var(--ink);
       font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }
h1 { font-size: 24px; margin: 0 0 4px; }
h2 { font-size: 19px; margin: 36px 0 10px; padding-bottom: 4px;
     border-bottom: 2px solid var(--rule); }
h3 { font-size: 15px; margin: 20px 0 6px; color: var(--muted); }
.lede { color: var(--muted); margin: 0 0 16px; }
.counts span { display: inline-block; margin-right: 14px; font-weight: 600; }
.counts .bad { color: var(--bad); } .counts .good { color: var(--ok); }
nav a { color: var(--link); margin-right: 12px; text-decoration: none; }
nav a:hover { text-decoration: underline; }
.scroll { overflow-x: auto; border: 1px solid var(--rule); border-radius: 6px; }
table { border-collapse: collapse; width: 100%; font-size: 13px; }
th, td { padding: 5px 9px; text-align: left; white-space: nowrap; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
thead th { background: var(--band); border-bottom: 1px solid var(--rule); position: sticky;
           top: 0; }
thead button { all: unset; cursor: pointer; font-weight: 600; }
thead button:focus-visible { outline: 2px solid var(--link); }
thead th[aria-sort="ascending"] button::after { content: " \\25B2"; font-size: 10px; }
thead th[aria-sort="descending"] button::after { content: " \\25BC"; font-size: 10px; }
tbody tr:nth-child(even) { background: #fafbfc; }
tbody tr.failed td { color: var(--bad); }
.status-failed { font-weight: 600; }
ul.failures { padding-left: 20px; } ul.failures li { margin-bottom: 8px; }
code { font: 12.5px ui-monospace, SFMono-Regular, Menlo, Consolas, monospace;
       background: var(--band); padding: 1px 4px; border-radius: 3px; }
figure { margin: 10px 0 22px; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--rule); border-radius: 4px; }
figcaption { color: var(--muted); font-size: 13px; margin-top: 4px; }
.note { color: var(--muted); font-style: italic; }
footer { margin-top: 48px; color: var(--muted); font-size: 12px; }
"""

_SCRIPT = """
document.querySelectorAll("table.sortable").forEach(function (table) {
  var heads = table.querySelectorAll("thead th");
  heads.forEach(function (th, col) {
    th.querySelector("button").addEventListener("click", function () {
      var down = th.getAttribute("aria-sort") === "ascending";
      heads.forEach(function (h) { h.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", down ? "descending" : "ascending");
      var body = table.tBodies[0], rows = Array.from(body.rows);
      rows.sort(function (a, b) {
        var x = a.cells[col].dataset.v, y = b.cells[col].dataset.v;
        var nx = parseFloat(x), ny = parseFloat(y), r;
        if (x === "" || y === "") return (x === "") - (y === "");  // blanks last
        r = !isNaN(nx) && !isNaN(ny) ? nx - ny : x.localeCompare(y);
        return down ? -r : r;
      });
      rows.forEach(function (r) { body.appendChild(r); });
    });
  });
});
"""


def _esc(value):
    return html.escape(str(value), quote=True)


def _cell(key, value):
    if value is None or value == "":
        return '<td data-v=""></td>'
    if key == "source":
        name = Path(str(value)).name
        return f'<td data-v="{_esc(name)}" title="{_esc(value)}">{_esc(name)}</td>'
    if key == "status":
        return f'<td data-v="{_esc(value)}" class="status-{_esc(value)}">{_esc(value)}</td>'
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return f'<td data-v="{_esc(value)}">{_esc(value)}</td>'
    if isinstance(value, float) and not math.isfinite(value):
        return f'<td data-v="" class="num">{_esc(value)}</td>'
    text = str(value) if isinstance(value, int) else _number(value)
    return f'<td data-v="{value!r}" class="num">{text}</td>'


def _number(x):
    if x == 0:
        return "0"
    if 1e-3 <= abs(x) < 1e5:
        return f"{x:.4f}".rstrip("0").rstrip(".")
    return f"{x:.3e}"


def _table(rows):
    heads = "".join(f'<th scope="col" title="{_esc(tip)}"><button type="button">{_esc(h)}'
                    "</button></th>" for _, h, tip in _COLUMNS)
    body = []
    for r in rows:
        css = ' class="failed"' if r.get("status") == "failed" else ""
        body.append(f"<tr{css}>" + "".join(_cell(k, r.get(k)) for k, _, _ in _COLUMNS) + "</tr>")
    return (f'<div class="scroll"><table class="sortable"><thead><tr>{heads}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


def _failures(rows):
    failed = [r for r in rows if r.get("status") == "failed"]
    if not failed:
        return "<p>No checkpoint failed.</p>"
    items = "".join(f"<li><code>{_esc(r['source'])}</code><br>{_esc(r.get('error') or '?')}</li>"
                    for r in failed)
    return f'<ul class="failures">{items}</ul>'


def _png(fig):
    from ._figures._style import figure_bytes

    return base64.b64encode(figure_bytes(fig, "png", dpi=110)).decode("ascii")


def _figure_html(draw, entries, caption, alt, **options):
    """An inline figure, or a note saying why it could not be drawn."""
    try:
        fig = draw(entries, **options)
    except (CheckpointError, ValueError, KeyError) as exc:
        reason = one_line(exc)
        return f'<p class="note">{_esc(caption)}: not drawn ({_esc(reason)}).</p>'
    return (f'<figure><img alt="{_esc(alt)}" src="data:image/png;base64,{_png(fig)}">'
            f"<figcaption>{_esc(caption)}</figcaption></figure>")


def _anchor(name):
    return "series-" + "".join(c if c.isalnum() else "-" for c in str(name))


def _series_html(name, members, boundary, fit):
    from ._figures._kinds import figure_function as drawing

    times = [m.meta.get("time") for m in members]
    timed = len(members) > 1 and all(isinstance(t, (int, float)) for t in times) \
        and len(set(times)) == len(times)
    last = members[-1]
    chi = f" (χ = {last.max_bond})" if last.max_bond else ""
    parts = [f'<h2 id="{_anchor(name)}">Series {_esc(name)}</h2>',
             f'<p class="lede">{len(members)} checkpoint(s): '
             f'{_esc(", ".join(m.label for m in members))}</p>',
             _figure_html(drawing("entropy"), members,
                          "Entropy S(l) of each checkpoint with its central-charge fit "
                          "(dashed) and the residuals",
                          f"entropy of series {name}", boundary=boundary, fit=fit, title=""),
             _figure_html(drawing("spectrum"), [last],
                          f"Entanglement spectrum of {last.label}{chi}",
                          f"entanglement spectrum of {last.label}", title="")
             if last.profile.has_spectra else
             f'<p class="note">Entanglement spectrum of {_esc(last.label)}: not drawn (the '
             "batch stored no Schmidt values; rerun it with --spectrum).</p>"]
    if timed:
        parts.append(_figure_html(drawing("heatmap"), members,
                                  "Entropy S(l, t) through the series",
                                  f"entropy heatmap of series {name}", title=""))
    elif len(members) > 1:
        weighed = all(isinstance(m.meta.get("max_discarded_weight",
                                            m.profile.get("discarded_weight")), (int, float))
                      for m in members)
        parts.append(_figure_html(drawing("convergence"), members,
                                  "Middle-cut entropy against the "
                                  f"{'discarded weight' if weighed else 'inverse bond dimension'}"
                                  ", extrapolated to zero", f"convergence of series {name}",
                                  against="weight" if weighed else "bond", title=""))
    return "\n".join(parts)


def _counts(total, counts):
    failed = "bad" if counts["failed"] else ""
    return (f"<span>{total} checkpoints</span>"
            f'<span class="good">{counts["done"]} done</span>'
            f'<span>{counts["skipped"]} skipped (up to date)</span>'
            f'<span class="{failed}">{counts["failed"]} failed</span>')


def report_html(results_dir, *, boundary=None, title=None, fit=True):
    """The report page of a batch results directory, as a string.

    Parameters
    ----------
    results_dir : str or Path
        Written by the batch runner (``summary.json``, ``profiles/``, ``series.json``).
    boundary : {"open", "periodic"}, optional
        Boundary condition for the central-charge fits (default: each
        checkpoint's ``boundary`` attribute, else open).
    title : str, optional
        Page heading (default: "bondscope report: <directory name>").
    fit : bool or dict
        The central-charge fit of the entropy figures: True (default
        settings), False (none) or :func:`bondscope.fit_scaling` keywords.

    Returns
    -------
    str
        A complete HTML document with everything inlined.

    Raises
    ------
    OSError, CheckpointError
        Not a readable results directory.
    """
    from . import __version__

    results_dir = Path(results_dir)
    rows, series = read_results(results_dir)
    if not series and any(r["ok"] for r in rows):
        series = {"all checkpoints": [r for r in rows if r["ok"]]}
    counts = {s: sum(r.get("status") == s for r in rows) for s in ("done", "skipped", "failed")}
    heading = title or f"bondscope report: {results_dir.resolve().name}"
    sections = [_series_html(name, entries_of_rows(members), boundary, fit)
                for name, members in series.items()]
    links = "".join(f'<a href="#{_anchor(n)}">{_esc(n)}</a>' for n in series)
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{_esc(heading)}</title>
<style>{_CSS}</style>
</head>
<body>
<header>
<h1>{_esc(heading)}</h1>
<p class="lede">Results directory <code>{_esc(results_dir.resolve())}</code></p>
<p class="counts">{_counts(len(rows), counts)}</p>
<nav><a href="#summary">summary</a><a href="#failures">failures</a>{links}</nav>
</header>
<main>
<h2 id="summary">Summary</h2>
<p class="lede">One row per checkpoint; click a heading to sort, hover over it for its
meaning. Entropies are in the profiles' own units.</p>
{_table(rows)}
<h2 id="failures">Failures ({counts["failed"]})</h2>
{_failures(rows)}
{"".join(sections)}
</main>
<footer>Written by bondscope {_esc(__version__)} on {stamp}.</footer>
<script>{_SCRIPT}</script>
</body>
</html>
"""


def write_report(results_dir, output, *, boundary=None, title=None, fit=True):
    """Write the report page of a batch results directory to one HTML file.

    Parameters
    ----------
    results_dir : str or Path
    output : str or Path
        The HTML file (written whole or not at all).
    boundary, title, fit
        See :func:`report_html`.

    Returns
    -------
    Path
        ``output``.

    Raises
    ------
    ValueError
        ``output`` does not end in .html or .htm.
    OSError, CheckpointError
        Not a readable results directory.
    """
    from ._files import atomic_write

    output = Path(output)
    if output.suffix.lower() not in (".html", ".htm"):
        raise ValueError(f"{output}: the report is an HTML page; give it an .html name")
    page = report_html(results_dir, boundary=boundary, title=title, fit=fit)
    return atomic_write(output, lambda tmp: Path(tmp).write_text(page, encoding="utf-8"))
