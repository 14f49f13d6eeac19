"""`bondscope compare`: convergence or time growth over profiles of one system."""

from ._common import LAYOUT_FLAGS, RESOURCE_FLAGS, add_flags, print_json, read_input

HELP = "compare profiles of one system: per-cut differences, convergence, extrapolation"
ORDER = 22


def add_arguments(p):
    p.add_argument("files", metavar="FILE", nargs="+",
                   help="two or more saved profiles or checkpoints of the same chain")
    p.add_argument("--tol", metavar="NATS", type=float, default=1e-3,
                   help="convergence threshold on the last per-cut change (default 1e-3 nats)")
    p.add_argument("--series", default="auto",
                   help="bond (runs at growing bond dimension), time (snapshots), or auto "
                        "(default: time when every document has a time field)")
    p.add_argument("--runs", metavar="K|NAMES", type=_runs,
                   help="bond series: extrapolate from the last K runs (smallest weights) or "
                        "the runs named, comma-separated (default: the last 3)")
    p.add_argument("--form", default="wlogw",
                   help="extrapolation S = S0 + a g(w): wlogw, g = w (1 + ln(1/w)) (default), "
                        "or linear, g = w")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    add_flags(p, *LAYOUT_FLAGS, "route", "precision", *RESOURCE_FLAGS)


def _runs(text):
    names = [t.strip() for t in text.split(",") if t.strip()]
    return int(names[0]) if len(names) == 1 and names[0].isdigit() else names


def run(args):
    from pathlib import Path

    from .._analyses.comparison import checkpoint_meta, compare_profiles

    profs = [read_input(f, args) for f in args.files]
    res = compare_profiles(profs, tol=args.tol, series=args.series,
                           names=[Path(f).name for f in args.files],
                           meta=[checkpoint_meta(f) for f in args.files], runs=args.runs,
                           form=args.form)
    if args.json:
        print_json(res)
        return 0
    big = res["largest_difference"]
    print(f"{res['series']} series of {len(res['runs'])} runs, {len(res['positions'])} cuts: "
          f"{', '.join(res['runs'])}")
    print(f"largest change {big['value']:+.4g} nats at cut {big['position']} "
          f"({big['runs'][0]} -> {big['runs'][1]})")
    print(f"last change {res['last_difference']:.4g} nats: {res['verdict']} "
          f"(threshold {res['tol']:g})")
    if res["series"] == "time":
        rate = res["middle_growth_rate"]
        print(f"middle cut {res['middle_position']}: growth rate "
              f"{'-' if rate is None else format(rate, '.4g')} nats per unit time "
              f"(times from {res['time_source']})")
    elif res["extrapolation"] is None:
        print(f"no extrapolation: {res['extrapolation_note']}")
    else:
        ext = res["extrapolation"]
        mid = len(ext["entropies"]) // 2
        print(f"extrapolated to zero discarded weight ({ext['form']}, runs "
              f"{', '.join(ext['runs'])}): S({res['positions'][mid]}) = "
              f"{ext['entropies'][mid]:.8g} +- {ext['errors'][mid]:.2g} nats "
              f"({ext['methods'][mid]})")
    return 0
