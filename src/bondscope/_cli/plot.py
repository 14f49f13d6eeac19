"""`bondscope plot`: draw a figure of one or more profiles (PNG, SVG or PDF)."""

from ._common import (FIT_FLAGS, LAYOUT_FLAGS, RUN_FLAGS, UsageError, add_flags, fit_options,
                      profile_options)

HELP = "draw a figure of profiles: entropy, spectrum, budget, heatmap, convergence, sectors, ..."
ORDER = 40


def _numbers(text):
    try:
        return [float(t) for t in text.split(",") if t.strip()]
    except ValueError:
        raise UsageError(f"--targets {text!r}: expected comma-separated numbers, "
                         "e.g. 1e-4,1e-6,1e-8") from None


# figure flags: dest (a keyword of the figure functions) -> (flags, argparse keywords);
# each is passed to the kinds whose function takes it
FIGURE_FLAGS = {
    "targets": (("--targets",), dict(metavar="EPS", type=_numbers,
                                     help="budget: target errors, comma-separated "
                                          "(default: 1e-4,1e-6,1e-8)")),
    "split": (("--split",), dict(help="budget: each target is per cut (cut, default), or "
                                      "bounds the whole state spread equally (equal) or "
                                      "pooled over the cuts (pooled)")),
    "against": (("--against",), dict(help="x axis. entropy: cut position (cut, default), "
                                          "fraction l/N (fraction) or ln of the chord length "
                                          "(chord); convergence: discarded weight (weight, "
                                          "default) or 1/chi (bond)")),
    "tol": (("--degeneracy-tol",), dict(metavar="TOL", type=float,
                                        help="spectrum: levels closer than TOL count as "
                                             "degenerate (default 1e-6)")),
    "max_level": (("--max-level",), dict(metavar="XI", type=float,
                                         help="spectrum: upper limit of the level axis")),
    "cut": (("--cut",), dict(metavar="L", type=int,
                             help="sectors: the cut whose spectrum is drawn (default middle)")),
    "select": (("--select",), dict(metavar="FRACTION", type=float,
                                   help="mutual: mark sites with s_i >= FRACTION x max s_i "
                                        "(default 0.1)")),
    "swap_bond_dim": (("--swap-bond-dim",), dict(
        metavar="CHI", type=int, help="ordering: bond cap of the swap gates that reorder an "
                                      "MPS checkpoint (default its largest bond)")),
    "title": (("--title",), dict(help="figure title ('' for none)")),
}


def _kinds():
    from .._figures._kinds import kinds

    return kinds()


def add_arguments(p):
    p.add_argument("sources", metavar="SOURCE", nargs="+",
                   help="checkpoint, saved profile, or batch results directory")
    p.add_argument("--kind", choices=_kinds(), default="entropy",
                   help="what to draw (default: %(default)s)")
    p.add_argument("-o", "--output", metavar="FILE", required=True,
                   help="figure file; .png, .svg or .pdf picks the format")
    g = p.add_argument_group("figure options")
    for dest, (flags, kw) in FIGURE_FLAGS.items():
        g.add_argument(*flags, dest=dest, **kw)
    g.add_argument("--no-fit", action="store_true",
                   help="entropy: curves only, no central-charge fit or residual panel")
    add_flags(p, *FIT_FLAGS, *LAYOUT_FLAGS, *RUN_FLAGS, "renyi", "base", "charges", "modulus",
              "disentangle", "parity", "quiet")


def fit_choice(args):
    """The ``fit`` of the entropy figure and the report: False for --no-fit, the fit
    settings given, or True (the default fit)."""
    settings = fit_options(args)
    if args.no_fit and settings:
        raise UsageError("--no-fit with fit settings (" + ", ".join(
            "--" + k.replace("_", "-") for k in settings) + "): choose one")
    return False if args.no_fit else (settings or True)


def figure_options(args, draw):
    """The keywords of figure function ``draw`` that the command line sets."""
    import inspect

    takes = inspect.signature(draw).parameters
    opts = {"options": profile_options(args)}
    given = {dest: getattr(args, dest) for dest in FIGURE_FLAGS if getattr(args, dest) is not None}
    if args.renyi and "renyi" in takes:
        given["renyi"] = args.renyi
    fit = fit_choice(args)
    if fit is not True:
        given["fit"] = fit
    for dest, value in given.items():
        if dest not in takes:
            flag = "--no-fit or fit settings" if dest == "fit" else FIGURE_FLAGS[dest][0][0]
            raise UsageError(f"{flag} does not apply to --kind {args.kind}")
        opts[dest] = value
    return opts


def run(args):
    from .._figures._kinds import figure_function, plot
    from .._figures._names import visible

    plot(args.sources, args.kind, args.output,
         **figure_options(args, figure_function(args.kind)))
    print(f"{args.kind} figure written to {visible(args.output)}")
    return 0
