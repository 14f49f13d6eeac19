"""Files: atomic writes, and the Profile document as JSON, HDF5 group or CSV.

The writers take the document dict (already validated by the Profile); the
readers return a dict for :func:`bondscope._document._validated` to check.
"""

import csv
import io
import json
import os
import tempfile
from pathlib import Path

import numpy as np

from ._document import FORMAT
from ._errors import CheckpointError

__all__ = ["atomic_write", "format_of", "SUFFIXES", "H5_GROUP", "json_default", "json_text",
           "csv_text", "write_h5_group", "read_h5_group", "is_profile_h5", "refuse_overwrite",
           "write_document", "read_document"]

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


def format_of(path):
    kind = SUFFIXES.get(Path(path).suffix.lower())
    if kind is None:
        raise ValueError(f"{path}: unknown profile format {Path(path).suffix!r}; "
                         f"use one of {', '.join(sorted(SUFFIXES))}")
    return kind


def atomic_write(path, write):
    """Write a file through ``write(tmp_path)`` and rename it into place.

    A reader, or a rerun after a crash, sees the old file or the whole new one,
    never a partial one.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    os.close(fd)
    umask = os.umask(0)
    os.umask(umask)
    try:
        os.chmod(tmp, 0o666 & ~umask)
        write(tmp)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


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
        w.writerow(row)
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


def write_document(doc, path, protect=()):
    """:meth:`bondscope.Profile.save` of a document dict (same errors)."""
    path = Path(path)
    kind = format_of(path)
    refuse_overwrite(path, protect)
    if kind == "h5" and path.exists() and not is_profile_h5(path):
        raise OSError(f"{path}: exists and is not a bondscope results file; "
                      "choose another output name")
    return atomic_write(path, lambda tmp: _write(doc, kind, tmp))


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


def _read_csv(path):
    with open(path, encoding="utf-8", newline="") as f:
        first = f.readline()
        if not first.startswith("# "):
            raise CheckpointError(f"{path}: no '# {{...}}' header line; not a bondscope CSV")
        doc = json.loads(first[2:])
        rows = list(csv.DictReader(f))
    cuts = []
    for row in rows:
        cut, renyi = {}, {}
        for name, text in row.items():
            if text == "" or name is None:
                continue
            if name.startswith("renyi_"):
                renyi[name[6:]] = float(text)
            elif name == "schmidt_values":
                cut[name] = [float(v) for v in text.split()]
            elif name in _INT_COLUMNS:
                cut[name] = int(text)
            else:
                cut[name] = float(text)
        if renyi:
            cut["renyi"] = renyi
        cuts.append(cut)
    doc["cuts"] = cuts
    return doc


def _read_h5(path):
    import h5py

    try:
        f = h5py.File(path, "r")
    except OSError as exc:
        raise CheckpointError(f"{path}: not a readable HDF5 file ({exc})") from None
    with f:
        if H5_GROUP not in f:
            raise CheckpointError(f"{path}: no '{H5_GROUP}' group; not a bondscope results file")
        return read_h5_group(f[H5_GROUP])


def read_h5_group(group):
    """Rebuild a document dict from a group written by :meth:`Profile.write_h5_group`."""
    doc = json.loads(group.attrs["header_json"])
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
        for i, cut in enumerate(cuts):
            cut["schmidt_values"] = flat[offsets[i]:offsets[i + 1]].tolist()
    if "cut_extras_json" in group.attrs:
        for cut, extra in zip(cuts, json.loads(group.attrs["cut_extras_json"])):
            cut.update(extra)
    doc["cuts"] = cuts
    return doc
