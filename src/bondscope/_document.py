"""The Profile document: the versioned record every later stage reads.

Schema (version 1) -- see docs/profile-schema.md for the full contract.

Top level: ``format`` = "bondscope-profile", ``version`` = 1, ``source``,
``kind``, ``sites``, ``local_dims``, ``log_base``, ``norm``, optional
``truncation`` and free extra keys.  ``cuts`` is a list with one object per
cut holding ``position`` and ``entropy`` at least; bondscope also writes
``bond_dimension``, ``schmidt_rank``, ``renyi``, ``resolution_floor`` and,
when asked, ``discarded_weight`` and ``schmidt_values``.
"""

import csv
import io
import json
import math
import os
import tempfile
from pathlib import Path

import numpy as np

from ._errors import CheckpointError

__all__ = ["FORMAT", "VERSION", "Profile", "load_profile", "is_saved_profile", "parse_log_base",
           "atomic_write"]

FORMAT = "bondscope-profile"
VERSION = 1
H5_GROUP = "bondscope_profile"
_COLUMNS = ("position", "bond_dimension", "schmidt_rank", "entropy", "resolution_floor",
            "kept", "discarded_weight")
_INT_COLUMNS = ("position", "bond_dimension", "schmidt_rank", "kept")
_SUFFIXES = {".json": "json", ".h5": "h5", ".hdf5": "h5", ".csv": "csv"}


def parse_log_base(value):
    """Return the logarithm base of a document as a float ("e" means natural)."""
    if isinstance(value, str):
        if value.strip().lower() in ("e", "nat", "natural"):
            return math.e
        try:
            value = float(value)
        except ValueError:
            raise ValueError(f"log_base {value!r} is neither 'e' nor a number") from None
    value = float(value)
    if not value > 1.0 or not math.isfinite(value):
        raise ValueError(f"log_base must be a finite number > 1, found {value!r}")
    return value


def _format_of(path):
    kind = _SUFFIXES.get(Path(path).suffix.lower())
    if kind is None:
        raise ValueError(f"{path}: unknown profile format {Path(path).suffix!r}; "
                         f"use one of {', '.join(sorted(_SUFFIXES))}")
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


class Profile:
    """An entanglement profile: one record per bond cut of a chain.

    Build one with :func:`bondscope.profile` or :meth:`Profile.from_dict`;
    read a saved one with :func:`bondscope.load_profile`.

    Parameters
    ----------
    doc : dict
        A document following schema version 1 (validated).

    Attributes
    ----------
    positions : ndarray of int, shape (n_cuts,)
        Sites left of each cut.
    entropies : ndarray of float, shape (n_cuts,)
        von Neumann entropy per cut, in ``log_base``.
    """

    def __init__(self, doc):
        self._doc = _validated(doc)

    @classmethod
    def from_dict(cls, doc):
        """Validate a plain dict (e.g. parsed JSON) and wrap it."""
        return cls(doc)

    # --- top level ---------------------------------------------------------
    @property
    def source(self):
        return self._doc.get("source")

    @property
    def kind(self):
        return self._doc["kind"]

    @property
    def sites(self):
        return int(self._doc["sites"])

    @property
    def local_dims(self):
        dims = self._doc.get("local_dims")
        return None if dims is None else [int(d) for d in dims]

    @property
    def log_base(self):
        """The entropies' logarithm base as a float (e for nats, 2 for bits)."""
        return parse_log_base(self._doc["log_base"])

    @property
    def norm(self):
        return self._doc.get("norm")

    @property
    def truncation(self):
        return self._doc.get("truncation")

    @property
    def cuts(self):
        """The per-cut records (a list of dicts; do not modify)."""
        return self._doc["cuts"]

    def __getitem__(self, key):
        return self._doc[key]

    def get(self, key, default=None):
        return self._doc.get(key, default)

    # --- columns -----------------------------------------------------------
    def column(self, name, dtype=float):
        """One per-cut field as an array (NaN / -1 where a cut lacks it)."""
        missing = -1 if np.dtype(dtype).kind in "iu" else np.nan
        return np.array([c.get(name, missing) for c in self.cuts], dtype=dtype)

    @property
    def positions(self):
        return self.column("position", int)

    @property
    def entropies(self):
        return self.column("entropy")

    @property
    def bond_dimensions(self):
        return self.column("bond_dimension", int)

    @property
    def schmidt_ranks(self):
        return self.column("schmidt_rank", int)

    @property
    def discarded_weights(self):
        return self.column("discarded_weight")

    @property
    def renyi_orders(self):
        """The Rényi orders present, as written (e.g. ``["0.5", "2", "inf"]``)."""
        first = self.cuts[0].get("renyi", {}) if self.cuts else {}
        return list(first)

    def renyi(self, alpha):
        """Rényi entropies of order ``alpha`` (a key as written, or a number)."""
        key = alpha if isinstance(alpha, str) else _match_order(alpha, self.renyi_orders)
        try:
            return np.array([c["renyi"][key] for c in self.cuts], dtype=float)
        except KeyError:
            raise KeyError(f"no Renyi entropy of order {alpha!r} in this profile; "
                           f"present: {self.renyi_orders or 'none'}") from None

    @property
    def has_spectra(self):
        return bool(self.cuts) and all("schmidt_values" in c for c in self.cuts)

    @property
    def spectra(self):
        """Schmidt values per cut (descending arrays), or None when not stored."""
        if not self.has_spectra:
            return None
        return [np.asarray(c["schmidt_values"], dtype=float) for c in self.cuts]

    # --- output ------------------------------------------------------------
    def to_dict(self):
        """A deep copy of the document as plain JSON-ready Python objects."""
        return json.loads(self.to_json())

    def to_json(self, indent=None):
        return json.dumps(self._doc, indent=indent, allow_nan=False, default=_json_default)

    def save(self, path, *, protect=()):
        """Write the document as .json, .h5 (new results file) or .csv, atomically.

        Parameters
        ----------
        path : str or Path
            Target; its suffix picks the format.
        protect : iterable of paths
            Files that must never be written (the checkpoint profiled).

        Raises
        ------
        ValueError
            Unknown suffix, or the target is a protected file.
        OSError
            An existing .h5 target that is not a bondscope results file.
        """
        path = Path(path)
        kind = _format_of(path)
        for other in protect:
            if path.exists() and Path(other).exists() and path.samefile(other):
                raise ValueError(f"{path}: refusing to write over the checkpoint; "
                                 "choose another output name")
        if kind == "h5" and path.exists() and not _is_profile_h5(path):
            raise OSError(f"{path}: exists and is not a bondscope results file; "
                          "choose another output name")
        writer = {"json": self._write_json, "h5": self._write_h5, "csv": self._write_csv}[kind]
        return atomic_write(path, writer)

    def _write_json(self, path):
        with open(path, "w", encoding="utf-8") as f:
            f.write(self.to_json(indent=1))
            f.write("\n")

    def _write_csv(self, path):
        with open(path, "w", encoding="utf-8", newline="") as f:
            f.write(self.csv_text())

    def csv_text(self):
        """The cuts as CSV text, with the top-level fields in a '#' header line."""
        header = {k: v for k, v in self._doc.items() if k != "cuts"}
        orders = self.renyi_orders
        cols = [c for c in _COLUMNS if any(c in cut for cut in self.cuts)]
        names = cols[:4] + [f"renyi_{a}" for a in orders] + cols[4:]
        if self.has_spectra:
            names.append("schmidt_values")
        buf = io.StringIO()
        buf.write("# " + json.dumps(header, allow_nan=False, default=_json_default) + "\n")
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(names)
        for cut in self.cuts:
            row = [cut.get(c, "") for c in cols[:4]]
            row += [repr(float(cut["renyi"][a])) for a in orders]
            row += [cut.get(c, "") for c in cols[4:]]
            if self.has_spectra:
                row.append(" ".join(repr(float(v)) for v in cut["schmidt_values"]))
            w.writerow(row)
        return buf.getvalue()

    def _write_h5(self, path):
        import h5py

        with h5py.File(path, "w") as f:
            self.write_h5_group(f.create_group(H5_GROUP))

    def write_h5_group(self, group):
        """Write the document into an open, empty h5py group."""
        header = {k: v for k, v in self._doc.items() if k != "cuts"}
        group.attrs["format"] = FORMAT
        group.attrs["version"] = int(self._doc["version"])
        group.attrs["header_json"] = json.dumps(header, allow_nan=False, default=_json_default)
        cuts = self.cuts
        for name in _COLUMNS:
            if cuts and all(name in c for c in cuts):
                dtype = np.int64 if name in _INT_COLUMNS else np.float64
                group.create_dataset(name, data=np.array([c[name] for c in cuts], dtype=dtype))
        orders = self.renyi_orders
        if orders:
            sub = group.create_group("renyi")
            sub.attrs["order"] = orders
            for a in orders:
                sub.create_dataset(a, data=self.renyi(a))
        if self.has_spectra:
            values = [np.asarray(c["schmidt_values"], dtype=np.float64) for c in cuts]
            group.create_dataset("schmidt_values", data=np.concatenate(values) if values else [])
            group.create_dataset("schmidt_offsets",
                                 data=np.cumsum([0] + [len(v) for v in values]))
        known = set(_COLUMNS) | {"renyi", "schmidt_values"}
        extras = [{k: v for k, v in c.items() if k not in known} for c in cuts]
        if any(extras):
            group.attrs["cut_extras_json"] = json.dumps(extras, allow_nan=False,
                                                        default=_json_default)

    def __len__(self):
        return len(self.cuts)

    def __repr__(self):
        s = self.entropies
        peak = f", max entropy {np.max(s):.6g}" if len(s) else ""
        return (f"<Profile {self.kind} of {self.sites} sites from {self.source!r}: "
                f"{len(s)} cuts{peak}>")


def _match_order(alpha, orders):
    for key in orders:
        if float(key) == float(alpha):
            return key
    return str(alpha)


def _json_default(obj):
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating):
        return float(obj)
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(f"{type(obj).__name__} is not JSON serialisable")


def _validated(doc, where="profile"):
    if not isinstance(doc, dict):
        raise CheckpointError(f"{where}: expected a JSON object, found {type(doc).__name__}")
    fmt = doc.get("format")
    if fmt != FORMAT:
        raise CheckpointError(f"{where}: format is {fmt!r}, expected {FORMAT!r}")
    for key in ("version", "sites", "log_base", "kind", "cuts"):
        if key not in doc:
            raise CheckpointError(f"{where}: missing top-level field {key!r}")
    version = doc["version"]
    if not isinstance(version, int) or not 1 <= version <= VERSION:
        raise CheckpointError(f"{where}: version {version!r} is not supported "
                              f"(this bondscope reads versions 1..{VERSION}); upgrade bondscope")
    if not isinstance(doc["kind"], str):
        raise CheckpointError(f"{where}: kind must be a string, found {doc['kind']!r}")
    try:
        parse_log_base(doc["log_base"])
    except (TypeError, ValueError) as exc:
        raise CheckpointError(f"{where}: {exc}") from None
    sites = doc["sites"]
    if not isinstance(sites, int) or sites < 1:
        raise CheckpointError(f"{where}: sites must be a positive integer, found {sites!r}")
    cuts = doc["cuts"]
    if not isinstance(cuts, list):
        raise CheckpointError(f"{where}: cuts must be a list, found {type(cuts).__name__}")
    for i, cut in enumerate(cuts):
        if not isinstance(cut, dict) or "position" not in cut or "entropy" not in cut:
            raise CheckpointError(f"{where}: cut {i} needs at least 'position' and 'entropy'")
        pos = cut["position"]
        if not isinstance(pos, int) or not 1 <= pos <= max(sites - 1, 1):
            raise CheckpointError(f"{where}: cut {i} position {pos!r} is not in 1..{sites - 1}")
        if not isinstance(cut["entropy"], (int, float)) or not math.isfinite(cut["entropy"]):
            raise CheckpointError(f"{where}: cut {i} entropy {cut['entropy']!r} is not a "
                                  "finite number")
    return doc


def _is_profile_h5(path):
    import h5py

    try:
        with h5py.File(path, "r") as f:
            return H5_GROUP in f and f[H5_GROUP].attrs.get("format") == FORMAT
    except OSError:
        return False


def is_saved_profile(path):
    """True for a saved profile (.json or .csv, or an .h5 results file), False otherwise
    (a checkpoint)."""
    path = Path(path)
    kind = _SUFFIXES.get(path.suffix.lower())
    if kind in ("json", "csv"):
        return True
    return kind == "h5" and path.is_file() and _is_profile_h5(path)


def load_profile(path):
    """Read a saved profile (.json, .h5 or .csv) back into a :class:`Profile`.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    Profile

    Raises
    ------
    OSError
        The file cannot be opened.
    CheckpointError
        The file is not a bondscope profile, or breaks the schema.
    """
    path = Path(path)
    kind = _format_of(path)
    if not path.is_file():
        raise OSError(f"{path}: no such profile file")
    try:
        if kind == "json":
            with open(path, encoding="utf-8") as f:
                doc = json.load(f)
        elif kind == "csv":
            doc = _read_csv(path)
        else:
            doc = _read_h5(path)
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise CheckpointError(f"{path}: not a JSON profile document ({exc})") from None
    return Profile(_validated(doc, where=str(path)))


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
