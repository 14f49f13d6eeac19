"""`bondscope fit`: central charge and scaling law of a profile."""

from ._common import (UsageError, add_layout_arguments, add_measure_arguments, print_json,
                      read_input)

HELP = "fit the Calabrese-Cardy form: central charge, constant and scaling law"
ORDER = 20


def _corrections(text):
    names = [t.strip() for t in text.split(",") if t.strip()]
    if names == ["none"]:
        return ()
    for n in names:
        if n not in ("parity", "smooth"):
            raise UsageError(f"--corrections: {n!r} is not parity, smooth or none")
    return tuple(names)


def add_arguments(p):
    p.add_argument("file", metavar="PROFILE_OR_CHECKPOINT",
                   help="saved profile (.json, .csv, .h5 results) or HDF5 checkpoint")
    p.add_argument("--boundary", choices=("open", "periodic"), default="open",
                   help="chain with two ends (default) or ring")
    p.add_argument("--window", metavar="A:B",
                   help="cut positions to fit, inclusive (default: drop L//8 cuts at each end)")
    p.add_argument("--corrections", metavar="LIST", type=_corrections,
                   help="extra terms: parity, smooth, both (parity,smooth) or none "
                        "(default: both for open chains, none for rings)")
    p.add_argument("--parity-exponent", metavar="K", type=float, default=1.0,
                   help="decay exponent of the alternating term (default 1, free fermions)")
    p.add_argument("--spectrum-report", action="store_true",
                   help="add entanglement gap and degeneracy pattern per cut (needs spectra)")
    p.add_argument("--degeneracy-tol", metavar="TOL", type=float, default=1e-6,
                   help="levels closer than TOL (nats) count as degenerate (default 1e-6)")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    add_layout_arguments(p)
    add_measure_arguments(p)


def run(args):
    from .._scaling import fit_scaling, parse_window

    overrides = {"spectrum": True} if args.spectrum_report else {}
    prof = read_input(args.file, args, **overrides)
    try:
        window = parse_window(args.window, prof.sites)
    except ValueError as exc:
        raise UsageError(f"--window: {exc}") from None
    res = fit_scaling(prof, boundary=args.boundary, window=window, corrections=args.corrections,
                      parity_exponent=args.parity_exponent, local_dim=args.local_dim,
                      spectrum_report=args.spectrum_report, degeneracy_tol=args.degeneracy_tol)
    if args.json:
        print_json(res)
        return 0
    a, b = res["window"]
    parts = res["error_parts"]
    print(f"central charge  {round(res['central_charge'], 4) + 0.0:.4f} +- {res['central_charge_error']:.4f}"
          f"  (fit {parts['fit']:.2g}, window {parts['window']:.2g}, length {parts['length']:.2g})")
    print(f"constant        {res['constant']:.4f} nats")
    print(f"boundary        {res['boundary']}, window {a}:{b} ({len(res['positions'])} cuts), "
          f"corrections {', '.join(res['corrections']) or 'none'}")
    print(f"rms residual    {res['rms_residual']:.3g} nats")
    ev = res["law_evidence"]
    page = "" if ev["page_ratio"] is None else f", middle cut at {ev['page_ratio']:.2f} of Page"
    print(f"scaling law     {res['law']}{page}")
    if "diagnostics" in res:
        diag = res["diagnostics"]
        print(f"spectrum        evenly degenerate at {len(diag['even_cuts'])} of "
              f"{len(diag['cuts'])} cuts (tol {diag['tol']:g})")
        for c in diag["cuts"]:
            gap = "-" if c["entanglement_gap"] is None else f"{c['entanglement_gap']:.4g}"
            print(f"  cut {c['position']:>4}  gap {gap:>10}  degeneracies "
                  f"{' '.join(map(str, c['degeneracies']))}")
    return 0
