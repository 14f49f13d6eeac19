"""Resolve what a figure or report is asked to draw into labelled profiles.

A *source* is a :class:`~bondscope.Profile`, a saved profile (.json, .csv, or
an .h5 results file), an HDF5 checkpoint (profiled on the spot), or a batch
results directory (its summary lists the checkpoints; each ok row has a
profile file).  Every source becomes one or more :class:`Entry` objects.
"""

import json
import math
import re
from pathlib import Path

from ._errors import CheckpointError

__all__ = ["Entry", "collect", "read_results", "natural_key", "same_base", "SPECTRUM_HINT"]

SPECTRUM_HINT = "rerun `bondscope profile CHECKPOINT --spectrum -o PROFILE`"

# top-level profile fields, summary columns or checkpoint attributes read as metadata
_META_KEYS = ("time", "time_unit", "bond_dim", "series")


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
        ``time``, ``time_unit``, ``bond_dim``, ``series`` where known.
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


def natural_key(text):
    """Sort key putting 'run2' before 'run10'."""
    return [int(t) if t.isdigit() else t for t in re.split(r"(\d+)", str(text))]


def _checkpoint_meta(path):
    import h5py

    meta = {}
    try:
        with h5py.File(path, "r") as f:
            for key in _META_KEYS:
                if key in f.attrs:
                    value = f.attrs[key]
                    meta[key] = value.item() if hasattr(value, "item") else value
    except OSError:
        pass
    return {k: (v.decode() if isinstance(v, bytes) else v) for k, v in meta.items()}


def _profile_meta(prof):
    return {k: prof.get(k) for k in _META_KEYS if prof.get(k) is not None}


def _needs_spectra(entry, spectrum):
    if spectrum and not entry.profile.has_spectra:
        raise CheckpointError(f"{entry.origin or entry.label}: this profile has no Schmidt "
                              f"values, which this figure needs; {SPECTRUM_HINT}")
    return entry


def read_results(directory):
    """The rows and series of a batch results directory.

    Parameters
    ----------
    directory : str or Path
        A directory written by the batch runner: ``summary.json`` (or
        ``summary.csv``) with one row per checkpoint, optional ``series.json``.

    Returns
    -------
    rows : list of dict
        One per checkpoint, in the summary's order, with at least ``checkpoint``,
        ``status`` and, for ok rows, ``profile`` (an absolute path).
    series : dict
        Series name -> list of checkpoint names, in bond-dimension order when known.

    Raises
    ------
    OSError
        No summary file in the directory.
    CheckpointError
        A summary that is not a list of rows.
    """
    directory = Path(directory)
    summary = directory / "summary.json"
    if summary.is_file():
        with open(summary, encoding="utf-8") as f:
            doc = json.load(f)
        rows = doc.get("rows", doc.get("checkpoints")) if isinstance(doc, dict) else doc
    elif (directory / "summary.csv").is_file():
        import csv

        with open(directory / "summary.csv", encoding="utf-8", newline="") as f:
            rows = list(csv.DictReader(line for line in f if not line.startswith("#")))
    else:
        raise OSError(f"{directory}: no summary.json or summary.csv; not a batch results "
                      "directory")
    if not isinstance(rows, list) or not all(isinstance(r, dict) for r in rows):
        raise CheckpointError(f"{summary}: expected a list of rows, one per checkpoint")
    out = [_normal_row(directory, r) for r in rows]
    return out, _read_series(directory, out)


def _normal_row(directory, row):
    row = dict(row)
    name = row.get("checkpoint") or row.get("path") or row.get("source") or "?"
    row["checkpoint"] = str(name)
    row["status"] = str(row.get("status") or ("ok" if row.get("profile") else "failed"))
    if row.get("profile"):
        path = Path(row["profile"])
        row["profile"] = str(path if path.is_absolute() else directory / path)
    return row


def _read_series(directory, rows):
    path = directory / "series.json"
    if path.is_file():
        with open(path, encoding="utf-8") as f:
            doc = json.load(f)
        doc = doc.get("series", doc) if isinstance(doc, dict) else doc
        if isinstance(doc, dict):
            return {str(k): _members(v) for k, v in doc.items()}
        if isinstance(doc, list):
            return {str(s.get("name")): _members(s) for s in doc if isinstance(s, dict)}
    series = {}
    for r in rows:
        if r.get("series"):
            series.setdefault(str(r["series"]), []).append(r["checkpoint"])
    return series


def _members(value):
    if isinstance(value, dict):
        value = value.get("members", value.get("checkpoints", []))
    return [str(m.get("checkpoint") if isinstance(m, dict) else m) for m in value]


def _row_label(row):
    return Path(row["checkpoint"].split(":")[0]).stem


def _from_results(directory, spectrum):
    from ._document import load_profile

    rows, _ = read_results(directory)
    ok = [r for r in rows if r["status"] == "ok" and r.get("profile")]
    if not ok:
        raise CheckpointError(f"{directory}: no checkpoint of this batch has a profile "
                              f"({len(rows)} rows, none ok)")
    entries = []
    for r in ok:
        prof = load_profile(r["profile"])
        meta = _profile_meta(prof)
        meta.update({k: _number(r[k]) for k in _META_KEYS if r.get(k) not in (None, "")})
        entries.append(_needs_spectra(Entry(_row_label(r), prof, r["profile"], meta), spectrum))
    return entries


def _number(value):
    if isinstance(value, str):
        try:
            number = float(value)
        except ValueError:
            return value
        return int(number) if number.is_integer() else number
    return value


def collect(sources, *, spectrum=False, **options):
    """Labelled profiles for a list of sources (see the module docstring).

    Parameters
    ----------
    sources : source or list of sources
    spectrum : bool
        The figure needs Schmidt values: checkpoints are profiled with
        ``spectrum=True``; a saved profile without them is an error.
    **options
        Passed to :func:`bondscope.profile` for checkpoints (layout, ``renyi``, ``base``).

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
    from ._cli._common import is_profile_path
    from ._document import Profile, load_profile

    if isinstance(sources, (str, Path, Profile)):
        sources = [sources]
    if not sources:
        raise ValueError("no sources to draw: give at least one checkpoint, profile or "
                         "results directory")
    entries = []
    for i, src in enumerate(sources):
        if isinstance(src, Profile):
            label = Path(str(src.source or f"profile {i + 1}").split(":")[0]).stem
            entries.append(_needs_spectra(Entry(label, src, None, _profile_meta(src)),
                                          spectrum))
            continue
        path = Path(src)
        if path.is_dir():
            entries += _from_results(path, spectrum)
        elif not path.exists():
            raise OSError(f"{path}: no such checkpoint, profile or results directory")
        elif is_profile_path(path):
            prof = load_profile(path)
            entries.append(_needs_spectra(Entry(path.stem, prof, str(path), _profile_meta(prof)),
                                          spectrum))
        else:
            entries.append(_profile_checkpoint(path, spectrum, options))
    return entries


def _profile_checkpoint(path, spectrum, options):
    from ._pipeline import profile

    opts = {k: v for k, v in options.items() if v is not None}
    if spectrum:
        opts["spectrum"] = True
    prof = profile(path, **opts)
    meta = _checkpoint_meta(path)
    meta.update(_profile_meta(prof))
    return Entry(path.stem, prof, str(path), meta)


def same_base(entries):
    """Entropy scale factors to the first entry's log base, and that base."""
    base = entries[0].profile.log_base
    return [math.log(e.profile.log_base) / math.log(base) for e in entries], base
