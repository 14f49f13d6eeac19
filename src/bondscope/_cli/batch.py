"""`bondscope batch`: profile many checkpoints into a results directory, resumably."""

import sys

from ._common import (LAYOUT_FLAGS, MEASURE_FLAGS, RESOURCE_FLAGS, RUN_FLAGS, add_flags,
                      profile_options)

HELP = "profile many checkpoints into a results directory (resumable, local pool or Dask)"
ORDER = 30


def add_arguments(p):
    p.add_argument("inputs", nargs="+", metavar="INPUT",
                   help="checkpoint files, directories (searched recursively for *.h5 and "
                        "*.hdf5) or quoted glob patterns")
    p.add_argument("--out", required=True, metavar="DIR",
                   help="results directory: profiles/<name>-<hash>.json per checkpoint, "
                        "summary.csv, summary.json, series.json")
    g = p.add_argument_group("engine")
    engine = g.add_mutually_exclusive_group()
    engine.add_argument("--workers", metavar="N", type=int,
                        help="local worker processes (default: the usable cores)")
    engine.add_argument("--scheduler", metavar="ADDRESS",
                        help="run on an existing Dask cluster, e.g. tcp://node17:8786")
    g.add_argument("--shard", metavar="I/N",
                   help="take inputs I, I+N, I+2N, ... of the sorted list (I from 0), e.g. "
                        "one task of a SLURM job array")
    g.add_argument("--force", action="store_true",
                   help="recompute checkpoints that already have a result")
    g.add_argument("--time-limit", metavar="SECONDS", type=float,
                   help="seconds one checkpoint may take (local pool); one that runs longer "
                        "is stopped and becomes a failed row")
    g = p.add_argument_group("series")
    series = g.add_mutually_exclusive_group()
    series.add_argument("--group-attr", metavar="NAME",
                        help="HDF5 root attribute naming each checkpoint's series")
    series.add_argument("--group-pattern", metavar="REGEX",
                        help="regular expression searched in each path; its first group "
                             "names the series, e.g. 'run_(\\w+)_chi'")
    add_flags(p, *LAYOUT_FLAGS, *MEASURE_FLAGS, *RESOURCE_FLAGS, *RUN_FLAGS)


def run(args):
    from .._batch.run import run_batch
    from .._text import visible

    summary = run_batch(args.inputs, args.out, workers=args.workers, scheduler=args.scheduler,
                        shard=args.shard, force=args.force, group_attr=args.group_attr,
                        group_pattern=args.group_pattern, time_limit=args.time_limit,
                        progress=not args.quiet,
                        options=profile_options(args))
    for row in summary.rows:
        if row["status"] == "failed":
            print(f"failed: {visible(row['source'])}: {visible(row['error'])}",
                  file=sys.stderr)
    print(f"{len(summary)} checkpoints: {summary.done} done, {summary.skipped} skipped, "
          f"{summary.failed} failed; summary in {visible(summary.files['csv'])}")
    return summary.exit_status
