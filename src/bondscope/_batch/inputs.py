"""Which checkpoints a batch runs on, and the names of their results."""

import glob
import hashlib
import os
import re
from pathlib import Path

from .._text import natural_key

__all__ = ["collect_inputs", "result_key", "parse_shard"]

_SUFFIXES = (".h5", ".hdf5")
_GLOB_CHARS = re.compile(r"[*?\[]")


def collect_inputs(inputs):
    """The checkpoints named by files, directories and glob patterns, sorted.

    Parameters
    ----------
    inputs : str, Path or list of them
        Files (taken whatever their suffix), directories (searched recursively
        for ``*.h5`` and ``*.hdf5``) and glob patterns (``**`` recurses; a
        matched directory is searched like a named one).

    Returns
    -------
    list of Path
        As found, one per resolved path, sorted by resolved path (numbers in
        names compared as numbers: ``chi8`` before ``chi16``).

    Raises
    ------
    OSError
        A path that does not exist, or an input that yields no checkpoint.
    ValueError
        No inputs at all.
    """
    if isinstance(inputs, (str, os.PathLike)):
        inputs = [inputs]
    inputs = list(inputs)
    if not inputs:
        raise ValueError("no inputs: give checkpoint files, directories or glob patterns")
    found = {}
    for item in inputs:
        text = os.fspath(item)
        if os.path.exists(text):
            hits = [Path(text)]
        elif _GLOB_CHARS.search(text):
            hits = [Path(p) for p in sorted(glob.glob(text, recursive=True))]
        else:
            raise OSError(f"{text}: no such file or directory")
        files = []
        for hit in hits:
            if hit.is_dir():
                files += [p for p in sorted(hit.rglob("*"))
                          if p.suffix.lower() in _SUFFIXES and p.is_file()]
            else:
                files.append(hit)
        if not files:
            raise OSError(f"{text}: no checkpoints found (searched for *.h5 and *.hdf5)")
        for p in files:
            found.setdefault(str(p.resolve()), p)
    return [found[k] for k in sorted(found, key=natural_key)]


def result_key(path):
    """The name of a checkpoint's result: readable stem + hash of the resolved path.

    Examples
    --------
    ``scan/J0.5/state.h5`` -> ``state-3f9a0c1b2d`` (the digits depend on the path).
    """
    resolved = str(Path(path).resolve())
    digest = hashlib.sha256(resolved.encode("utf-8", "surrogateescape")).hexdigest()[:10]
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", Path(resolved).stem).strip("._")[:60]
    return f"{stem or 'checkpoint'}-{digest}"


def parse_shard(shard):
    """``None``, ``"I/N"`` or ``(I, N)`` -> None or ``(I, N)`` with 0 <= I < N.

    Raises
    ------
    ValueError
        Not of that form, or I outside 0..N-1.
    """
    if shard is None:
        return None
    if isinstance(shard, str):
        m = re.fullmatch(r"\s*(\d+)\s*/\s*(\d+)\s*", shard)
        if not m:
            raise ValueError(f"shard {shard!r} is not of the form I/N, e.g. 0/4")
        shard = (int(m.group(1)), int(m.group(2)))
    try:
        index, count = (int(v) for v in shard)
    except (TypeError, ValueError):
        raise ValueError(f"shard {shard!r} is not a pair (I, N) of integers") from None
    if count < 1 or not 0 <= index < count:
        raise ValueError(f"shard {index}/{count}: need N >= 1 and 0 <= I < N "
                         "(I counts from 0)")
    return index, count
