"""Run metadata: the root attributes of a checkpoint that describe its run.

One reader for every stage that wants them (comparison, figures, batch).
Attributes are read from the file's root group only, never datasets.  Each
run quantity has a default attribute name; a checkpoint written by other code
may store it under another (``chi`` for the bond dimension): ``rename`` maps
the quantity to the name to read (``ProfileOptions.bond_dim_attr``, CLI
``--bond-dim-attr``; see :func:`attribute_names`).  Values larger than
:data:`MAX_VALUE_CHARS` as JSON are not copied (a note says so): run metadata
is a number or a short text, and a batch copies it into every row.
"""

import json
import math
from pathlib import Path

__all__ = ["RUN_ATTRS", "MAX_VALUE_CHARS", "ATTR_OPTIONS", "attribute_names", "run_attributes",
           "file_attributes", "plain_value"]

# root attributes read as run metadata
RUN_ATTRS = ("time", "time_unit", "bond_dim", "series", "boundary", "max_discarded_weight")
# a longer value (as JSON text) is not copied
MAX_VALUE_CHARS = 1024
# ProfileOptions field -> the run quantity whose attribute name it sets
ATTR_OPTIONS = {"time_attr": "time", "bond_dim_attr": "bond_dim",
                "weight_attr": "max_discarded_weight"}


def plain_value(value):
    """An HDF5 attribute value as a JSON-ready Python value (None when not finite).

    Examples
    --------
    >>> import numpy as np
    >>> plain_value(np.float64(0.5)), plain_value(b"ns"), plain_value(np.array([3]))
    (0.5, 'ns', 3)
    """
    if hasattr(value, "tolist"):
        value = value.tolist()
    if isinstance(value, bytes):
        value = value.decode("utf-8", "replace")
    if isinstance(value, list):
        value = [plain_value(v) for v in value]
        return value[0] if len(value) == 1 else value
    if isinstance(value, float) and not math.isfinite(value):
        return None
    try:
        json.dumps(value, allow_nan=False)
    except (TypeError, ValueError):
        return str(value)
    return value


def attribute_names(options=None):
    """{run quantity: attribute name} for the names ``options`` changes (may be empty).

    Examples
    --------
    >>> from bondscope import ProfileOptions
    >>> attribute_names(ProfileOptions(bond_dim_attr="chi"))
    {'bond_dim': 'chi'}
    """
    if options is None:
        return {}
    return {quantity: getattr(options, field) for field, quantity in ATTR_OPTIONS.items()
            if getattr(options, field, None) is not None}


def run_attributes(path, names=RUN_ATTRS, rename=None, notes=None):
    """The root attributes ``names`` of an HDF5 checkpoint that are present, as plain values.

    Parameters
    ----------
    path : str or Path
    names : iterable of str
        Run quantities (None entries are skipped).
    rename : dict, optional
        Quantity -> attribute name read for it (:func:`attribute_names`).
    notes : list, optional
        Receives one line per attribute present but not copied (too large).

    Returns
    -------
    dict
        Quantity -> value; empty for saved profiles, non-HDF5 files and
        unreadable files.
    """
    from ._files import H5_GROUP

    path = Path(path)
    if not path.is_file():
        return {}
    import h5py

    try:
        with h5py.File(path, "r") as f:
            return {} if H5_GROUP in f else file_attributes(f, names, rename, notes)
    except (OSError, ValueError):
        return {}


def file_attributes(f, names=RUN_ATTRS, rename=None, notes=None):
    """:func:`run_attributes` of an open h5py File."""
    found = {}
    for name in names:
        attr = (rename or {}).get(name, name)
        if name is None or attr not in f.attrs:
            continue
        try:
            stored = f.attrs.get_id(attr)
            count = math.prod(stored.shape or ())
            value = None if count > MAX_VALUE_CHARS else plain_value(f.attrs[attr])
        except (OSError, TypeError, ValueError, KeyError):
            continue
        size = len(json.dumps(value)) if count <= MAX_VALUE_CHARS else None
        if size is None or size > MAX_VALUE_CHARS:
            if notes is not None:
                what = f"{count} elements" if size is None else f"{size} characters"
                notes.append(f"root attribute {attr!r}: {what}, not copied (run metadata "
                             f"is at most {MAX_VALUE_CHARS} characters)")
            continue
        found[name] = value
    return found
