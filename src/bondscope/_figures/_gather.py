"""Resolve what a figure or report is asked to draw into labelled profiles.

A *source* is an :class:`Entry`, a :class:`~bondscope.Profile`, a saved profile (.json, .csv, or
an .h5 results file), an HDF5 checkpoint (profiled on the spot), or a batch
results directory (its summary lists the checkpoints; each ok row has a
profile file).  Every source becomes one or more :class:`Entry` objects.
"""

import json
import math
from pathlib import Path

from .._errors import CheckpointError
from .._runinfo import RUN_ATTRS, run_attributes
from .._text import natural_key

__all__ = ["Entry", "collect", "read_results", "entries_of_rows", "row_labels", "same_base",
           "SPECTRUM_HINT"]

SPECTRUM_HINT = "rerun `bondscope profile CHECKPOINT --spectrum -o PROFILE`"

# top-level profile fields, summary columns or checkpoint attributes read as metadata
_META_KEYS = RUN_ATTRS
# summary columns taken over (its max_discarded_weight is of the profiling truncation, not the run)
_ROW_KEYS = ("time", "time_unit", "bond_dim", "series")


class Entry:
    """One profile to draw, with a label and what is known about its origin.

    Attributes
    ----------
    label : str
        Short name for legends (the file stem, or the checkpoint name of a batch row).
    profile : Profile
    origin : str or None
        The file it came from.
    meta : dict
        ``time``, ``time_unit``, ``bond_dim``, ``series``, ``boundary`` and
        ``max_discarded_weight`` where known.
    """

    __slots__ = ("label", "profile", "origin", "meta")

    def __init__(self, label, profile, origin=None, meta=None):
        self.label, self.profile, self.origin = label, profile, origin
        self.meta = dict(meta or {})

    @property
    def max_bond(self):
        """Largest stored bond dimension (the ``bond_dim`` metadata when present)."""
        if self.meta.get("bond_dim") is not None:
            return int(self.meta["bond_dim"])
        bonds = self.profile.bond_dimensions
        return int(bonds.max()) if len(bonds) and bonds.max() > 0 else None

    def __repr__(self):
        return f"<Entry {self.label!r} from {self.origin!r}>"


def _profile_meta(prof):
    """Metadata of a profile: its top-level fields, else the batch record's attributes."""
    record = prof.get("batch")
    attrs = record.get("attrs", {}) if isinstance(record, dict) else {}
    meta = {k: attrs[k] for k in _META_KEYS if attrs.get(k) is not None}
    meta.update({k: prof.get(k) for k in _META_KEYS if prof.get(k) is not None})
    return meta


def _needs_spectra(entry, spectrum):
    if spectrum and not entry.profile.has_spectra:
        raise CheckpointError(f"{entry.origin or entry.label}: no Schmidt values in this "
                              f"profile, which this figure needs; {SPECTRUM_HINT}")
    return entry


def _summary_files(directory):
    whole = directory / "summary.json"
    if whole.is_file():
        return [whole]
    return sorted(directory.glob("summary.shard-*-of-*.json"), key=natural_key)


def read_results(directory):
    """The rows and series of a batch results directory (see :mod:`bondscope._batch`).

    Parameters
    ----------
    directory : str or Path
        Holds ``summary.json`` (or the ``summary.shard-I-of-N.json`` files of a
        sharded run, merged in shard order), ``profiles/`` and, when grouping
        was asked, ``series.json``.

    Returns
    -------
    rows : list of dict
        The summary rows in order; ``profile`` is made an absolute path and
        ``ok`` tells whether the row has a result (status done or skipped).
    series : dict
        Series name -> list of member rows, in the series file's order
        (time, then bond dimension); built from the rows' ``series`` column
        when there is no series file.

    Raises
    ------
    OSError
        No summary in the directory.
    CheckpointError
        A summary that is not a bondscope batch summary.
    """
    directory = Path(directory)
    files = _summary_files(directory)
    if not files:
        raise OSError(f"{directory}: no summary.json; not a batch results directory "
                      "(write one with `bondscope batch`)")
    rows = []
    for path in files:
        try:
            doc = json.loads(path.read_text(encoding="utf-8"))
        except ValueError as exc:
            raise CheckpointError(f"{path}: not a JSON batch summary ({exc})") from None
        if not isinstance(doc, dict) or not isinstance(doc.get("rows"), list):
            raise CheckpointError(f"{path}: no 'rows' list; not a bondscope batch summary")
        rows += [_normal_row(directory, r) for r in doc["rows"]]
    by_profile = {r["profile"]: r for r in rows if r["profile"]}
    series = {}
    for path in sorted(directory.glob("series*.json"), key=natural_key):
        doc = json.loads(path.read_text(encoding="utf-8"))
        for name, members in doc.get("series", {}).items():
            found = [by_profile.get(str(directory / m["profile"])) for m in members]
            series.setdefault(str(name), []).extend(r for r in found if r is not None)
    if not series:
        for r in rows:
            if r.get("series") is not None and r["ok"]:
                series.setdefault(str(r["series"]), []).append(r)
    return rows, series


def _normal_row(directory, row):
    row = dict(row)
    row["source"] = str(row.get("source") or row.get("key") or "?")
    row["ok"] = row.get("status") in ("done", "skipped") and bool(row.get("profile"))
    row["profile"] = str(directory / row["profile"]) if row.get("profile") else None
    return row


def row_labels(rows):
    """Legend labels for batch rows: the checkpoint's stem, or its key where stems repeat."""
    stems = [Path(r["source"]).stem for r in rows]
    return [s if stems.count(s) == 1 else r.get("key") or r["source"]
            for s, r in zip(stems, rows)]


def entries_of_rows(rows, spectrum=False):
    """Entries for the ok rows of a batch, with the summary's time and bond dimension."""
    from .._document import load_profile

    ok = [r for r in rows if r["ok"]]
    entries = []
    for r, label in zip(ok, row_labels(ok)):
        prof = load_profile(r["profile"])
        meta = run_attributes(r["source"])
        meta.update(_profile_meta(prof))
        meta.update({k: r[k] for k in _ROW_KEYS if r.get(k) is not None})
        entries.append(_needs_spectra(Entry(label, prof, r["profile"], meta), spectrum))
    return entries


def _from_results(directory, spectrum):
    rows, _ = read_results(directory)
    if not any(r["ok"] for r in rows):
        raise CheckpointError(f"{directory}: no checkpoint of this batch has a profile "
                              f"({len(rows)} rows, all failed)")
    return entries_of_rows(rows, spectrum)


def collect(sources, *, spectrum=False, options=None):
    """Labelled profiles for a list of sources (see the module docstring).

    Parameters
    ----------
    sources : source or list of sources
    spectrum : bool
        The figure needs Schmidt values: checkpoints are profiled with
        ``spectrum=True``; a saved profile without them is an error.
    options : ProfileOptions, optional
        How checkpoints are profiled (layout, ``renyi``, ``base``, ...).

    Returns
    -------
    list of Entry

    Raises
    ------
    CheckpointError
        A profile lacks the spectra the figure needs (the message says how to
        get them), or a source is not readable.
    OSError
        A path that does not exist.
    """
    from .._document import Profile, is_saved_profile, load_profile

    if isinstance(sources, (str, Path, Profile, Entry)):
        sources = [sources]
    if not sources:
        raise ValueError("no sources to draw: give at least one checkpoint, profile or "
                         "results directory")
    entries = []
    for i, src in enumerate(sources):
        if isinstance(src, Entry):
            entries.append(_needs_spectra(src, spectrum))
            continue
        if isinstance(src, Profile):
            origin = str(src.source or "<")
            label = f"profile {i + 1}" if origin.startswith("<") else \
                Path(origin.split(":")[0]).stem
            entries.append(_needs_spectra(Entry(label, src, None, _profile_meta(src)),
                                          spectrum))
            continue
        path = Path(src)
        if path.is_dir():
            entries += _from_results(path, spectrum)
        elif not path.exists():
            raise OSError(f"{path}: no such checkpoint, profile or results directory")
        elif is_saved_profile(path):
            prof = load_profile(path)
            entries.append(_needs_spectra(Entry(path.stem, prof, str(path), _profile_meta(prof)),
                                          spectrum))
        else:
            entries.append(_profile_checkpoint(path, spectrum, options))
    return entries


def _profile_checkpoint(path, spectrum, options):
    from .._pipeline import profile

    prof = profile(path, options, **({"spectrum": True} if spectrum else {}))
    meta = run_attributes(path)
    meta.update(_profile_meta(prof))
    return Entry(path.stem, prof, str(path), meta)


def same_base(entries):
    """Entropy scale factors to the first entry's log base, and that base."""
    base = entries[0].profile.log_base
    return [math.log(e.profile.log_base) / math.log(base) for e in entries], base
