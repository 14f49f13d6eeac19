"""`bondscope plot`: draw a figure of one or more profiles (PNG, SVG or PDF)."""

from ._common import UsageError, _renyi, add_layout_arguments, layout_options

HELP = "draw entropy, spectrum, budget, heatmap or convergence figures (PNG, SVG, PDF)"
ORDER = 40

KINDS = ("entropy", "spectrum", "budget", "heatmap", "convergence")
_SUFFIXES = (".png", ".svg", ".pdf")


def _targets(text):
    try:
        values = [float(t) for t in text.split(",") if t.strip()]
    except ValueError:
        raise UsageError(f"--targets {text!r}: expected comma-separated numbers, "
                         "e.g. 1e-4,1e-6,1e-8") from None
    bad = [v for v in values if not 0 < v < 1]
    if not values or bad:
        raise UsageError(f"--targets {text!r}: every target error must lie in (0, 1)")
    return values


def add_arguments(p):
    p.add_argument("sources", metavar="SOURCE", nargs="+",
                   help="checkpoint, saved profile, or batch results directory")
    p.add_argument("--kind", choices=KINDS, default="entropy",
                   help="what to draw (default: %(default)s)")
    p.add_argument("-o", "--output", metavar="FILE", required=True,
                   help="figure file; .png, .svg or .pdf picks the format")
    g = p.add_argument_group("figure options")
    g.add_argument("--boundary", choices=("open", "periodic"),
                   help="entropy: boundary condition for the central-charge fit "
                        "(default: the checkpoint's 'boundary' attribute, else open)")
    g.add_argument("--renyi", metavar="ALPHAS", type=_renyi, default=[],
                   help="entropy: also draw Renyi entropies of these orders, e.g. 2,inf")
    g.add_argument("--no-fit", action="store_true",
                   help="entropy: curves only, no central-charge fit or residual panel")
    g.add_argument("--targets", metavar="EPS", type=_targets, default=[1e-4, 1e-6, 1e-8],
                   help="budget: target errors, comma-separated (default: 1e-4,1e-6,1e-8)")
    g.add_argument("--split", choices=("cut", "equal", "pooled"), default="cut",
                   help="budget: each target is per cut (default), or bounds the whole state "
                        "spread equally or pooled over the cuts")
    g.add_argument("--against", choices=("weight", "bond"), default="weight",
                   help="convergence: x axis, discarded weight or 1/chi (default: weight)")
    g.add_argument("--title", help="figure title ('' for none)")
    g.add_argument("--quiet", action="store_true", help="no warnings")
    g.add_argument("--base", metavar="B", default="e",
                   help="checkpoints: logarithm base, e (nats, default) or 2 (bits)")
    add_layout_arguments(p)


def figure_options(args):
    """The figure function's keywords for the chosen kind."""
    opts = {"title": args.title, "base": args.base, **layout_options(args)}
    if args.kind == "entropy":
        opts.update(boundary=args.boundary, renyi=args.renyi, fit=not args.no_fit)
    elif args.kind == "budget":
        opts.update(targets=args.targets, split=args.split)
    elif args.kind == "convergence":
        opts.update(against=args.against)
    return opts


def run(args):
    from pathlib import Path

    if Path(args.output).suffix.lower() not in _SUFFIXES:
        raise UsageError(f"-o {args.output}: the figure name must end in .png, .svg or .pdf")
    from .._figure import plot
    from ._warnings import quiet_warnings

    with quiet_warnings(args.quiet):
        plot(args.sources, args.kind, args.output, **figure_options(args))
    print(f"{args.kind} figure written to {args.output}")
    return 0
