"""`bondscope budget`: the bond dimensions an error target needs, and their cost."""

from ._common import LAYOUT_FLAGS, RESOURCE_FLAGS, add_flags, print_json, read_input

HELP = "smallest bond dimension per cut for a discarded-weight target, and its cost"
ORDER = 21


def add_arguments(p):
    p.add_argument("file", metavar="CHECKPOINT_OR_PROFILE",
                   help="HDF5 checkpoint, or a saved profile with Schmidt values")
    g = p.add_mutually_exclusive_group(required=True)
    g.add_argument("--target", metavar="EPS", type=float,
                   help="discarded weight allowed at each cut")
    g.add_argument("--total", metavar="EPS", type=float,
                   help="sum of discarded weights allowed over all cuts (infidelity bound)")
    p.add_argument("--split", default="equal",
                   help="with --total: equal share per cut (default) or pooled smallest weights")
    p.add_argument("--dtype", metavar="DTYPE",
                   help="element type for the memory estimate (default: the stored dtype)")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    add_flags(p, *LAYOUT_FLAGS, "route", "precision", *RESOURCE_FLAGS)


def _budget(prof, args):
    from .._analyses.budget import bond_budget

    return bond_budget(prof, target=args.target, total=args.total, split=args.split,
                       dtype=args.dtype, local_dim=args.local_dim)


def run(args):
    import warnings

    from .._analyses.budget import ResolutionError
    from .._document import is_saved_profile
    from .._estimate import format_bytes

    prof = read_input(args.file, args, spectrum=True)
    try:
        res = _budget(prof, args)
    except ResolutionError as exc:
        # a state vector profiled on the gram route: its floor hides the target; use svd
        if is_saved_profile(args.file) or prof.get("route") != "gram":
            raise
        warnings.warn(f"{exc}; switching to the accurate (svd) route")
        res = _budget(read_input(args.file, args, spectrum=True, route="svd"), args)
    if args.json:
        print_json(res)
        return 0
    goal = (f"target {res['target']:g} per cut" if res["target"] is not None
            else f"total {res['total']:g} ({res['split']} split)")
    print(f"{goal}: max bond dimension {res['max_bond_dimension']}, discarded weight sum "
          f"<= {res['discarded_weight_sum']:.3g}")
    print(f"Schmidt values counted above each cut's resolution floor (largest "
          f"{res['resolution_floor']:.2g}, {res['route'] or 'unknown'} route); weights are "
          "upper bounds including what the floor can hide")
    print(f"{'cut':>5} {'chi':>6} {'now':>6} {'discarded':>11}")
    for c in res["cuts"]:
        print(f"{c['position']:>5} {c['bond_dimension']:>6} {c['current_bond_dimension']:>6} "
              f"{'<=' if c['unresolved_bound'] > 0 else '  '}{c['discarded_weight']:>9.3g}")
    if res["memory_bytes"] is None:
        print("cost: unknown without local dimensions (give --local-dim)")
    else:
        print(f"memory {format_bytes(res['memory_bytes'])} ({res['dtype']}), "
              f"{res['memory_ratio']:.3g} x current; sweep cost {res['sweep_cost_ratio']:.3g} x "
              "current")
    return 0
