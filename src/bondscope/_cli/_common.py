"""Flags and helpers shared by the verbs (argparse-level, no heavy imports).

Every flag that more than one verb takes is defined once, in :data:`FLAGS`,
named after the library parameter it sets; a verb registers the ones it uses
with :func:`add_flags`.  Flags convert text to Python values; the library
checks the values (its messages name the parameter and the flag).
"""

import json
import re
import sys

__all__ = ["UsageError", "FLAGS", "add_flags", "add_layout_flags", "profile_options",
           "fit_options", "parse_size", "read_input", "print_json", "LAYOUT_FLAGS",
           "RESOURCE_FLAGS", "MEASURE_FLAGS", "FIT_FLAGS", "RUN_FLAGS"]


class UsageError(Exception):
    """A mistake in the command line (exit status 2)."""


def parse_size(text):
    """'24G', '512M', '1.5GiB', '1000000' -> bytes."""
    m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+)\s*([kKmMgGtT]?)(i?[bB])?\s*", text)
    if not m:
        raise UsageError(f"size {text!r} is not a number with an optional K/M/G/T suffix")
    scale = {"": 1, "k": 2**10, "m": 2**20, "g": 2**30, "t": 2**40}[m.group(2).lower()]
    return int(float(m.group(1)) * scale)


def _integers(flag):
    def parse(text):
        try:
            values = [int(t) for t in text.split(",")]
        except ValueError:
            raise UsageError(f"{flag} {text!r}: expected an integer or a comma list") from None
        return values[0] if len(values) == 1 else values
    return parse


def _words(text):
    return [t.strip() for t in text.split(",") if t.strip()]


def _spectrum(text):
    if text == "all":
        return True
    try:
        return int(text)
    except ValueError:
        raise UsageError(f"--spectrum {text!r}: expected a count K or 'all'") from None


def _exponent(text):
    if text in ("auto", "su2"):
        return text
    try:
        return float(text)
    except ValueError:
        raise UsageError(f"--parity-exponent {text!r}: expected a number, su2 or auto") from None


def _corrections(text):
    names = _words(text)
    return () if names == ["none"] else tuple(names)


# dest -> (group, flags, argparse keywords); the dest is the library's parameter name
FLAGS = {
    # checkpoint layout
    "state": ("layout", ("--state",), dict(metavar="DATASET",
                                           help="dataset holding a state vector")),
    "tensors": ("layout", ("--tensors",), dict(
        metavar="PATTERN",
        help="site tensor datasets, with a {site} placeholder, e.g. /run/psi/T{site}")),
    "local_dim": ("layout", ("--local-dim",), dict(
        metavar="D", type=_integers("--local-dim"),
        help="local dimension for a 1-D state vector: one integer or a comma list per site "
             "(default 2)")),
    "axes": ("layout", ("--axes",), dict(
        metavar="ORDER", help="axis order of the site tensors, a permutation of left,phys,right; "
                             "mixed states: left,ket,bra,right or left,phys,ancilla,right")),
    "complex_parts": ("layout", ("--complex-parts",), dict(
        metavar="HOW", default="auto",
        help="state vector stored as real numbers with (re, im) in a last axis of length 2: "
             "auto (found from the shape, default), last-axis (force) or none")),
    "unit_cell": ("layout", ("--unit-cell",), dict(
        action="store_const", const=True, default=None,
        help="read the site tensors as the unit cell of an infinite chain (detected without "
             "this flag when the first left bond equals the last right bond and is not 1)")),
    # block-sparse checkpoints
    "blocks": ("layout", ("--blocks",), dict(
        metavar="PATTERN", help="block-sparse MPS: site groups, with a {site} placeholder, "
                                "e.g. /state/site{site}")),
    "block_form": ("layout", ("--block-form",), dict(
        metavar="FORM", help="block-sparse form: blocks, packed or labelled (default: found "
                             "from the groups)")),
    "charge_flow": ("layout", ("--charge-flow",), dict(
        metavar="DIR", default="rightward",
        help="block charges obey q_right = q_left + q_phys (rightward, default) or "
             "q_left = q_right + q_phys (leftward)")),
    # charges
    "charges": ("measures", ("--charges",), dict(
        metavar="Q", help="local charges, one integer per basis state (0,1; -1,0,1); "
                          "quantities separated by ';', per-site groups 'N*LIST/*LIST' "
                          "(docs/charges.md); adds charge-resolved spectra")),
    "modulus": ("measures", ("--modulus",), dict(
        metavar="M", help="one per quantity: M >= 2 for a Z_M charge (parity: 2), 0 for an "
                          "integer charge")),
    # fermionic modes (mutual information)
    "parity": ("measures", ("--parity",), dict(
        metavar="P", help="fermion parity 0/1 of each local basis state, e.g. 0,1 or 0,1,1,0: "
                          "sites are fermionic modes in Jordan-Wigner order (docs/mutual.md)")),
    # measures
    "renyi": ("measures", ("--renyi",), dict(metavar="ALPHAS", type=_words, default=[],
                                             help="Renyi orders, e.g. 0.5,2,inf")),
    "base": ("measures", ("--base",), dict(
        metavar="B", default="e", help="logarithm base: e (nats, default) or 2 (bits)")),
    "spectrum": ("measures", ("--spectrum",), dict(
        metavar="K", nargs="?", const=True, default=False, type=_spectrum,
        help="store Schmidt values: all, or the K largest")),
    "bond_dim": ("measures", ("--bond-dim",), dict(
        metavar="CHI", type=int,
        help="report the discarded weight and infidelity of truncating to CHI")),
    "weight_tol": ("measures", ("--weight-tol",), dict(
        metavar="EPS", type=float,
        help="truncate each cut to the smallest rank dropping weight <= EPS")),
    "route": ("measures", ("--route",), dict(
        default="auto", help="state vectors: gram (reduced density matrices, fast), svd "
                             "(resolves the small Schmidt values), or auto (default)")),
    "precision": ("measures", ("--precision",), dict(
        default="promote", help="single-precision checkpoints: compute in double (promote, "
                                "default) or as stored (half the memory, floors at float32 eps)")),
    # mixed states
    "disentangle": ("measures", ("--disentangle",), dict(
        action="store_true", help="purifications: also the cut entropy after optimising "
                                  "ancilla unitaries beside each cut (docs/mixed.md)")),
    # resources
    "max_memory": ("resources", ("--max-memory",), dict(
        metavar="SIZE", type=parse_size,
        help="refuse work whose estimate exceeds SIZE (default: available memory)")),
    "scratch": ("resources", ("--scratch",), dict(
        metavar="DIR", help="directory for spilled bond matrices (default a temporary directory)")),
    "threads": ("resources", ("--threads",), dict(
        metavar="N", type=int,
        help="threads for linear algebra (default: BLAS environment or core count)")),
    "transfer_iterations": ("resources", ("--transfer-iterations",), dict(
        metavar="N", type=int,
        help="unit cells: iteration limit of the transfer-matrix eigensolver (default 10 chi^2)")),
    "quiet": ("resources", ("--quiet",), dict(action="store_true",
                                              help="no progress bar or warnings")),
    # run metadata
    "time_attr": ("run", ("--time-attr",), dict(
        metavar="NAME", help="root attribute holding the run's time (default time)")),
    "bond_dim_attr": ("run", ("--bond-dim-attr",), dict(
        metavar="NAME", help="root attribute holding the run's bond dimension, e.g. chi "
                             "(default bond_dim; else the largest stored bond)")),
    "weight_attr": ("run", ("--weight-attr",), dict(
        metavar="NAME", help="root attribute holding the run's discarded weight "
                             "(default max_discarded_weight)")),
    # scaling fit
    "boundary": ("fit", ("--boundary",), dict(
        help="open (chain with two ends) or periodic (ring); default: the checkpoint's "
             "'boundary' attribute or profile field, else open")),
    "window": ("fit", ("--window",), dict(
        metavar="A:B", help="cut positions to fit, inclusive (default: drop L//8 cuts at each "
                            "end)")),
    "corrections": ("fit", ("--corrections",), dict(
        metavar="LIST", type=_corrections,
        help="extra terms: parity, smooth, both (parity,smooth) or none (default: both for open "
             "chains, none for rings)")),
    "parity_exponent": ("fit", ("--parity-exponent",), dict(
        metavar="K", type=_exponent,
        help="alternating term (-1)^l / x^K: a number K (1 for free fermions), su2 for the "
             "SU(2) form sqrt(ln x)/x^(1/2), or auto (default: chosen by AICc)")),
}

LAYOUT_FLAGS = ("state", "tensors", "local_dim", "axes", "complex_parts", "unit_cell",
                "blocks", "block_form", "charge_flow")
MEASURE_FLAGS = ("renyi", "base", "spectrum", "bond_dim", "weight_tol", "route", "precision",
                 "charges", "modulus", "disentangle")
RESOURCE_FLAGS = ("max_memory", "scratch", "threads", "transfer_iterations", "quiet")
FIT_FLAGS = ("boundary", "window", "corrections", "parity_exponent")
RUN_FLAGS = ("time_attr", "bond_dim_attr", "weight_attr")
_TITLES = {"layout": "checkpoint layout (auto-detected when omitted)", "measures": "measures",
           "resources": "resources", "fit": "scaling fit",
           "run": "run metadata (root attribute names)"}


def add_flags(p, *names):
    """Register the shared flags ``names`` on parser ``p``, grouped as in :data:`FLAGS`."""
    groups = {}
    registered = getattr(p, "_bondscope_flags", set())
    for name in names:
        group, flags, kw = FLAGS[name]
        if group not in groups:
            groups[group] = p.add_argument_group(_TITLES[group])
        groups[group].add_argument(*flags, dest=name, **kw)
        if name == "route":
            groups[group].add_argument("--accurate", action="store_const", dest="route",
                                       const="svd", help="same as --route svd")
        registered.add(name)
    p._bondscope_flags = registered
    p.set_defaults(_flags=frozenset(registered))


def add_layout_flags(p):
    add_flags(p, *LAYOUT_FLAGS)


def _registered(args, names):
    flags = getattr(args, "_flags", frozenset())
    return {n: getattr(args, n) for n in names if n in flags}


def profile_options(args, **overrides):
    """The :class:`~bondscope.ProfileOptions` that the verb's registered flags set."""
    from .._options import (
        BLOCK_LAYOUT,
        LAYOUT,
        MEASURES,
        RESOURCES,
        RUN_META,
        ProfileOptions,
    )

    kwargs = _registered(args, (*LAYOUT, *BLOCK_LAYOUT, *MEASURES, *RESOURCES, *RUN_META))
    kwargs.update(overrides)
    return ProfileOptions.from_kwargs(**kwargs)


def fit_options(args):
    """The scaling-fit keywords that the verb's registered flags set (None left out)."""
    return {k: v for k, v in _registered(args, FIT_FLAGS).items() if v is not None}


def read_input(path, args, **overrides):
    """A Profile from a saved profile, or by profiling a checkpoint with the args' options."""
    from .._document import is_saved_profile, load_profile
    from .._pipeline import profile

    if is_saved_profile(path):
        return load_profile(path)
    return profile(path, profile_options(args, **overrides),
                   progress=not getattr(args, "quiet", False))


def print_json(obj):
    if hasattr(obj, "to_dict"):
        obj = obj.to_dict()
    sys.stdout.write(json.dumps(obj, indent=1, allow_nan=False) + "\n")
