"""Many checkpoints: profile a scan into a results directory, resumably.

Results directory ``OUT``::

    OUT/profiles/<key>.json          one Profile per checkpoint; its top-level "batch"
                                     record holds the checkpoint's fingerprint and options
    OUT/summary.csv, summary.json    one row per checkpoint of the latest run
    OUT/series.json                  series index (when grouping was asked)

``<key>`` is the checkpoint's file stem plus 10 hex digits of the SHA-256 of its
resolved path, so equal names in different folders never share a result.  A
profile and its record are one file written under a temporary name and then
renamed: after a crash a result is whole or absent, and a rerun skips exactly
the whole ones.  With a shard the summary and series files carry a
``.shard-I-of-N`` suffix, so array tasks never write the same file.
"""

import math
import os
import re
import sys
from contextlib import contextmanager
from numbers import Integral, Real
from pathlib import Path

from .._files import remove_stale_parts
from .._options import ProfileOptions
from .._runinfo import attribute_names
from .cluster import dask_results
from .inputs import collect_inputs, parse_shard, result_key
from .local import local_results
from .records import resumed
from .summaries import PROFILES, BatchSummary, row, write_series, write_summary

__all__ = ["run_batch"]


def run_batch(inputs, out, *, workers=None, scheduler=None, shard=None, force=False,
              group_attr=None, group_pattern=None, time_limit=None, progress=False,
              options=None, **profiling):
    """Profile many checkpoints into a results directory, skipping finished ones.

    Parameters
    ----------
    inputs : str, Path or list of them
        Checkpoint files, directories and glob patterns (see :func:`collect_inputs`).
    out : str or Path
        Results directory (created).  On a cluster it must be writable by the
        workers: each worker writes its own results.
    workers : int, optional
        Local worker processes (default: the cores this process may use).
    scheduler : str or dask.distributed.Client, optional
        Run on an existing Dask cluster (its address, or a connected client)
        instead of a local pool.
    shard : str or (int, int), optional
        ``"I/N"``: take inputs I, I+N, I+2N, ... of the sorted list (I from 0).
    force : bool
        Recompute checkpoints that already have a result.
    group_attr : str, optional
        HDF5 root attribute naming each checkpoint's series.
    group_pattern : str, optional
        Regular expression searched in the checkpoint path as found; its first
        group is the series name.
    time_limit : float, optional
        Seconds one checkpoint may take (local pool only).  Its worker stops
        it at the limit; one blocked where it cannot be stopped (a read hung
        inside HDF5) is killed a little later with the pool's other workers,
        whose checkpoints are given out again.  Either way it becomes a
        ``failed`` row ("TimeLimit: ...").
    progress : bool
        Progress bar with done/skipped/failed counts on a terminal's stderr.
    options : ProfileOptions, optional
        How every checkpoint is profiled.
    **profiling
        Fields of :class:`~bondscope.ProfileOptions` (``renyi``, ``bond_dim``,
        ``weight_tol``, ``spectrum``, layout, the run-metadata attribute names
        ``time_attr``, ``bond_dim_attr``, ``weight_attr``, ...), overriding
        ``options``.

    Returns
    -------
    BatchSummary

    Raises
    ------
    TypeError
        An unknown option.
    ValueError
        Malformed or contradictory options (checked once, before any work).
    OSError
        An input that does not exist or yields no checkpoint; ``out`` is a file.

    Notes
    -----
    A checkpoint is skipped when its result holds the same fingerprint (size,
    modification time and a hash of the HDF5 metadata: group and dataset
    names, shapes and dtypes) and the same options (``threads``, ``scratch``
    and ``max_memory`` do not count).  Failures are never stored, so a rerun
    tries them again.  A failing checkpoint (unreadable, refused by the memory
    pre-flight, or any error) becomes a ``failed`` row with its one-line error;
    a worker process that dies is replaced, the checkpoints it was running
    with others are retried one at a time, and the one that kills its worker
    again is marked failed.
    """
    inputs = [inputs] if isinstance(inputs, (str, os.PathLike)) else list(inputs)
    out = Path(out)
    shard = parse_shard(shard)
    if scheduler is not None and workers is not None:
        raise ValueError("give either workers (a local pool) or scheduler (a Dask cluster), "
                         "not both")
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, Integral)
                                or workers < 1):
        raise ValueError(f"workers must be an integer >= 1, found {workers!r}")
    if time_limit is not None:
        if isinstance(time_limit, bool) or not isinstance(time_limit, Real) \
                or not 0 < time_limit < math.inf:
            raise ValueError(f"time_limit (--time-limit) must be a number of seconds > 0, "
                             f"found {time_limit!r}")
        if scheduler is not None:
            raise ValueError("time_limit (--time-limit) applies to the local pool; on a Dask "
                             "cluster use the cluster's own limits")
        time_limit = float(time_limit)
    if group_attr is not None and group_pattern is not None:
        raise ValueError("give either group_attr or group_pattern, not both")
    pattern = _group_regex(group_pattern)
    opts = ProfileOptions.from_kwargs(options, **profiling)
    recorded, rename = opts.recorded(), attribute_names(opts)
    paths = collect_inputs(inputs)
    if shard is not None:
        paths = paths[shard[0]::shard[1]]
    if out.exists() and not out.is_dir():
        raise OSError(f"{out}: exists and is not a directory; choose a results directory")
    (out / PROFILES).mkdir(parents=True, exist_ok=True)

    plans, results = _plan(paths, out, recorded, group_attr, rename, force)
    todo = [plan for plan in plans if plan["key"] not in results]
    if scheduler is None:
        workers = int(workers or _usable_cores())
        if opts.threads is None:
            opts = opts.replace(threads=max(1, _usable_cores() // workers))
    tasks = [dict(plan, options=opts, recorded=recorded, group_attr=group_attr, rename=rename,
                  time_limit=time_limit) for plan in todo]

    with _tally(len(plans), progress) as tally:
        for found in results.values():
            tally(found["status"])
        if tasks:
            engine = local_results(tasks, workers, time_limit) if scheduler is None else \
                dask_results(tasks, scheduler)
            for found in engine:
                results[found["key"]] = found
                tally(found["status"])

    rows = [row(plan, results[plan["key"]], pattern, group_attr, rename) for plan in plans]
    suffix = "" if shard is None else f".shard-{shard[0]}-of-{shard[1]}"
    group_by = None if pattern is None and group_attr is None else \
        ({"attr": group_attr} if group_attr is not None else {"pattern": group_pattern})
    files = write_summary(out, suffix, rows, inputs, shard, recorded, group_by)
    if group_by is not None:
        files["series"] = write_series(out, suffix, rows, group_by, rename)
    return BatchSummary(rows, out, files)


def _plan(paths, out, recorded, group_attr, rename, force):
    """Each checkpoint's key and target, and the skipped rows of those still valid."""
    plans = [{"source": str(p), "path": str(p.resolve()), "key": result_key(p),
              "target": str(out / PROFILES / f"{result_key(p)}.json")} for p in paths]
    for directory in (out, out / PROFILES):  # files of killed writers; live ones stay
        remove_stale_parts(directory)
    results = {}
    for plan in plans:
        found = None if force else resumed(plan, recorded, group_attr, rename)
        if found is not None:
            results[plan["key"]] = found
    return plans, results


def _group_regex(text):
    if text is None:
        return None
    try:
        regex = re.compile(text)
    except re.error as exc:
        raise ValueError(f"group pattern {text!r} is not a regular expression ({exc})") from None
    if regex.groups < 1:
        raise ValueError(f"group pattern {text!r} has no (group); its first group names the "
                         "series, e.g. 'run_(\\w+)_chi'")
    return regex


def _usable_cores():
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


@contextmanager
def _tally(total, enabled):
    """A callable counting statuses, drawing a bar on a terminal's stderr when enabled."""
    counts = {"done": 0, "skipped": 0, "failed": 0}
    bar = None
    if enabled and sys.stderr.isatty():
        from tqdm import tqdm

        bar = tqdm(total=total, desc="batch", unit="ckpt", file=sys.stderr)
        bar.set_postfix(counts)

    def add(status):
        counts[status] += 1
        if bar is not None:
            bar.set_postfix(counts, refresh=False)
            bar.update()

    try:
        yield add
    finally:
        if bar is not None:
            bar.close()
