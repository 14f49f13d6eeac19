"""The Profile document: the versioned record every later stage reads.

Schema (version 1) -- see docs/profile-schema.md for the full contract.

Top level: ``format`` = "bondscope-profile", ``version`` = 1, ``source``,
``kind``, ``sites``, ``local_dims``, ``log_base``, ``norm``, optional
``truncation`` and free extra keys.  ``cuts`` is a list with one object per
cut holding ``position`` and ``entropy`` at least; bondscope also writes
``bond_dimension``, ``schmidt_rank``, ``renyi``, ``resolution_floor`` and,
when asked, ``discarded_weight`` and ``schmidt_values``.
"""

import json
import math
from pathlib import Path

import numpy as np

from ._errors import CheckpointError

__all__ = ["FORMAT", "VERSION", "Profile", "load_profile", "is_saved_profile", "parse_log_base"]

FORMAT = "bondscope-profile"
VERSION = 1
# longer chains are refused as a corrupt field: analyses allocate per site
MAX_SITES = 10**7


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
        """The document as JSON text."""
        from ._files import json_text

        return json_text(self._doc, indent=indent)

    def csv_text(self):
        """The cuts as CSV text, with the top-level fields in a '#' header line."""
        from ._files import csv_text

        return csv_text(self._doc)

    def write_h5_group(self, group):
        """Write the document into an open, empty h5py group."""
        from ._files import write_h5_group

        write_h5_group(self._doc, group)

    def save(self, path, *, protect=()):
        """Write the document as .json, .h5 (new results file) or .csv, atomically.

        Parameters
        ----------
        path : str or Path
            Target; its suffix picks the format.
        protect : iterable of paths
            Files that must never be written (the checkpoint profiled).

        Returns
        -------
        Path

        Raises
        ------
        ValueError
            Unknown suffix, or the target is a protected file.
        OSError
            An existing .h5 target that is not a bondscope results file.
        """
        from ._files import write_document

        return write_document(self._doc, path, protect)

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
    if isinstance(sites, bool) or not isinstance(sites, int) or not 1 <= sites <= MAX_SITES:
        raise CheckpointError(f"{where}: sites must be an integer in 1..{MAX_SITES}, found "
                              f"{_short(sites)}")
    dims = doc.get("local_dims")
    if dims is not None and (not isinstance(dims, list) or len(dims) != sites or not all(
            isinstance(d, int) and not isinstance(d, bool) and d >= 1 for d in dims)):
        raise CheckpointError(f"{where}: local_dims must be {sites} integers >= 1 (one per "
                              f"site), found {_short(dims)}")
    cuts = doc["cuts"]
    if not isinstance(cuts, list):
        raise CheckpointError(f"{where}: cuts must be a list, found {type(cuts).__name__}")
    for i, cut in enumerate(cuts):
        if not isinstance(cut, dict) or "position" not in cut or "entropy" not in cut:
            raise CheckpointError(f"{where}: cut {i} needs at least 'position' and 'entropy'")
        pos = cut["position"]
        # a unit cell's last cut (position = sites) is the bond between cells
        last = sites if doc["kind"] == "unit-cell" else max(sites - 1, 1)
        if not isinstance(pos, int) or not 1 <= pos <= last:
            raise CheckpointError(f"{where}: cut {i} position {pos!r} is not in 1..{last}")
        if not isinstance(cut["entropy"], (int, float)) or not math.isfinite(cut["entropy"]):
            raise CheckpointError(f"{where}: cut {i} entropy {cut['entropy']!r} is not a "
                                  "finite number")
    return doc


def _short(value, limit=60):
    text = repr(value)
    return text if len(text) <= limit else text[:limit] + "..."


def is_saved_profile(path):
    """True for a saved profile (.json or .csv, or an .h5 results file), False otherwise
    (a checkpoint)."""
    from ._files import SUFFIXES, is_profile_h5

    path = Path(path)
    kind = SUFFIXES.get(path.suffix.lower())
    if kind in ("json", "csv"):
        return True
    return kind == "h5" and path.is_file() and is_profile_h5(path)


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
    from ._files import format_of, read_document

    path = Path(path)
    kind = format_of(path)
    if not path.is_file():
        raise OSError(f"{path}: no such profile file")
    return Profile(_validated(read_document(path, kind), where=str(path)))
