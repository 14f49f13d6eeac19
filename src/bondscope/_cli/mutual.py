"""`bondscope mutual`: one-site entropies, mutual information, its decay and site ordering."""

import sys

from ._common import LAYOUT_FLAGS, RESOURCE_FLAGS, add_flags, profile_options

HELP = ("site-resolved entanglement: one-site entropies, mutual information I(i, j), its decay "
        "with distance, and a better site ordering")
ORDER = 5


def add_arguments(p):
    p.add_argument("file", metavar="FILE", help="HDF5 checkpoint (state vector or MPS)")
    p.add_argument("--json", action="store_true",
                   help="print the mutual-information document as JSON on stdout")
    p.add_argument("-o", "--output", metavar="OUT", help="also save the document (.json)")
    g = p.add_argument_group("analysis")
    g.add_argument("--select", metavar="FRACTION", type=float, default=0.1,
                   help="orbital selection: sites with s_i >= FRACTION x max s_i (default 0.1)")
    g.add_argument("--no-reorder", dest="reorder", action="store_false",
                   help="do not profile the state in the suggested order")
    g.add_argument("--swap-bond-dim", metavar="CHI", type=int,
                   help="MPS: bond cap of the swap gates that reorder it (default: its "
                        "largest bond)")
    g.add_argument("--budget-target", metavar="EPS", type=float, default=1e-8,
                   help="discarded weight per cut of the bond budgets before and after "
                        "reordering (default 1e-8)")
    g = p.add_argument_group("engine")
    engine = g.add_mutually_exclusive_group()
    engine.add_argument("--workers", metavar="N", type=int,
                        help="local worker processes over first sites (default: this process "
                             "with all BLAS threads)")
    engine.add_argument("--scheduler", metavar="ADDRESS",
                        help="run the pairs on an existing Dask cluster, e.g. tcp://node17:8786")
    add_flags(p, *LAYOUT_FLAGS[:4], "parity", "renyi", "base", "precision", *RESOURCE_FLAGS)


def run(args):
    from .._analyses.mutual import mutual_information
    from .._mutualtext import mutual_text

    result = mutual_information(
        args.file, profile_options(args), select=args.select, reorder=args.reorder,
        swap_bond_dim=args.swap_bond_dim, budget_target=args.budget_target,
        workers=args.workers, scheduler=args.scheduler, progress=not args.quiet)
    saved = result.save(args.output, protect=[args.file]) if args.output else None
    text = result.to_json(indent=1) if args.json else mutual_text(result)
    if saved and not args.json:
        text += f"\nmutual information written to {args.output}"
    sys.stdout.write(text + "\n")
    return 0
