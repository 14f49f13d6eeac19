"""Run metadata: the root attributes of a checkpoint that describe its run.

One reader for every stage that wants them (comparison, figures, batch).
Attributes are read from the file's root group only, never datasets.
"""

import json
import math
from pathlib import Path

__all__ = ["RUN_ATTRS", "run_attributes", "file_attributes", "plain_value"]

# root attributes read as run metadata
RUN_ATTRS = ("time", "time_unit", "bond_dim", "series", "boundary", "max_discarded_weight")


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


def run_attributes(path, names=RUN_ATTRS):
    """The root attributes ``names`` of an HDF5 checkpoint that are present, as plain values.

    Parameters
    ----------
    path : str or Path
    names : iterable of str
        Attribute names (None entries are skipped).

    Returns
    -------
    dict
        Empty for saved profiles, non-HDF5 files and unreadable files.
    """
    from ._files import H5_GROUP

    path = Path(path)
    if not path.is_file():
        return {}
    import h5py

    try:
        with h5py.File(path, "r") as f:
            return {} if H5_GROUP in f else file_attributes(f, names)
    except (OSError, ValueError):
        return {}


def file_attributes(f, names=RUN_ATTRS):
    """:func:`run_attributes` of an open h5py File."""
    found = {}
    for name in names:
        if name is not None and name in f.attrs:
            try:
                found[name] = plain_value(f.attrs[name])
            except (OSError, TypeError, ValueError):
                continue
    return found
