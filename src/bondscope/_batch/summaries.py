"""What a batch writes besides results: summary rows (CSV, JSON) and the series index."""

import csv
import io
import json
import os
from pathlib import Path

from .._errors import EXIT_SOME_FAILED, one_line
from .._files import atomic_write, csv_cell
from .._text import natural_key

__all__ = ["BatchSummary", "COLUMNS", "PROFILES", "SUMMARY_FORMAT", "SERIES_FORMAT", "row",
           "write_summary", "write_series"]

SUMMARY_FORMAT = "bondscope-batch-summary"
SERIES_FORMAT = "bondscope-series"
PROFILES = "profiles"
COLUMNS = ("source", "status", "series", "time", "time_unit", "bond_dim", "bond_dim_from",
           "kind", "sites",
           "max_entropy", "middle_entropy", "max_bond_dimension", "max_discarded_weight",
           "infidelity", "total_charge", "middle_number_entropy", "wall_seconds", "profile",
           "key", "checkpoint", "error", "warnings")


class BatchSummary:
    """What a batch did: one row per checkpoint and the files written.

    Attributes
    ----------
    rows : list of dict
        One per checkpoint in input order, with the keys :data:`COLUMNS`.
    out : Path
        The results directory.
    files : dict
        ``"csv"``, ``"json"`` and, when grouping, ``"series"`` -> Path.
    """

    def __init__(self, rows, out, files):
        self.rows, self.out, self.files = rows, Path(out), files

    def count(self, status):
        """Rows of one status: "done", "skipped" or "failed"."""
        return sum(r["status"] == status for r in self.rows)

    @property
    def done(self):
        return self.count("done")

    @property
    def skipped(self):
        return self.count("skipped")

    @property
    def failed(self):
        return self.count("failed")

    @property
    def exit_status(self):
        """0 when every checkpoint was profiled or skipped, else 5 (``EXIT_SOME_FAILED``);
        the count of failures is :attr:`failed` and the summary's ``counts``."""
        return EXIT_SOME_FAILED if self.failed else 0

    def __len__(self):
        return len(self.rows)

    def __repr__(self):
        return (f"<BatchSummary {len(self.rows)} checkpoints in {str(self.out)!r}: "
                f"{self.done} done, {self.skipped} skipped, {self.failed} failed>")


def row(plan, found, pattern, group_attr, rename=None):
    """One summary row; ``bond_dim`` is the checkpoint's attribute (named in
    ``bond_dim_from``), else its largest stored bond dimension ("stored")."""
    attrs = found.get("attrs", {})
    series = None
    if pattern is not None:
        m = pattern.search(plan["source"])
        series = m.group(1) if m else None
    elif group_attr is not None and attrs.get(group_attr) is not None:
        series = str(attrs[group_attr])
    row = dict.fromkeys(COLUMNS)
    row.update({k: v for k, v in found.items() if k in COLUMNS})
    row.update(source=plan["source"], key=plan["key"], checkpoint=plan["path"], series=series,
               time=attrs.get("time"), time_unit=attrs.get("time_unit"),
               bond_dim=attrs.get("bond_dim"))
    if row["bond_dim"] is not None:
        row["bond_dim_from"] = (rename or {}).get("bond_dim", "bond_dim")
    elif row["max_bond_dimension"] is not None:
        row.update(bond_dim=row["max_bond_dimension"], bond_dim_from="stored")
    if found["status"] != "failed":
        row["profile"] = f"{PROFILES}/{plan['key']}.json"
    return row


def write_summary(out, suffix, rows, inputs, shard, recorded, group_by):
    counts = {s: sum(r["status"] == s for r in rows) for s in ("done", "skipped", "failed")}
    doc = {"format": SUMMARY_FORMAT, "version": 1,
           "inputs": [os.fspath(i) for i in inputs],
           "shard": None if shard is None else f"{shard[0]}/{shard[1]}",
           "options": recorded, "group_by": group_by, "counts": counts,
           "columns": list(COLUMNS), "rows": rows}
    text = json.dumps(doc, indent=1, allow_nan=False) + "\n"
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(COLUMNS)
    for r in rows:
        writer.writerow([csv_cell("" if r[c] is None else (repr(r[c]) if isinstance(r[c], float)
                                                           else r[c])) for c in COLUMNS])
    files = {"csv": out / f"summary{suffix}.csv", "json": out / f"summary{suffix}.json"}
    atomic_write(files["csv"], lambda tmp: Path(tmp).write_text(buf.getvalue(), "utf-8"))
    atomic_write(files["json"], lambda tmp: Path(tmp).write_text(text, "utf-8"))
    return files


def _number(value):
    """A time or bond dimension as a number for ordering (numeric text too), else None."""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return value
    try:
        return float(value)
    except (TypeError, ValueError):
        return None


def _order(row):
    """Series members by time, then bond dimension, numerically; then by name
    (numbers in names compared as numbers)."""
    time, bond = _number(row["time"]), _number(row["bond_dim"])
    return (time is None, time or 0, bond is None, bond or 0, natural_key(row["source"]))


def _compare_series(out, members, rename):
    """The comparison verdict of one series (``bondscope compare`` on its profiles)."""
    from .._analyses.comparison import checkpoint_meta, compare_profiles

    try:
        res = compare_profiles([out / m["profile"] for m in members],
                               names=[Path(m["checkpoint"]).name for m in members],
                               meta=[checkpoint_meta(m["checkpoint"], rename) for m in members])
    except (ValueError, OSError) as exc:
        return {"error": f"{type(exc).__name__}: {one_line(exc)}"}
    keep = ("series", "runs", "largest_difference", "converged", "threshold", "extrapolation",
            "growth_rate")
    return {k: res[k] for k in keep if k in res}


def write_series(out, suffix, rows, group_by, rename=None):
    series = {}
    for r in sorted(rows, key=_order):
        if r["series"] is not None and r["profile"] is not None:
            series.setdefault(r["series"], []).append(
                {"checkpoint": r["source"], "profile": r["profile"], "time": r["time"],
                 "bond_dim": r["bond_dim"]})
    comparisons = {name: _compare_series(out, members, rename)
                   for name, members in sorted(series.items()) if len(members) > 1}
    doc = {"format": SERIES_FORMAT, "version": 1, "group_by": group_by,
           "series": dict(sorted(series.items())), "comparisons": comparisons}
    path = out / f"series{suffix}.json"
    text = json.dumps(doc, indent=1, allow_nan=False) + "\n"
    atomic_write(path, lambda tmp: Path(tmp).write_text(text, "utf-8"))
    return path
