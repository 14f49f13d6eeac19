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

import csv
import glob
import hashlib
import io
import json
import math
import os
import re
import signal
import sys
import time
import warnings
from collections import deque
from contextlib import contextmanager
from datetime import datetime, timezone
from numbers import Integral
from pathlib import Path

from ._document import atomic_write

__all__ = ["run_batch", "BatchSummary", "collect_inputs", "result_key", "parse_shard",
           "COLUMNS", "PROFILES", "KILL_ENV"]

RECORD_VERSION = 1
SUMMARY_FORMAT = "bondscope-batch-summary"
SERIES_FORMAT = "bondscope-series"
PROFILES = "profiles"
COLUMNS = ("source", "status", "series", "time", "time_unit", "bond_dim", "kind", "sites",
           "max_entropy", "middle_entropy", "max_bond_dimension", "max_discarded_weight",
           "infidelity", "wall_seconds", "profile", "key", "error", "warnings")
# Test-only: a worker given a checkpoint of this file name kills itself with SIGKILL.
KILL_ENV = "BONDSCOPE_TEST_KILL_WORKER"

_SUFFIXES = (".h5", ".hdf5")
_GLOB_CHARS = re.compile(r"[*?\[]")
_ATTRS = ("time", "time_unit", "bond_dim")
_LAYOUT = ("state", "tensors", "local_dim", "axes")
# options that change how a profile is computed, not what it contains
_NEUTRAL = frozenset({"threads", "scratch", "max_memory"})
_EXIT_CAP = 100


class BatchSummary:
    """What a batch did: one row per checkpoint and the files written.

    Attributes
    ----------
    rows : list of dict
        One per checkpoint in input order, with the keys :data:`COLUMNS`.
    out : Path
        The results directory.
    files : dict
        ``"csv"``, ``"json"`` and, when grouping, ``"series"`` -> Path.
    """

    def __init__(self, rows, out, files):
        self.rows, self.out, self.files = rows, Path(out), files

    def count(self, status):
        """Rows of one status: "done", "skipped" or "failed"."""
        return sum(r["status"] == status for r in self.rows)

    @property
    def done(self):
        return self.count("done")

    @property
    def skipped(self):
        return self.count("skipped")

    @property
    def failed(self):
        return self.count("failed")

    @property
    def exit_status(self):
        """The number of failed checkpoints, capped at 100 (0 when all went well)."""
        return min(self.failed, _EXIT_CAP)

    def __len__(self):
        return len(self.rows)

    def __repr__(self):
        return (f"<BatchSummary {len(self.rows)} checkpoints in {str(self.out)!r}: "
                f"{self.done} done, {self.skipped} skipped, {self.failed} failed>")


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
    return [found[k] for k in sorted(found, key=_natural)]


def _natural(text):
    """Sort key putting 'chi8' before 'chi16'."""
    return [(0, int(t), "") if t.isdigit() else (1, 0, t) for t in re.split(r"(\d+)", text)]


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


def run_batch(inputs, out, *, workers=None, scheduler=None, shard=None, force=False,
              group_attr=None, group_pattern=None, progress=False, **profile_options):
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
    progress : bool
        Progress bar with done/skipped/failed counts on a terminal's stderr.
    **profile_options
        Layout and measures for :func:`bondscope.profile`, applied to every
        checkpoint (``renyi``, ``bond_dim``, ``weight_tol``, ``spectrum``, ...).

    Returns
    -------
    BatchSummary

    Raises
    ------
    ValueError, TypeError
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
    if group_attr is not None and group_pattern is not None:
        raise ValueError("give either group_attr or group_pattern, not both")
    pattern = _group_regex(group_pattern)
    options = _checked_options(profile_options)
    recorded = _recorded_options(options)
    paths = collect_inputs(inputs)
    if shard is not None:
        paths = paths[shard[0]::shard[1]]
    if out.exists() and not out.is_dir():
        raise OSError(f"{out}: exists and is not a directory; choose a results directory")
    (out / PROFILES).mkdir(parents=True, exist_ok=True)

    plans, results = _plan(paths, out, recorded, group_attr, force)
    todo = [plan for plan in plans if plan["key"] not in results]
    if scheduler is None:
        workers = int(workers or _usable_cores())
        if options.get("threads") is None:
            options["threads"] = max(1, _usable_cores() // workers)
    kill = os.environ.get(KILL_ENV)
    tasks = [dict(plan, options=options, recorded=recorded, group_attr=group_attr, kill=kill)
             for plan in todo]

    with _tally(len(plans), progress) as tally:
        for found in results.values():
            tally(found["status"])
        if tasks:
            engine = _local_results(tasks, workers) if scheduler is None else \
                _dask_results(tasks, scheduler)
            for found in engine:
                results[found["key"]] = found
                tally(found["status"])

    rows = [_row(plan, results[plan["key"]], pattern, group_attr) for plan in plans]
    suffix = "" if shard is None else f".shard-{shard[0]}-of-{shard[1]}"
    group_by = None if pattern is None and group_attr is None else \
        ({"attr": group_attr} if group_attr is not None else {"pattern": group_pattern})
    files = _write_summary(out, suffix, rows, inputs, shard, recorded, group_by)
    if group_by is not None:
        files["series"] = _write_series(out, suffix, rows, group_by)
    return BatchSummary(rows, out, files)


def _plan(paths, out, recorded, group_attr, force):
    """Each checkpoint's key and target, and the skipped rows of those still valid."""
    plans = [{"source": str(p), "path": str(p.resolve()), "key": result_key(p),
              "target": str(out / PROFILES / f"{result_key(p)}.json")} for p in paths]
    _remove_leftovers(out / PROFILES, {plan["key"] for plan in plans})
    results = {}
    for plan in plans:
        found = None if force else _resumed(plan, recorded, group_attr)
        if found is not None:
            results[plan["key"]] = found
    return plans, results


# --- options -----------------------------------------------------------------

def _profile_parameters():
    import inspect

    from ._pipeline import profile

    params = inspect.signature(profile).parameters
    return {k: p.default for k, p in params.items() if k not in ("source", "progress")}


def _checked_options(options):
    import numpy as np

    from ._pipeline import profile

    allowed = _profile_parameters()
    unknown = sorted(set(options) - set(allowed))
    if unknown:
        raise TypeError(f"unknown profile option(s) {', '.join(unknown)}; expected some of "
                        f"{', '.join(sorted(allowed))}")
    options = dict(options)
    tensors = options.get("tensors")
    if tensors is not None and "{site}" not in tensors:
        raise ValueError(f"tensor pattern {tensors!r} has no {{site}} placeholder, "
                         "e.g. /run/psi/T{site}")
    memory = options.get("max_memory")
    if memory is not None and not memory > 0:
        raise ValueError(f"max_memory must be a positive number of bytes, found {memory!r}")
    # The pipeline's own checks of the measures, once here rather than in every worker:
    # profile a two-site product state with them.
    trial = {k: v for k, v in options.items() if k not in (*_LAYOUT, "scratch", "max_memory")}
    plus = np.full((1, 2, 1), 2 ** -0.5)
    profile([plus, plus], **trial)
    return options


def _recorded_options(options):
    """The options that decide a result's content, with defaults filled in, as JSON."""
    from ._pipeline import renyi_orders

    full = {k: v for k, v in _profile_parameters().items() if k not in _NEUTRAL}
    full.update({k: v for k, v in options.items() if k not in _NEUTRAL})
    full["renyi"] = renyi_orders(full["renyi"])
    if full["spectrum"] is False:
        full["spectrum"] = None
    return json.loads(json.dumps(full))


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


# --- fingerprints and stored results -------------------------------------------

def _plain(value):
    """An HDF5 attribute value as a JSON-ready Python value (None when not finite)."""
    if hasattr(value, "tolist"):
        value = value.tolist()
    if isinstance(value, bytes):
        value = value.decode("utf-8", "replace")
    if isinstance(value, list):
        value = [_plain(v) for v in value]
        return value[0] if len(value) == 1 else value
    if isinstance(value, float) and not math.isfinite(value):
        return None
    try:
        json.dumps(value, allow_nan=False)
    except (TypeError, ValueError):
        return str(value)
    return value


def _describe(path, group_attr=None):
    """(fingerprint, root attributes) of a checkpoint; metadata None when unreadable."""
    import h5py

    st = os.stat(path)
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
            for name in (*_ATTRS, group_attr):
                if name is not None and name in f.attrs:
                    try:
                        attrs[name] = _plain(f.attrs[name])
                    except (OSError, TypeError):
                        pass
        metadata = digest.hexdigest()
    except Exception:  # unreadable in any way: never skipped; profiling says why
        metadata = None
    return {"size": st.st_size, "mtime_ns": st.st_mtime_ns, "metadata": metadata}, attrs


def _resumed(plan, recorded, group_attr):
    """The skipped row of a checkpoint whose stored result still holds, else None."""
    try:
        with open(plan["target"], encoding="utf-8") as f:
            doc = json.load(f)
    except (OSError, ValueError):
        return None
    record = doc.get("batch") if isinstance(doc, dict) else None
    if not isinstance(record, dict) or record.get("version") != RECORD_VERSION \
            or record.get("options") != recorded:
        return None
    try:
        fingerprint, attrs = _describe(plan["path"], group_attr)
    except OSError:
        return None
    if fingerprint["metadata"] is None or record.get("fingerprint") != fingerprint:
        return None
    return {"key": plan["key"], "status": "skipped", "attrs": attrs, **_measures(doc)}


def _remove_leftovers(directory, keys):
    """Delete temporary files of interrupted writes (named by atomic_write) of these keys."""
    for entry in os.scandir(directory):
        name = entry.name
        if name.startswith(".") and name.endswith(".part"):
            key = name[1:].rpartition(".json.")[0]
            if key in keys:
                os.unlink(entry.path)


def _measures(doc):
    cuts = doc.get("cuts", [])
    entropies = [c["entropy"] for c in cuts]
    middle = [c["entropy"] for c in cuts if c["position"] == doc["sites"] // 2]
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
            "wall_seconds": record.get("wall_seconds"),
            "warnings": "; ".join(record.get("warnings", []))}


# --- the work of one checkpoint (runs in a worker) -------------------------------

def _one_line(exc):
    return " ".join(str(exc).split()) or type(exc).__name__


def _profile_one(task):
    """Profile one checkpoint and write its result; return its summary fields."""
    if task.get("kill") and task["kill"] == Path(task["path"]).name:
        os.kill(os.getpid(), signal.SIGKILL)
    from ._document import Profile
    from ._pipeline import profile

    start = time.perf_counter()
    attrs = {}
    try:
        fingerprint, attrs = _describe(task["path"], task["group_attr"])
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            prof = profile(task["path"], **task["options"])
        doc = prof.to_dict()
        doc["batch"] = {
            "version": RECORD_VERSION, "checkpoint": task["path"],
            "fingerprint": fingerprint, "options": task["recorded"], "attrs": attrs,
            "wall_seconds": round(time.perf_counter() - start, 6),
            "warnings": list(dict.fromkeys(_one_line(w.message) for w in caught)),
            "written": datetime.now(timezone.utc).isoformat(timespec="seconds")}
        Profile(doc).save(task["target"])
    except Exception as exc:
        return _failure(task, f"{type(exc).__name__}: {_one_line(exc)}", attrs,
                        time.perf_counter() - start)
    return {"key": task["key"], "status": "done", "attrs": attrs, **_measures(doc)}


def _warm(parent):
    """Worker start-up: import what profiling needs, so task times exclude it, and
    exit when the batch process ``parent`` is gone (killed), not linger as an orphan."""
    import threading

    import h5py  # noqa: F401
    import scipy.linalg  # noqa: F401

    from . import _pipeline, _sweep  # noqa: F401

    threading.Thread(target=_watch, args=(parent,), daemon=True).start()


def _watch(parent):
    while os.getppid() == parent:
        time.sleep(0.5)
    os._exit(1)


def _failure(task, error, attrs=None, seconds=None):
    return {"key": task["key"], "status": "failed", "attrs": attrs or {}, "error": error,
            "wall_seconds": None if seconds is None else round(seconds, 6)}


_DIED = ("WorkerDied: the worker process profiling it died (killed by a signal, e.g. for "
         "exceeding its memory)")


# --- engines ---------------------------------------------------------------------

def _local_results(tasks, workers):
    """Run tasks on a local process pool; yields results as they finish.

    At most ``workers`` tasks are in flight, so when a worker dies the tasks it
    may have been running are known: a lone one is the culprit; several are
    retried one at a time in a pool of their own.
    """
    import multiprocessing
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    context = multiprocessing.get_context("spawn")
    queue = deque(tasks)
    finished_any = False
    while queue:
        suspects, broken = [], False
        with ProcessPoolExecutor(max_workers=min(workers, len(queue)), mp_context=context,
                                 initializer=_warm, initargs=(os.getpid(),)) as pool:
            running = {}
            while queue or running:
                while queue and not broken and len(running) < workers:
                    task = queue.popleft()
                    try:
                        running[pool.submit(_profile_one, task)] = task
                    except BrokenProcessPool:
                        queue.appendleft(task)
                        broken = True
                if not running:
                    break
                finished, _ = wait(running, return_when=FIRST_COMPLETED)
                for future in finished:
                    task = running.pop(future)
                    exc = future.exception()
                    if isinstance(exc, BrokenProcessPool):
                        suspects.append(task)
                        broken = True
                    elif exc is not None:
                        yield _failure(task, f"{type(exc).__name__}: {_one_line(exc)}")
                    else:
                        finished_any = True
                        yield future.result()
        if suspects and not finished_any:
            _check_start(context)
        if len(suspects) == 1:
            yield _failure(suspects[0], _DIED)
        else:
            for task in suspects:
                yield from _alone(task, context)


def _check_start(context):
    """Raise RuntimeError when worker processes cannot even start, rather than blame
    every checkpoint for their deaths."""
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures.process import BrokenProcessPool

    with ProcessPoolExecutor(max_workers=1, mp_context=context) as pool:
        try:
            pool.submit(os.getpid).result()
        except BrokenProcessPool:
            raise RuntimeError("worker processes die on start-up; new processes re-import "
                               "the main module, which fails when Python reads the program "
                               "from standard input (run it from a file)") from None


def _alone(task, context):
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures.process import BrokenProcessPool

    with ProcessPoolExecutor(max_workers=1, mp_context=context, initializer=_warm,
                             initargs=(os.getpid(),)) as pool:
        try:
            yield pool.submit(_profile_one, task).result()
        except BrokenProcessPool:
            yield _failure(task, _DIED + "; retried alone, it died again")


def _dask_results(tasks, scheduler):
    """Run tasks on a Dask cluster; yields results as they finish.

    A task whose worker died (after the scheduler's own allowed failures) may only
    have shared that worker with the culprit, so it is resubmitted once; dying
    again marks it failed.
    """
    from dask.distributed import Client, as_completed
    from distributed.scheduler import KilledWorker

    own = not isinstance(scheduler, Client)
    client = Client(scheduler) if own else scheduler
    try:
        futures = {client.submit(_profile_one, task, pure=False): task for task in tasks}
        retried = set()
        pending = as_completed(futures)
        for future in pending:
            task = futures.pop(future)
            try:
                yield future.result()
            except KilledWorker:
                if task["key"] in retried:
                    yield _failure(task, _DIED + "; resubmitted once, it died again")
                else:
                    retried.add(task["key"])
                    again = client.submit(_profile_one, task, pure=False)
                    futures[again] = task
                    pending.add(again)
            except Exception as exc:
                yield _failure(task, f"{type(exc).__name__}: {_one_line(exc)}")
            future.release()
    finally:
        if own:
            client.close()


@contextmanager
def _tally(total, enabled):
    """A callable counting statuses, drawing a bar on a terminal's stderr when enabled."""
    counts = {"done": 0, "skipped": 0, "failed": 0}
    bar = None
    if enabled and sys.stderr.isatty():
        try:
            from tqdm import tqdm
        except ImportError:
            bar = None
        else:
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


# --- rows and files ----------------------------------------------------------------

def _row(plan, found, pattern, group_attr):
    attrs = found.get("attrs", {})
    series = None
    if pattern is not None:
        m = pattern.search(plan["source"])
        series = m.group(1) if m else None
    elif group_attr is not None and attrs.get(group_attr) is not None:
        series = str(attrs[group_attr])
    row = dict.fromkeys(COLUMNS)
    row.update({k: v for k, v in found.items() if k in COLUMNS})
    row.update(source=plan["source"], key=plan["key"], series=series,
               time=attrs.get("time"), time_unit=attrs.get("time_unit"),
               bond_dim=attrs.get("bond_dim"))
    if found["status"] != "failed":
        row["profile"] = f"{PROFILES}/{plan['key']}.json"
    return row


def _write_summary(out, suffix, rows, inputs, shard, recorded, group_by):
    counts = {s: sum(r["status"] == s for r in rows) for s in ("done", "skipped", "failed")}
    doc = {"format": SUMMARY_FORMAT, "version": 1,
           "inputs": [os.fspath(i) for i in inputs],
           "shard": None if shard is None else f"{shard[0]}/{shard[1]}",
           "options": recorded, "group_by": group_by, "counts": counts,
           "columns": list(COLUMNS), "rows": rows}
    text = json.dumps(doc, indent=1, allow_nan=False) + "\n"
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(COLUMNS)
    for r in rows:
        writer.writerow(["" if r[c] is None else (repr(r[c]) if isinstance(r[c], float)
                                                  else r[c]) for c in COLUMNS])
    files = {"csv": out / f"summary{suffix}.csv", "json": out / f"summary{suffix}.json"}
    atomic_write(files["csv"], lambda tmp: Path(tmp).write_text(buf.getvalue(), "utf-8"))
    atomic_write(files["json"], lambda tmp: Path(tmp).write_text(text, "utf-8"))
    return files


def _order(row):
    return (row["time"] is None, row["time"] if isinstance(row["time"], (int, float)) else 0,
            row["bond_dim"] is None,
            row["bond_dim"] if isinstance(row["bond_dim"], (int, float)) else 0, row["source"])


def _compare_series(out, members):
    """The comparison verdict of one series (``bondscope compare`` on its profiles)."""
    from ._comparison import checkpoint_meta, compare_profiles

    try:
        res = compare_profiles([out / m["profile"] for m in members],
                               names=[Path(m["checkpoint"]).name for m in members],
                               meta=[checkpoint_meta(m["checkpoint"]) for m in members])
    except (ValueError, OSError) as exc:
        return {"error": f"{type(exc).__name__}: {' '.join(str(exc).split())}"}
    keep = ("series", "runs", "largest_difference", "converged", "threshold", "extrapolation",
            "growth_rate")
    return {k: res[k] for k in keep if k in res}


def _write_series(out, suffix, rows, group_by):
    series = {}
    for r in sorted(rows, key=_order):
        if r["series"] is not None and r["profile"] is not None:
            series.setdefault(r["series"], []).append(
                {"checkpoint": r["source"], "profile": r["profile"], "time": r["time"],
                 "bond_dim": r["bond_dim"]})
    comparisons = {name: _compare_series(out, members)
                   for name, members in sorted(series.items()) if len(members) > 1}
    doc = {"format": SERIES_FORMAT, "version": 1, "group_by": group_by,
           "series": dict(sorted(series.items())), "comparisons": comparisons}
    path = out / f"series{suffix}.json"
    text = json.dumps(doc, indent=1, allow_nan=False) + "\n"
    atomic_write(path, lambda tmp: Path(tmp).write_text(text, "utf-8"))
    return path
