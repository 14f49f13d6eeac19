"""Resolve what a figure or report is asked to draw into labelled profiles.

A *source* is an :class:`Entry`, a :class:`~bondscope.Profile`, a saved profile (.json, .csv, or
an .h5 results file), an HDF5 checkpoint (profiled on the spot), or a batch
results directory (its summary lists the checkpoints; each ok row has a
profile file).  Every source becomes one or more :class:`Entry` objects.
"""

import json
import math
import warnings
from pathlib import Path

from .._errors import CheckpointError, one_line
from .._runinfo import RUN_ATTRS, attribute_names, run_attributes
from .._text import natural_key
from ._names import figure_text, visible

__all__ = ["Entry", "BatchIndex", "collect", "read_results", "entries_of_rows", "distinct_labels",
           "checked_meta", "input_files", "same_base", "SPECTRUM_HINT"]

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
        Short name for legends (the checkpoint's stem, with as many of its
        folders as tell it apart from the other entries).
    profile : Profile
    origin : str or None
        The file it came from.
    meta : dict
        ``time``, ``time_unit``, ``bond_dim``, ``series``, ``boundary`` and
        ``max_discarded_weight`` where known and of a usable type
        (see :func:`checked_meta`).
    notes : list of str
        One line per piece of metadata that was ignored, and why.
    checkpoint : str or None
        The checkpoint the profile was made from, where known.
    """

    __slots__ = ("label", "profile", "origin", "meta", "notes", "checkpoint")

    def __init__(self, label, profile, origin=None, meta=None, notes=(), checkpoint=None):
        self.label, self.profile, self.origin = label, profile, origin
        self.meta = dict(meta or {})
        self.notes, self.checkpoint = list(notes), checkpoint

    @property
    def text(self):
        """The label as figure text: invisible characters spelled out, ``$`` literal."""
        return figure_text(self.label)

    @property
    def max_bond(self):
        """Largest stored bond dimension (the ``bond_dim`` metadata when present)."""
        if self.meta.get("bond_dim") is not None:
            return int(self.meta["bond_dim"])
        bonds = self.profile.bond_dimensions
        return int(bonds.max()) if len(bonds) and bonds.max() > 0 else None

    def __repr__(self):
        return f"<Entry {self.label!r} from {self.origin!r}>"


def _real(value):
    return isinstance(value, (int, float)) and not isinstance(value, bool) \
        and math.isfinite(value)


def _bond(value):
    return int(value) if _real(value) and value >= 1 and float(value).is_integer() else None


# metadata key -> (value if usable else None, what was expected)
_CHECKS = {
    "time": (lambda v: v if _real(v) else None, "a finite number"),
    "time_unit": (lambda v: v if isinstance(v, str) else None, "a text"),
    "bond_dim": (_bond, "a whole number >= 1"),
    "series": (lambda v: str(v) if isinstance(v, (str, int)) and not isinstance(v, bool)
               else None, "a name"),
    "boundary": (lambda v: v if v in ("open", "periodic") else None, "'open' or 'periodic'"),
    "max_discarded_weight": (lambda v: v if _real(v) and 0 <= v <= 1 else None,
                             "a number in [0, 1]"),
}


def checked_meta(meta, where):
    """The run metadata of usable type, and one note per value ignored.

    A checkpoint written by other code may hold ``boundary = [1, 2]`` or a
    text time; such values are left out (the figure falls back to its
    defaults) and reported, never fatal.

    Examples
    --------
    >>> checked_meta({"time": 0.5, "boundary": [1, 2]}, "ck.h5")
    ({'time': 0.5}, ["ck.h5: run metadata 'boundary' = [1, 2] ignored (expected 'open' or \
'periodic')"])
    """
    clean, notes = {}, []
    for key, value in meta.items():
        if value is None or key not in _CHECKS:
            continue
        check, expected = _CHECKS[key]
        usable = check(value)
        if usable is None:
            shown = repr(value)
            shown = shown if len(shown) <= 60 else shown[:57] + "..."
            notes.append(f"{visible(where)}: run metadata {key!r} = {visible(shown)} ignored "
                         f"(expected {expected})")
        else:
            clean[key] = usable
    return clean, notes


def _profile_meta(prof):
    """Metadata of a profile: its top-level fields, else the batch record's attributes."""
    attrs = _record(prof).get("attrs", {})
    meta = {k: attrs[k] for k in _META_KEYS if isinstance(attrs, dict) and k in attrs}
    meta.update({k: prof.get(k) for k in _META_KEYS if prof.get(k) is not None})
    return meta


def _record(prof):
    record = prof.get("batch")
    return record if isinstance(record, dict) else {}


def _needs_spectra(entry, spectrum):
    if spectrum and not entry.profile.has_spectra:
        raise CheckpointError(f"{visible(entry.origin or entry.label)}: no Schmidt values in "
                              f"this profile, which this figure needs; {SPECTRUM_HINT}")
    return entry


def _entry(label, prof, origin, meta, checkpoint=None):
    clean, notes = checked_meta(meta, checkpoint or origin or label)
    return Entry(label, prof, origin, clean, notes, checkpoint)


class BatchIndex:
    """The rows and series of a batch results directory (:func:`read_results`).

    Attributes
    ----------
    rows : list of dict
        One per checkpoint; ``profile`` is an absolute path, ``ok`` tells
        whether the row has a result (status done or skipped).
    series : dict
        Series name -> its ok member rows, ordered by time, then bond
        dimension, then name.
    files : list of Path
        The summary files read, oldest first.
    notes : list of str
        Summary files that could not be read (when another could).
    """

    def __init__(self, rows, series, files, notes):
        self.rows, self.series, self.files, self.notes = rows, series, files, notes


def _summary_files(directory):
    """Every summary of the directory, oldest first (the unsharded one last on a tie)."""
    found = [p for p in (directory / "summary.json", *directory.glob("summary.shard-*-of-*.json"))
             if p.is_file()]
    return sorted(found, key=lambda p: (p.stat().st_mtime_ns, p.name == "summary.json",
                                        natural_key(p.name)))


def _summary_rows(path):
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError, RecursionError) as exc:
        raise CheckpointError(f"{path}: not a JSON batch summary ({one_line(exc)})") from None
    if not isinstance(doc, dict) or not isinstance(doc.get("rows"), list):
        raise CheckpointError(f"{path}: no 'rows' list; not a bondscope batch summary")
    return [r for r in doc["rows"] if isinstance(r, dict)]


def read_results(directory):
    """The rows and series of a batch results directory (see :mod:`bondscope._batch`).

    Parameters
    ----------
    directory : str or Path
        Holds ``summary.json`` and/or the ``summary.shard-I-of-N.json`` files of
        a sharded run, and ``profiles/``.

    Returns
    -------
    BatchIndex

    Notes
    -----
    All summaries are merged, one row per checkpoint (by its result key):
    where a checkpoint appears in several (the shards, then the final
    unsharded run of the documented workflow), the most recently written
    summary's row is kept.  Series are built from the rows' ``series``
    column, so each member appears once whichever series files exist.

    Raises
    ------
    OSError
        No summary in the directory.
    CheckpointError
        No summary that can be read as a bondscope batch summary.
    """
    directory = Path(directory)
    files = _summary_files(directory)
    if not files:
        raise OSError(f"{directory}: no summary.json; not a batch results directory "
                      "(write one with `bondscope batch`)")
    merged, notes, read, failure = {}, [], [], None
    for path in files:
        try:
            rows = _summary_rows(path)
        except CheckpointError as exc:
            failure = exc
            notes.append(str(exc))
            continue
        read.append(path)
        for r in rows:
            row = _normal_row(directory, r)
            merged[row.get("key") or row["source"]] = row
    if not read:
        raise failure
    rows = list(merged.values())
    if len(read) > 1:
        rows.sort(key=lambda r: natural_key(r["source"]))
    series = {}
    for r in rows:
        name = checked_meta({"series": r.get("series")}, r["source"])[0].get("series")
        if name is not None and r["ok"]:
            series.setdefault(name, []).append(r)
    for members in series.values():
        members.sort(key=_member_order)
    return BatchIndex(rows, series, read, notes)


def _member_order(row):
    """Time, then bond dimension (the run's, else the largest stored), then name."""
    meta = checked_meta({k: row.get(k) for k in ("time", "bond_dim")}, "")[0]
    chi = meta.get("bond_dim", _bond(row.get("max_bond_dimension")))
    return (meta.get("time") is None, meta.get("time", 0.0), chi is None, chi or 0,
            natural_key(row["source"]))


def _normal_row(directory, row):
    row = dict(row)
    row["source"] = str(row.get("source") or row.get("key") or "?")
    profile = row.get("profile")
    row["ok"] = row.get("status") in ("done", "skipped") and isinstance(profile, str) \
        and bool(profile)
    row["profile"] = str(directory / profile) if row["ok"] else None
    return row


def distinct_labels(paths):
    """Legend labels: each path's stem, with as many parent folders as tell it apart.

    Examples
    --------
    >>> distinct_labels(["scan/J0.5/state.h5", "scan/J1.0/state.h5", "other/run.h5"])
    ['J0.5/state', 'J1.0/state', 'run']
    """
    parts = [Path(str(p)).with_suffix("").parts or (str(p),) for p in paths]
    depth = [1] * len(parts)
    while True:
        labels = ["/".join(p[-d:]) for p, d in zip(parts, depth)]
        clash = [i for i, lab in enumerate(labels) if labels.count(lab) > 1
                 and depth[i] < len(parts[i])]
        if not clash:
            return labels
        for i in clash:
            depth[i] += 1


def entries_of_rows(rows, spectrum=False):
    """Entries for the ok rows of a batch, with the summary's time and bond dimension.

    Returns
    -------
    entries : list of Entry
    notes : list of str
        One line per row whose profile could not be read (it is left out).
    """
    from .._document import load_profile

    ok = [r for r in rows if r["ok"]]
    entries, notes = [], []
    for r, label in zip(ok, distinct_labels([r["source"] for r in ok])):
        try:
            prof = load_profile(r["profile"])
        except (OSError, CheckpointError) as exc:
            notes.append(f"{visible(r['source'])}: left out, its profile cannot be read "
                         f"({visible(one_line(exc))})")
            continue
        meta = run_attributes(r.get("checkpoint") or r["source"])  # resolved path if known
        meta.update(_profile_meta(prof))
        meta.update({k: r[k] for k in _ROW_KEYS if r.get(k) is not None})
        entries.append(_needs_spectra(_entry(label, prof, r["profile"], meta, r["source"]),
                                      spectrum))
    return entries, notes


def _from_results(directory, spectrum):
    index = read_results(directory)
    if not any(r["ok"] for r in index.rows):
        raise CheckpointError(f"{directory}: no checkpoint of this batch has a profile "
                              f"({len(index.rows)} rows, all failed)")
    entries, notes = entries_of_rows(index.rows, spectrum)
    if not entries:
        raise CheckpointError(f"{directory}: no profile of this batch can be read "
                              f"({notes[0]})")
    return entries, index.notes + notes


def input_files(sources):
    """The files a figure of ``sources`` reads (the checkpoints of a results directory
    included), so that an output never overwrites one of them."""
    found = []
    if isinstance(sources, (str, Path)) or not isinstance(sources, (list, tuple)):
        sources = [sources]
    for src in sources:
        if isinstance(src, Entry):
            found += [p for p in (src.origin, src.checkpoint) if p]
        elif isinstance(src, (str, Path)):
            path = Path(src)
            if path.is_dir():
                try:
                    index = read_results(path)
                except (OSError, CheckpointError):
                    continue
                found += index.files + [Path(r[k]) for r in index.rows
                                        for k in ("source", "checkpoint", "profile")
                                        if r.get(k)]
            else:
                found.append(path)
    return found


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
    from .._document import Profile

    if isinstance(sources, (str, Path, Profile, Entry)):
        sources = [sources]
    if not sources:
        raise ValueError("no sources to draw: give at least one checkpoint, profile or "
                         "results directory")
    entries, named, notes = [], [], []
    for i, src in enumerate(sources):
        if isinstance(src, Entry):
            entries.append(_needs_spectra(src, spectrum))
            named.append(None)
            continue
        if isinstance(src, Profile):
            found = [_profile_entry(src, None, i)]
        elif Path(src).is_dir():
            found, more = _from_results(Path(src), spectrum)
            notes += more
        else:
            found = [_path_entry(Path(src), spectrum, options)]
        for entry in found:
            entries.append(_needs_spectra(entry, spectrum))
            named.append(entry.checkpoint or entry.origin or entry.label)
            notes += entry.notes
    _relabel(entries, named)
    for note in notes:
        warnings.warn(note, stacklevel=3)
    return entries


def _relabel(entries, named):
    """Labels of the entries collected here, told apart by folders where stems repeat."""
    at = [i for i, n in enumerate(named) if n is not None]
    for i, label in zip(at, distinct_labels([named[i] for i in at])):
        entries[i].label = label


def _profile_entry(prof, origin, i):
    """An entry of a Profile: named after its checkpoint (a batch result's record, or
    the profile's source), else its file, else its place in the list."""
    source = str(prof.source or "")
    checkpoint = _record(prof).get("checkpoint")
    if not isinstance(checkpoint, str) or not checkpoint:
        checkpoint = source.split(":")[0] if source and not source.startswith("<") and \
            origin is None else None
    name = checkpoint or origin
    label = Path(name).stem if name else f"profile {i + 1}"
    return _entry(label, prof, origin, _profile_meta(prof), checkpoint)


def _path_entry(path, spectrum, options):
    from .._document import is_saved_profile, load_profile

    if not path.exists():
        raise OSError(f"{visible(path)}: no such checkpoint, profile or results directory")
    if is_saved_profile(path):
        return _profile_entry(load_profile(path), str(path), 0)
    from .._pipeline import profile

    prof = profile(path, options, **({"spectrum": True} if spectrum else {}))
    meta = run_attributes(path, rename=attribute_names(options))
    meta.update(_profile_meta(prof))
    return _entry(path.stem, prof, str(path), meta, str(path))


def same_base(entries):
    """Entropy scale factors to the first entry's log base, and that base."""
    base = entries[0].profile.log_base
    return [math.log(e.profile.log_base) / math.log(base) for e in entries], base
