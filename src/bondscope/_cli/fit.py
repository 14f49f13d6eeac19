"""`bondscope fit`: central charge and scaling law of a profile."""

from ._common import (FIT_FLAGS, LAYOUT_FLAGS, RESOURCE_FLAGS, add_flags, fit_options, print_json,
                      read_input)

HELP = ("fit the Calabrese-Cardy form: central charge, constant and scaling law (one chain), "
        "or finite-entanglement scaling (unit cells at growing bond dimension)")
ORDER = 20


def add_arguments(p):
    p.add_argument("file", metavar="PROFILE_OR_CHECKPOINT", nargs="+",
                   help="saved profile (.json, .csv, .h5 results) or HDF5 checkpoint; several "
                        "unit cells of one model for finite-entanglement scaling")
    add_flags(p, *FIT_FLAGS)
    p.add_argument("--spectrum-report", action="store_true",
                   help="add entanglement gap and degeneracy pattern per cut (needs spectra)")
    p.add_argument("--degeneracy-tol", metavar="TOL", type=float, default=1e-6,
                   help="levels closer than TOL (nats) count as degenerate (default 1e-6)")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    add_flags(p, *LAYOUT_FLAGS, "route", "precision", "charges", "modulus", *RESOURCE_FLAGS)


def run(args):
    from .._analyses.scaling import fit_scaling
    from ._cellfit import is_cell_series, read_all, run_cells

    overrides = {"spectrum": True} if args.spectrum_report else {}
    profiles = read_all(args) if len(args.file) > 1 else [read_input(args.file[0], args,
                                                                     **overrides)]
    if is_cell_series(profiles):
        return run_cells(args, profiles)
    prof = profiles[0]
    res = fit_scaling(prof, **fit_options(args), local_dim=args.local_dim,
                      spectrum_report=args.spectrum_report, degeneracy_tol=args.degeneracy_tol)
    equipartition = _equipartition(prof, args)
    if args.json:
        print_json(res if equipartition is None else
                   {**res.to_dict(), "equipartition": equipartition.to_dict()})
        return 0
    a, b = res["window"]
    parts = res["error_parts"]
    print(f"central charge  {round(res['central_charge'], 4) + 0.0:.4f} +- "
          f"{res['central_charge_error']:.4f}  (fit {parts['fit']:.2g}, window "
          f"{parts['window']:.2g}, length {parts['length']:.2g})")
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
    if equipartition is not None:
        print(f"equipartition   {equipartition.verdict}: {equipartition.reason}")
    return 0


def _equipartition(prof, args):
    """The sector-entropy report when the profile carries charge sectors (else None)."""
    if not prof.cuts or "sectors" not in prof.cuts[0]:
        return None
    from .._analyses.equipartition import charge_equipartition

    return charge_equipartition(prof, window=args.window)
