"""Files: atomic writes, and the Profile document as JSON, HDF5 group or CSV.

The writers take the document dict (already validated by the Profile); the
readers return a dict for :func:`bondscope._document._validated` to check.
"""

import csv
import io
import json
import os
import re
import tempfile
import time
from pathlib import Path

import numpy as np

from ._document import FORMAT
from ._errors import CheckpointError, one_line

__all__ = ["atomic_write", "remove_stale_parts", "STALE_SECONDS", "format_of", "SUFFIXES",
           "H5_GROUP", "json_default", "json_text",
           "csv_text", "write_h5_group", "read_h5_group", "is_profile_h5", "refuse_overwrite",
           "write_document", "read_document", "csv_cell"]

H5_GROUP = "bondscope_profile"
_COLUMNS = ("position", "bond_dimension", "schmidt_rank", "entropy", "resolution_floor",
            "kept", "discarded_weight", "number_entropy", "configurational_entropy",
            # mixed states (docs/mixed.md)
            "renyi2_left", "renyi2_right", "renyi2_error", "mutual_information_2",
            "mutual_information_2_error", "disentangled_entropy", "disentangled_renyi2",
            "disentangled_rank", "disentangled_resolution_floor", "disentangled_kept",
            "disentangled_discarded_weight")
_INT_COLUMNS = ("position", "bond_dimension", "schmidt_rank", "kept", "disentangled_rank",
                "disentangled_kept")
SUFFIXES = {".json": "json", ".h5": "h5", ".hdf5": "h5", ".csv": "csv"}


_FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def csv_cell(value):
    """A CSV cell that no spreadsheet runs as a formula.

    Text starting with ``=``, ``+``, ``-``, ``@``, tab or carriage return that is
    not a number gets a leading ``'`` (the OWASP guidance on CSV injection);
    numbers, and all other text, are written as they are.

    Examples
    --------
    >>> csv_cell("=HYPERLINK(1)"), csv_cell("-0.25"), csv_cell("@x"), csv_cell(-1.5)
    ("'=HYPERLINK(1)", '-0.25', "'@x", -1.5)
    """
    if not isinstance(value, str) or not value.startswith(_FORMULA_STARTS):
        return value
    try:
        float(value)
    except ValueError:
        return "'" + value
    return value


def format_of(path):
    kind = SUFFIXES.get(Path(path).suffix.lower())
    if kind is None:
        raise ValueError(f"{path}: unknown profile format {Path(path).suffix!r}; "
                         f"use one of {', '.join(sorted(SUFFIXES))}")
    return kind


# a temporary file of atomic_write untouched this long belongs to a killed writer
STALE_SECONDS = 3600
_PART = re.compile(r"\.(?P<name>.+)\.[A-Za-z0-9_]{8}\.part")


def atomic_write(path, write, clean=True):
    """Write a file through ``write(tmp_path)``, flush it to disk and rename it into place.

    A reader, or a rerun after a crash, sees the old file or the whole new one,
    never a partial one.  The temporary file ``.<name>.<8 random>.part`` is the
    writer's own (two processes never share one); ``clean`` also removes stale
    ones of ``path`` (:func:`remove_stale_parts`) left by killed writers.

    Raises
    ------
    OSError
        The directory or file cannot be written; the message names ``path``.
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        if clean:
            remove_stale_parts(path.parent, {path.name})
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    except OSError as exc:
        raise _named(exc, path) from None
    os.close(fd)
    umask = os.umask(0)
    os.umask(umask)
    try:
        os.chmod(tmp, 0o666 & ~umask)
        write(tmp)
        _fsync(tmp)
        os.replace(tmp, path)
        _fsync(path.parent)
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise _named(exc, path) from None
        raise
    return path


def _named(exc, path):
    """The OSError ``exc`` re-worded to name the user's ``path``, not a temporary file."""
    reason = exc.strerror or one_line(exc)
    return type(exc)(f"{path}: cannot be written ({reason}); choose a writable output")


def _fsync(path):
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    except OSError:  # directories on some file systems refuse fsync; the data is synced
        if not os.path.isdir(path):
            raise
    finally:
        os.close(fd)


def remove_stale_parts(directory, names=None, age=STALE_SECONDS):
    """Delete atomic_write's temporary files in ``directory`` untouched for ``age`` seconds.

    Only names of the form ``.<name>.<8 characters>.part`` (and, when ``names``
    is given, only those of these targets) are considered; a live writer's file
    is younger than ``age``, so concurrent writers never lose theirs.

    Returns
    -------
    int
        Files removed.
    """
    removed, now = 0, time.time()
    for entry in os.scandir(directory):
        m = _PART.fullmatch(entry.name)
        if m is None or (names is not None and m.group("name") not in names):
            continue
        try:
            if now - entry.stat().st_mtime > age:
                os.unlink(entry.path)
                removed += 1
        except OSError:  # gone already, or not ours to remove
            continue
    return removed


def json_default(obj):
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating):
        return float(obj)
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(f"{type(obj).__name__} is not JSON serialisable")


def json_text(doc, indent=None):
    """The document as JSON text (NaN and Inf refused)."""
    return json.dumps(doc, indent=indent, allow_nan=False, default=json_default)


def _renyi_orders(doc):
    cuts = doc["cuts"]
    return list(cuts[0].get("renyi", {})) if cuts else []


def _has_spectra(doc):
    return bool(doc["cuts"]) and all("schmidt_values" in c for c in doc["cuts"])


def csv_text(doc):
    """The cuts as CSV text, with the top-level fields in a '#' header line."""
    header = {k: v for k, v in doc.items() if k != "cuts"}
    cuts, orders, spectra = doc["cuts"], _renyi_orders(doc), _has_spectra(doc)
    cols = [c for c in _COLUMNS if any(c in cut for cut in cuts)]
    names = cols[:4] + [f"renyi_{a}" for a in orders] + cols[4:]
    if spectra:
        names.append("schmidt_values")
    buf = io.StringIO()
    buf.write("# " + json_text(header) + "\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(names)
    for cut in cuts:
        row = [cut.get(c, "") for c in cols[:4]]
        row += [repr(float(cut["renyi"][a])) for a in orders]
        row += [cut.get(c, "") for c in cols[4:]]
        if spectra:
            row.append(" ".join(repr(float(v)) for v in cut["schmidt_values"]))
        w.writerow([csv_cell(v) for v in row])
    return buf.getvalue()


def write_h5_group(doc, group):
    """Write the document into an open, empty h5py group."""
    header = {k: v for k, v in doc.items() if k != "cuts"}
    group.attrs["format"] = FORMAT
    group.attrs["version"] = int(doc["version"])
    group.attrs["header_json"] = json_text(header)
    cuts = doc["cuts"]
    for name in _COLUMNS:
        if cuts and all(name in c for c in cuts):
            dtype = np.int64 if name in _INT_COLUMNS else np.float64
            group.create_dataset(name, data=np.array([c[name] for c in cuts], dtype=dtype))
    orders = _renyi_orders(doc)
    if orders:
        sub = group.create_group("renyi")
        sub.attrs["order"] = orders
        for a in orders:
            sub.create_dataset(a, data=np.array([c["renyi"][a] for c in cuts], dtype=float))
    if _has_spectra(doc):
        values = [np.asarray(c["schmidt_values"], dtype=np.float64) for c in cuts]
        group.create_dataset("schmidt_values", data=np.concatenate(values) if values else [])
        group.create_dataset("schmidt_offsets", data=np.cumsum([0] + [len(v) for v in values]))
    known = set(_COLUMNS) | {"renyi", "schmidt_values"}
    extras = [{k: v for k, v in c.items() if k not in known} for c in cuts]
    if any(extras):
        group.attrs["cut_extras_json"] = json_text(extras)


def _write(doc, kind, path):
    if kind == "json":
        Path(path).write_text(json_text(doc, indent=1) + "\n", encoding="utf-8")
    elif kind == "csv":
        with open(path, "w", encoding="utf-8", newline="") as f:
            f.write(csv_text(doc))
    else:
        import h5py

        with h5py.File(path, "w") as f:
            write_h5_group(doc, f.create_group(H5_GROUP))


def refuse_overwrite(path, protect, what="the checkpoint"):
    """Raise ValueError when ``path`` is one of the files ``protect`` (an input)."""
    path = Path(path)
    if not path.exists():
        return
    for other in protect:
        if Path(other).exists() and path.samefile(other):
            raise ValueError(f"{path}: refusing to write over {what}; "
                             "choose another output name")


def write_document(doc, path, protect=(), clean=True):
    """:meth:`bondscope.Profile.save` of a document dict (same errors); ``clean`` as in
    :func:`atomic_write`."""
    path = Path(path)
    kind = format_of(path)
    refuse_overwrite(path, protect)
    if kind == "h5" and path.exists() and not is_profile_h5(path):
        raise OSError(f"{path}: exists and is not a bondscope results file; "
                      "choose another output name")
    return atomic_write(path, lambda tmp: _write(doc, kind, tmp), clean)


def is_profile_h5(path):
    import h5py

    try:
        with h5py.File(path, "r") as f:
            return H5_GROUP in f and f[H5_GROUP].attrs.get("format") == FORMAT
    except OSError:
        return False


def read_document(path, kind):
    """The document dict of a saved profile of format ``kind`` (not yet validated)."""
    try:
        if kind == "json":
            with open(path, encoding="utf-8") as f:
                return json.load(f)
        if kind == "csv":
            return _read_csv(path)
        return _read_h5(path)
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise CheckpointError(f"{path}: not a JSON profile document ({exc})") from None
    except RecursionError:
        raise CheckpointError(f"{path}: JSON nested too deeply to be a profile document"
                              ) from None


def _read_csv(path):
    with open(path, encoding="utf-8", newline="") as f:
        first = f.readline()
        if not first.startswith("# "):
            raise CheckpointError(f"{path}: no '# {{...}}' header line; not a bondscope CSV")
        try:
            doc = json.loads(first[2:])
        except json.JSONDecodeError as exc:
            raise CheckpointError(f"{path}: header line is not JSON ({exc})") from None
        if not isinstance(doc, dict):
            raise CheckpointError(f"{path}: header line is not a JSON object")
        rows = list(csv.DictReader(f))
    doc["cuts"] = [_csv_cut(path, i, row) for i, row in enumerate(rows)]
    return doc


def _csv_cut(path, i, row):
    cut, renyi = {}, {}
    for name, text in row.items():
        if text == "" or name is None:
            continue
        try:
            if name.startswith("renyi_"):
                renyi[name[6:]] = float(text)
            elif name == "schmidt_values":
                cut[name] = [float(v) for v in text.split()]
            elif name in _INT_COLUMNS:
                cut[name] = int(text)
            else:
                cut[name] = float(text)
        except (TypeError, ValueError):
            shown = text if len(text) <= 40 else text[:40] + "..."
            raise CheckpointError(f"{path}: data row {i + 1}, column {name!r}: {shown!r} is "
                                  f"not {'an integer' if name in _INT_COLUMNS else 'a number'}"
                                  ) from None
    if renyi:
        cut["renyi"] = renyi
    return cut


def _read_h5(path):
    import h5py

    try:
        f = h5py.File(path, "r")
    except OSError as exc:
        raise CheckpointError(f"{path}: not a readable HDF5 file ({exc})") from None
    with f:
        if H5_GROUP not in f:
            raise CheckpointError(f"{path}: no '{H5_GROUP}' group; not a bondscope results file")
        try:
            return read_h5_group(f[H5_GROUP])
        except CheckpointError as exc:
            raise CheckpointError(f"{path}: {exc}") from None
        except (KeyError, ValueError, TypeError, OSError) as exc:
            raise CheckpointError(f"{path}: group {H5_GROUP} is damaged ({one_line(exc)}); "
                                  "write it again with bondscope") from None


def read_h5_group(group):
    """Rebuild a document dict from a group written by :meth:`Profile.write_h5_group`."""
    for missing, what in (("header_json" not in group.attrs, "header_json attribute"),
                          ("position" not in group, "position dataset")):
        if missing:
            raise CheckpointError(f"group {group.name} lacks its {what}; not a complete "
                                  "bondscope results group")
    doc = json.loads(group.attrs["header_json"])
    if not isinstance(doc, dict):
        raise CheckpointError(f"group {group.name}: header_json is not a JSON object")
    n = len(group["position"])
    cuts = [{} for _ in range(n)]
    for name in _COLUMNS:
        if name in group:
            data = group[name][()]
            cast = int if name in _INT_COLUMNS else float
            for cut, v in zip(cuts, data):
                cut[name] = cast(v)
    if "renyi" in group:
        orders = list(group["renyi"].attrs.get("order", [])) or list(group["renyi"])
        for cut in cuts:
            cut["renyi"] = {}
        for a in orders:
            for cut, v in zip(cuts, group["renyi"][a][()]):
                cut["renyi"][a] = float(v)
    if "schmidt_values" in group:
        flat, offsets = group["schmidt_values"][()], group["schmidt_offsets"][()]
        if offsets.shape != (n + 1,) or offsets.dtype.kind not in "iu" or offsets[0] != 0 \
                or np.any(np.diff(offsets) < 0) or offsets[-1] != len(flat):
            raise CheckpointError(f"group {group.name}: schmidt_offsets must be {n + 1} "
                                  f"non-decreasing integers from 0 to {len(flat)}, found "
                                  f"shape {offsets.shape} {offsets.dtype}")
        for i, cut in enumerate(cuts):
            cut["schmidt_values"] = flat[offsets[i]:offsets[i + 1]].tolist()
    if "cut_extras_json" in group.attrs:
        for cut, extra in zip(cuts, json.loads(group.attrs["cut_extras_json"])):
            cut.update(extra)
    doc["cuts"] = cuts
    return doc
