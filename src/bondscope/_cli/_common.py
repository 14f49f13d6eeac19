"""Options and helpers shared by the verbs (argparse-level, no heavy imports)."""

import json
import re
import sys

__all__ = ["UsageError", "add_layout_arguments", "add_measure_arguments", "layout_options",
           "measure_options", "parse_size", "read_input", "print_json"]



class UsageError(Exception):
    """A mistake in the command line (exit status 2)."""


def parse_size(text):
    """'24G', '512M', '1.5GiB', '1000000' -> bytes."""
    m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+)\s*([kKmMgGtT]?)(i?[bB])?\s*", text)
    if not m:
        raise UsageError(f"size {text!r} is not a number with an optional K/M/G/T suffix")
    scale = {"": 1, "k": 2**10, "m": 2**20, "g": 2**30, "t": 2**40}[m.group(2).lower()]
    return int(float(m.group(1)) * scale)


def _local_dim(text):
    try:
        dims = [int(t) for t in text.split(",")]
    except ValueError:
        raise UsageError(f"--local-dim {text!r}: expected an integer or a comma list") from None
    return dims[0] if len(dims) == 1 else dims


def _renyi(text):
    from .._pipeline import renyi_orders

    try:
        return renyi_orders([t for t in text.split(",") if t.strip()])
    except ValueError as exc:
        raise UsageError(f"--renyi: {exc}") from None


def _spectrum(text):
    if text is None or text == "all":
        return True
    try:
        k = int(text)
    except ValueError:
        raise UsageError(f"--spectrum {text!r}: expected a count K or 'all'") from None
    if k < 1:
        raise UsageError(f"--spectrum {k}: K must be >= 1")
    return k


def add_layout_arguments(p):
    g = p.add_argument_group("checkpoint layout (auto-detected when omitted)")
    g.add_argument("--state", metavar="DATASET", help="dataset holding a state vector")
    g.add_argument("--tensors", metavar="PATTERN",
                   help="site tensor datasets, with a {site} placeholder, e.g. /run/psi/T{site}")
    g.add_argument("--local-dim", metavar="D", type=_local_dim,
                   help="local dimension for a 1-D state vector: one integer or a comma list "
                        "per site (default 2)")
    g.add_argument("--axes", metavar="ORDER",
                   help="axis order of the site tensors, a permutation of left,phys,right")


def add_measure_arguments(p):
    g = p.add_argument_group("measures")
    g.add_argument("--renyi", metavar="ALPHAS", type=_renyi, default=[],
                   help="Renyi orders, e.g. 0.5,2,inf")
    g.add_argument("--base", metavar="B", default="e",
                   help="logarithm base: e (nats, default) or 2 (bits)")
    g.add_argument("--spectrum", metavar="K", nargs="?", const="all", default=False,
                   help="store Schmidt values: all, or the K largest")
    g.add_argument("--bond-dim", metavar="CHI", type=int,
                   help="report the discarded weight and infidelity of truncating to CHI")
    g.add_argument("--weight-tol", metavar="EPS", type=float,
                   help="truncate each cut to the smallest rank dropping weight <= EPS")
    g.add_argument("--route", choices=("auto", "gram", "svd"), default="auto",
                   help="state vectors: gram (reduced density matrices, fast), svd "
                        "(resolves the small Schmidt values), or auto (default)")
    g.add_argument("--accurate", action="store_const", dest="route", const="svd",
                   help="same as --route svd")
    g.add_argument("--precision", choices=("promote", "stored"), default="promote",
                   help="single-precision checkpoints: compute in double (promote, default) "
                        "or as stored (half the memory, floors at float32 eps)")
    g = p.add_argument_group("resources")
    g.add_argument("--max-memory", metavar="SIZE", type=parse_size,
                   help="refuse work whose estimate exceeds SIZE (default: available memory)")
    g.add_argument("--scratch", metavar="DIR",
                   help="directory for spilled bond matrices (default a temporary directory)")
    g.add_argument("--threads", metavar="N", type=int,
                   help="threads for linear algebra (default: BLAS environment or core count)")
    g.add_argument("--quiet", action="store_true", help="no progress bar or warnings")


def layout_options(args):
    return dict(state=args.state, tensors=args.tensors, local_dim=args.local_dim, axes=args.axes)


def measure_options(args):
    spectrum = False if args.spectrum is False else _spectrum(args.spectrum)
    return dict(renyi=args.renyi, base=args.base, spectrum=spectrum, bond_dim=args.bond_dim,
                weight_tol=args.weight_tol, route=args.route, max_memory=args.max_memory,
                scratch=args.scratch, threads=args.threads, precision=args.precision)


def read_input(path, args, **overrides):
    """A Profile from a saved profile, or by profiling a checkpoint with the args' options."""
    from .._document import is_saved_profile, load_profile
    from .._pipeline import profile

    if is_saved_profile(path):
        return load_profile(path)
    opts = layout_options(args) if hasattr(args, "axes") else {}
    if hasattr(args, "renyi"):
        opts.update(measure_options(args))
    opts.update(overrides)
    return profile(path, progress=not getattr(args, "quiet", False), **opts)


def print_json(obj):
    sys.stdout.write(json.dumps(obj, indent=1, allow_nan=False) + "\n")
