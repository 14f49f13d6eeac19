"""What a batch stores per checkpoint: fingerprints, resumable results and their measures.

A result is the checkpoint's Profile document with a top-level ``batch``
record: the checkpoint's fingerprint, the options that decided the result,
its run attributes, wall time and warnings.
"""

import hashlib
import json
import os
import stat as statmode

from .._linked import linked_stamps
from .._runinfo import file_attributes

__all__ = ["RECORD_VERSION", "ROW_ATTRS", "fingerprint", "resumed", "measures"]

RECORD_VERSION = 1
# root attributes copied into each result and its summary row
ROW_ATTRS = ("time", "time_unit", "bond_dim")


def fingerprint(path, group_attr=None, rename=None, notes=None):
    """(fingerprint, root attributes) of a checkpoint; metadata None when unreadable.

    The fingerprint holds the file's size and modification time, a hash of its
    metadata (group and dataset names, shapes, dtypes) and, when its datasets
    resolve to other files (virtual-dataset sources, external links), those
    files' paths, sizes and modification times under ``linked``.  ``rename``
    and ``notes`` are those of :func:`bondscope._runinfo.file_attributes`.
    """
    import h5py

    st = os.stat(path)
    stamp = {"size": st.st_size, "mtime_ns": st.st_mtime_ns, "metadata": None}
    if not statmode.S_ISREG(st.st_mode):  # a FIFO or device would block the open
        return stamp, {}
    digest = hashlib.sha256()
    attrs = {}

    def visit(name, obj):
        if isinstance(obj, h5py.Dataset):
            digest.update(f"D {name} {obj.shape} {obj.dtype}\n".encode())
        else:
            digest.update(f"G {name}\n".encode())

    try:
        with h5py.File(path, "r") as f:
            f.visititems(visit)
            linked = linked_stamps(f)
            attrs = file_attributes(f, (*ROW_ATTRS, group_attr), rename, notes)
        stamp["metadata"] = digest.hexdigest()
    except Exception:  # unreadable in any way: never skipped; profiling says why
        return stamp, attrs
    if linked:
        stamp["linked"] = linked
    return stamp, attrs


def resumed(plan, recorded, group_attr, rename=None):
    """The skipped row of a checkpoint whose stored result still holds, else None."""
    try:
        with open(plan["target"], encoding="utf-8") as f:
            doc = json.load(f)
    except (OSError, ValueError, RecursionError):
        return None
    record = doc.get("batch") if isinstance(doc, dict) else None
    if not isinstance(record, dict) or record.get("version") != RECORD_VERSION \
            or record.get("options") != recorded:
        return None
    try:
        stamp, attrs = fingerprint(plan["path"], group_attr, rename)
    except OSError:
        return None
    if stamp["metadata"] is None or record.get("fingerprint") != stamp:
        return None
    return {"key": plan["key"], "status": "skipped", "attrs": attrs, **measures(doc)}


def measures(doc):
    cuts = doc.get("cuts", [])
    entropies = [c["entropy"] for c in cuts]
    middle = [c["entropy"] for c in cuts if c["position"] == doc["sites"] // 2]
    split = [c["number_entropy"] for c in cuts
             if c["position"] == doc["sites"] // 2 and "number_entropy" in c]
    bonds = [c["bond_dimension"] for c in cuts if "bond_dimension" in c]
    trunc = doc.get("truncation")
    weights = [c["discarded_weight"] for c in cuts if "discarded_weight" in c]
    record = doc.get("batch", {})
    return {"kind": doc.get("kind"), "sites": doc.get("sites"),
            "max_entropy": max(entropies) if entropies else None,
            "middle_entropy": middle[0] if middle else None,
            "max_bond_dimension": max(bonds) if bonds else None,
            "max_discarded_weight": max(weights) if trunc and weights else None,
            "infidelity": trunc.get("infidelity") if trunc else None,
            "total_charge": (doc.get("charges") or {}).get("total"),
            "middle_number_entropy": split[0] if split else None,
            "wall_seconds": record.get("wall_seconds"),
            "warnings": "; ".join(record.get("warnings", []))}
