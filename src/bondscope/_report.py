"""One self-contained HTML page for a batch results directory.

The page holds the batch's summary table (sortable by clicking a column
heading) with each checkpoint's central charge and scaling law, the failed
checkpoints with their errors, the notes and warnings of each checkpoint, and
for each series its entropy, spectrum and convergence (or, for a time series,
heatmap) figures, and, when the profiles carry charge sectors, the entropy
split and the spectrum by charge sector, and for mixed states (density
matrices, purifications) the physical Rényi-2 entropies beside the stored
form's cut entropy; a checkpoint outside every series
gets its own entropy and spectrum figures.  Figures are inlined as base64
PNG; the style sheet and the few lines of sorting script are inline too, so
the file opens offline, anywhere, and nothing is fetched from the network.

Names and messages come from other people's files: they are escaped for
HTML, and invisible or reordering characters (a right-to-left override, a
terminal escape) are spelled out (:func:`bondscope._figures._names.visible`).
One odd checkpoint (unreadable profile, metadata of the wrong type) is noted
on the page, never fatal to it.
"""

import base64
import html
import math
import os
from datetime import datetime, timezone
from pathlib import Path

from ._errors import CheckpointError, one_line
from ._figures._gather import checked_meta, entries_of_rows, input_files, read_results
from ._figures._names import shortened, visible

__all__ = ["write_report", "report_html"]


def _fixed(digits):
    return lambda v: f"{v:.{digits}f}"


def _scientific(v):
    return "0" if v == 0 else f"{v:.2e}"


# summary columns shown: key, heading, hover text, number format; the rest stay in summary.json
_COLUMNS = (
    ("source", "checkpoint", "the checkpoint file (full path on hover)", None),
    ("status", "status", "done: profiled now; skipped: result already up to date; failed", None),
    ("series", "series", "the series the batch grouped it into", None),
    ("time", "t", "the checkpoint's time attribute", "{:.6g}".format),
    ("bond_dim", "χ (run)", ("the run's bond dimension: the checkpoint's attribute (bond_dim, "
                            "or the batch's --bond-dim-attr), else the largest stored one"), None),
    ("sites", "N", "number of sites", None),
    ("max_bond_dimension", "max χ", "largest stored bond dimension", None),
    ("max_entropy", "max S", "largest entropy over the cuts", _fixed(4)),
    ("middle_entropy", "S(N/2)", "entropy at the middle cut", _fixed(4)),
    ("central_charge", "c", "central charge of the scaling fit, with its error (shown for a "
     "logarithmic law only)", None),
    ("law", "law", "scaling law of the fit: area, logarithmic, volume or inconclusive", None),
    ("max_discarded_weight", "max discarded",
     "largest per-cut discarded weight of the truncation asked of the batch", _scientific),
    ("infidelity", "infidelity", "1 - fidelity of that truncation", _scientific),
    ("wall_seconds", "seconds", "wall time of profiling", _fixed(2)),
    ("notes", "notes", "warnings and notes (listed under Notes)", None),
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
.lede { color: var(--muted); margin: 0 0 16px; overflow-wrap: anywhere; }
.counts span { display: inline-block; margin-right: 14px; font-weight: 600; }
.counts .bad { color: var(--bad); } .counts .good { color: var(--ok); }
nav a { color: var(--link); margin-right: 12px; text-decoration: none; }
nav a:hover { text-decoration: underline; }
.scroll { overflow-x: auto; border: 1px solid var(--rule); border-radius: 6px; }
table { border-collapse: collapse; width: 100%; font-size: 13px; }
th, td { padding: 5px 8px; text-align: left; white-space: nowrap; }
td.name { white-space: normal; overflow-wrap: anywhere; min-width: 12em; max-width: 24em; }
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
ul.failures, ul.notes { padding-left: 20px; overflow-wrap: anywhere; }
ul.failures > li, ul.notes > li { margin-bottom: 8px; }
ul.notes ul { padding-left: 18px; margin: 2px 0 0; color: var(--muted); }
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
    return html.escape(visible(value), quote=True)


def _cell(key, value, fmt, shown=None):
    if value is None or value == "":
        return '<td data-v=""></td>'
    if key == "source":
        return (f'<td class="name" data-v="{_esc(shown)}" title="{_esc(value)}">'
                f"{_esc(shown)}</td>")
    if key == "status":
        return f'<td data-v="{_esc(value)}" class="status-{_esc(value)}">{_esc(value)}</td>'
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return f'<td data-v="{_esc(value)}">{_esc(value)}</td>'
    if isinstance(value, float) and not math.isfinite(value):
        return f'<td data-v="" class="num">{_esc(value)}</td>'
    text = fmt(value) if fmt else (str(value) if isinstance(value, int) else f"{value:.6g}")
    return f'<td data-v="{value!r}" class="num">{_esc(text)}</td>'


def _fit_cells(found):
    """The c and law cells of a row from its fit ({} when the row was not fitted)."""
    from ._figures.entropy import fit_summary

    if not found:
        return '<td data-v=""></td><td data-v=""></td>'
    if "error" in found:
        return ('<td data-v=""></td>'
                f'<td data-v="not fitted" title="{_esc(found["error"])}">not fitted</td>')
    summary = fit_summary(found)
    law = summary["law"] or "inconclusive"
    if summary["central_charge"] is None:
        c = f'<td data-v="" title="c is not given for a {_esc(law)} law"></td>'
    else:
        from ._figures._style import plus_minus

        text = plus_minus(summary["central_charge"], summary["central_charge_error"])
        c = f'<td data-v="{summary["central_charge"]!r}" class="num">{_esc(text)}</td>'
    return f'{c}<td data-v="{_esc(law)}" class="law-{_esc(law)}">{_esc(law)}</td>'


def _shown_columns(rows, fits, notes):
    """The columns with a value in some row (a batch without times has no t column)."""
    def filled(key):
        if key in ("source", "status"):
            return True
        if key in ("central_charge", "law"):
            return any(fits.values())
        if key == "notes":
            return bool(notes)
        return any(r.get(key) not in (None, "") for r in rows)

    return [col for col in _COLUMNS if filled(col[0])]


def _table(rows, names, fits, notes):
    columns = _shown_columns(rows, fits, notes)
    heads = "".join(f'<th scope="col" title="{_esc(tip)}"><button type="button">{_esc(h)}'
                    "</button></th>" for _, h, tip, _ in columns)
    body = []
    for r in rows:
        css = ' class="failed"' if r.get("status") == "failed" else ""
        cells = []
        for key, _, _, fmt in columns:
            if key == "central_charge":
                cells.append(_fit_cells(fits.get(r["source"])))
            elif key == "notes":
                cells.append(_cell(key, len(notes.get(r["source"], [])) or None, None))
            elif key in ("time", "bond_dim") and r.get(key) is not None \
                    and key not in checked_meta({key: r[key]}, "")[0]:
                cells.append('<td data-v="" title="ignored (see Notes)"></td>')
            elif key != "law":
                cells.append(_cell(key, r.get(key), fmt, names.get(r["source"])))
        body.append(f"<tr{css}>{''.join(cells)}</tr>")
    return (f'<div class="scroll"><table class="sortable"><thead><tr>{heads}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


def _failures(rows, names):
    failed = [r for r in rows if r.get("status") == "failed"]
    if not failed:
        return "<p>No checkpoint failed.</p>"
    items = "".join(f"<li><code>{_esc(names[r['source']])}</code><br>"
                    f"{_esc(shortened(str(r.get('error') or '?'), names))}</li>" for r in failed)
    return f'<ul class="failures">{items}</ul>'


def _notes_html(page_notes, notes, names):
    items = [f"<li>{_esc(shortened(n, names))}</li>" for n in page_notes]
    for source, found in notes.items():
        inner = "".join(f"<li>{_esc(shortened(n, names))}</li>" for n in found)
        items.append(f"<li><code>{_esc(names.get(source, source))}</code><ul>{inner}</ul></li>")
    if not items:
        return "<p>No warnings or notes.</p>"
    return f'<ul class="notes">{"".join(items)}</ul>'


def _png(fig):
    from ._figures._style import figure_bytes

    return base64.b64encode(figure_bytes(fig, "png", dpi=110)).decode("ascii")


def _figure_html(kind, entries, caption, alt, **options):
    """An inline figure, or a note saying why it could not be drawn.

    This is the page's guard: whatever one set of checkpoints does to a
    figure, the rest of the page is written.
    """
    import warnings

    from ._figures._kinds import figure_function

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # the page lists its checkpoints' notes itself
            fig = figure_function(kind)(entries, **options)
        data = _png(fig)
    except Exception as exc:  # one figure must not abort the page
        known = isinstance(exc, (CheckpointError, ValueError, KeyError, OSError))
        reason = one_line(exc) if known else f"{type(exc).__name__}: {one_line(exc)}"
        return f'<p class="note">{_esc(caption)}: not drawn ({_esc(reason)}).</p>'
    return (f'<figure><img alt="{_esc(alt)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{_esc(caption)}</figcaption></figure>")


def _spectrum_html(entry):
    if not entry.profile.has_spectra:
        return (f'<p class="note">Entanglement spectrum of {_esc(entry.label)}: not drawn (the '
                "batch stored no Schmidt values; rerun it with --spectrum).</p>")
    chi = f" (χ = {entry.max_bond})" if entry.max_bond else ""
    return _figure_html("spectrum", [entry], f"Entanglement spectrum of {entry.label}{chi}",
                        f"entanglement spectrum of {entry.label}", title="")


def _section_html(anchor, heading, members, boundary, fit):
    """The figures of one series (or of one checkpoint outside every series)."""
    times = [m.meta.get("time") for m in members]
    timed = len(members) > 1 and None not in times and len(set(times)) == len(times)
    entropy = ("Entropy S(l) of each checkpoint with its central-charge fit (dashed) and "
               "the residuals") if fit is not False else "Entropy S(l) of each checkpoint"
    parts = [f'<h2 id="{anchor}">{_esc(heading)}</h2>',
             f'<p class="lede">{len(members)} checkpoint(s): '
             f'{_esc(", ".join(m.label for m in members))}</p>',
             _figure_html("entropy", members, entropy, f"entropy of {heading}",
                          boundary=boundary, fit=fit, title=""),
             _spectrum_html(members[-1])]
    parts += _charge_figures(members[-1])
    parts += _mixed_figures(members, heading)
    if timed:
        parts.append(_figure_html("heatmap", members, "Entropy S(l, t) through the series",
                                  f"entropy heatmap of {heading}", title=""))
    elif len(members) > 1:
        weighed = all("max_discarded_weight" in m.meta
                      or isinstance(m.profile.get("discarded_weight"), (int, float))
                      for m in members)
        parts.append(_figure_html("convergence", members, "Middle-cut entropy against the "
                                  f"{'discarded weight' if weighed else 'inverse bond dimension'}"
                                  ", extrapolated to zero", f"convergence of {heading}",
                                  against="weight" if weighed else "bond", title=""))
    return "\n".join(parts)


def _charge_figures(last):
    """The two charge figures of a profile with charge sectors (none without)."""
    cuts = last.profile.cuts
    if not cuts or "sectors" not in cuts[0]:
        return []
    parts = [_figure_html("entropysplit", [last],
                          f"Number and configurational entropy of {last.label}",
                          f"entropy split of {last.label}", title="")]
    if all("schmidt_values" in sec for sec in cuts[len(cuts) // 2]["sectors"]):
        parts.append(_figure_html("sectors", [last],
                                  f"Entanglement spectrum of {last.label} at the middle cut, "
                                  "by charge sector", f"sector spectrum of {last.label}",
                                  title=""))
    return parts


def _mixed_figures(members, heading):
    """The mixed-state figure of a series of density-matrix or purified checkpoints."""
    from ._figures.mixed import is_mixed

    if not all(is_mixed(m.profile) for m in members):
        return []
    return [_figure_html("mixed", members, "Rényi-2 entropy S_2(A) and mutual information "
                         "I_2 of the physical state, beside the stored form's cut entropy "
                         "(before and after disentangling, where asked)",
                         f"mixed-state entropies of {heading}", title="")]


def _counts(total, counts):
    failed = "bad" if counts["failed"] else ""
    return (f"<span>{total} checkpoints</span>"
            f'<span class="good">{counts["done"]} done</span>'
            f'<span>{counts["skipped"]} skipped (up to date)</span>'
            f'<span class="{failed}">{counts["failed"]} failed</span>')


def _short_names(rows):
    """Checkpoint path -> its name relative to the folder all checkpoints share."""
    sources = [r["source"] for r in rows]
    try:
        common = os.path.commonpath([os.path.dirname(os.path.abspath(s)) for s in sources])
    except ValueError:  # paths on different drives
        common = ""
    return {s: (os.path.relpath(os.path.abspath(s), common) if common else Path(s).name)
            for s in sources}


def _row_notes(entry, fit):
    """Warnings of the checkpoint's profiling, metadata ignored, and a fit that failed."""
    record = entry.profile.get("batch")
    found = [str(w) for w in record.get("warnings", [])] if isinstance(record, dict) else []
    found += entry.notes
    if fit and "error" in fit:
        found.append(f"no scaling fit: {fit['error']}")
    return found


def _fit_text(settings):
    """The end of the table's lede: where c and the law come from."""
    if settings is None:
        return ""
    given = ", ".join(f"{k} {','.join(map(str, v)) or 'none'}" if isinstance(v, (list, tuple))
                      else f"{k} {v}" for k, v in settings.items())
    return f"; c and the law come from the scaling fit with {given or 'default settings'}"


def report_html(results_dir, *, boundary=None, title=None, fit=True):
    """The report page of a batch results directory, as a string.

    Parameters
    ----------
    results_dir : str or Path
        Written by the batch runner (``summary.json`` and/or its shards,
        ``profiles/``).
    boundary : {"open", "periodic"}, optional
        Boundary condition for the central-charge fits (default: each
        checkpoint's ``boundary`` attribute, else open).
    title : str, optional
        Page heading (default: "bondscope report: <directory name>").
    fit : bool or dict
        The central-charge fit of the table and the entropy figures: True
        (default settings), False (none) or :func:`bondscope.fit_scaling`
        keywords (``window``, ``corrections``, ``parity_exponent``,
        ``boundary``).

    Returns
    -------
    str
        A complete HTML document with everything inlined.

    Raises
    ------
    TypeError
        ``fit`` names a keyword that fit_scaling does not take.
    ValueError
        A boundary other than "open" or "periodic".
    OSError, CheckpointError
        Not a readable results directory.
    """
    from . import __version__
    from ._figures.entropy import fit_entries, fit_settings

    settings = fit_settings(fit)
    if boundary not in (None, "open", "periodic"):
        raise ValueError(f"boundary (--boundary) must be 'open' or 'periodic', "
                         f"found {boundary!r}")
    results_dir = Path(results_dir)
    index = read_results(results_dir)
    rows, names = index.rows, _short_names(index.rows)
    entries, unread = entries_of_rows(rows)
    _, fitted = fit_entries(entries, settings, boundary)
    fits = {e.checkpoint: f for e, f in zip(entries, fitted or [{}] * len(entries))}
    notes = {e.checkpoint: n for e in entries if (n := _row_notes(e, fits[e.checkpoint]))}
    by_source = {e.checkpoint: e for e in entries}
    groups = [(name, [by_source[r["source"]] for r in members if r["source"] in by_source])
              for name, members in index.series.items()]
    grouped = {r["source"] for members in index.series.values() for r in members}
    alone = [e for e in entries if e.checkpoint not in grouped]
    sections = [(f"Series {name}", members) for name, members in groups if members]
    if not index.series and alone:  # an ungrouped batch: all its checkpoints as one series
        sections, alone = [("All checkpoints", alone)], []
    sections += [(f"Checkpoint {names[e.checkpoint]}", [e]) for e in alone]
    fit_option = False if settings is None else settings
    body = "".join(_section_html(f"section-{i}", heading, members, boundary, fit_option)
                   for i, (heading, members) in enumerate(sections, 1))
    links = "".join(f'<a href="#section-{i}">{_esc(h)}</a>' for i, (h, _) in enumerate(sections, 1))
    counts = {s: sum(r.get("status") == s for r in rows) for s in ("done", "skipped", "failed")}
    heading = title or f"bondscope report: {results_dir.resolve().name}"
    page_notes = index.notes + unread
    noted = len(page_notes) + sum(len(n) for n in notes.values())
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
<nav><a href="#summary">summary</a><a href="#failures">failures</a><a href="#notes">notes</a>\
{links}</nav>
</header>
<main>
<h2 id="summary">Summary</h2>
<p class="lede">One row per checkpoint; click a heading to sort, hover over it for its
meaning. Entropies are in the profiles' own units{_esc(_fit_text(settings))}.</p>
{_table(rows, names, fits, notes)}
<h2 id="failures">Failures ({counts["failed"]})</h2>
{_failures(rows, names)}
<h2 id="notes">Notes ({noted})</h2>
{_notes_html(page_notes, notes, names)}
{body}
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
        The HTML file (written whole or not at all); never one of the
        directory's summaries, profiles or checkpoints.
    boundary, title, fit
        See :func:`report_html`.

    Returns
    -------
    Path
        ``output``.

    Raises
    ------
    ValueError
        ``output`` does not end in .html or .htm, or is one of the inputs.
    TypeError
        An unknown fit setting.
    OSError, CheckpointError
        Not a readable results directory.
    """
    from ._files import atomic_write, refuse_overwrite

    output = Path(output)
    if output.suffix.lower() not in (".html", ".htm"):
        raise ValueError(f"{output}: the report is an HTML page; give it an .html name")
    inputs = input_files([Path(results_dir)])
    refuse_overwrite(output, inputs, "an input of the report")
    page = report_html(results_dir, boundary=boundary, title=title, fit=fit)
    return atomic_write(output, lambda tmp: Path(tmp).write_text(page, encoding="utf-8"))
