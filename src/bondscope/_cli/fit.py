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
                   help="levels closer than TOL (nats) plus the data's accuracy count as "
                        "degenerate (default 1e-6)")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    add_flags(p, *LAYOUT_FLAGS, "route", "precision", "charges", "modulus", *RESOURCE_FLAGS)


def run(args):
    import dataclasses

    from .._analyses.scaling import fit_scaling
    from ._cellfit import is_cell_series, read_all, run_cells
    from ._warnings import warn_lines

    # a checkpoint is profiled with its spectra: the finite-chi check needs the smallest values
    profiles = read_all(args) if len(args.file) > 1 else [read_input(args.file[0], args,
                                                                     spectrum=True)]
    if is_cell_series(profiles):
        return run_cells(args, profiles)
    prof = profiles[0]
    settings = fit_options(args)
    attribute = None if "boundary" in settings else _checkpoint_boundary(args.file[0], prof)
    res = fit_scaling(prof, **settings, **({"boundary": attribute} if attribute else {}),
                      local_dim=args.local_dim, spectrum_report=args.spectrum_report,
                      degeneracy_tol=args.degeneracy_tol)
    if attribute:
        res = dataclasses.replace(res, boundary_source="checkpoint attribute")
    equipartition = _equipartition(prof, args)
    warn_lines(res["flags"])
    if args.json:
        print_json(res if equipartition is None else
                   {**res.to_dict(), "equipartition": equipartition.to_dict()})
        return 0
    for line in text_lines(res):
        print(line)
    if equipartition is not None:
        print(f"equipartition   {equipartition.verdict}: {equipartition.reason}")
    return 0


def _checkpoint_boundary(path, prof):
    """The checkpoint's own ``boundary`` attribute when the profile has none (else None)."""
    from .._analyses.scaling import BOUNDARIES
    from .._document import is_saved_profile
    from .._runinfo import run_attributes

    if prof.get("boundary") is not None or is_saved_profile(path):
        return None
    found = run_attributes(path, ("boundary",)).get("boundary")
    return found if found in BOUNDARIES else None


def text_lines(res):
    """The fit as the verb prints it: c only for a logarithmic verdict."""
    a, b = res["window"]
    parts = res["error_parts"]
    lines = [f"scaling law     {res['law']}: {res['law_reason']}"]
    if res["law"] == "logarithmic":
        lines.append(
            f"central charge  {round(res['central_charge'], 4) + 0.0:.4f} +- "
            f"{res['central_charge_error']:.4f}  (fit {parts['fit']:.2g}, window "
            f"{parts['window']:.2g}, length {parts['length']:.2g}, saturation "
            f"{parts['saturation']:.2g}, marginal {parts['marginal']:.2g})")
    lines.append(f"constant        {res['constant']:.4f} nats")
    form = res["parity_form"]
    parity = "" if form is None else (
        " (alternation: SU(2) form)" if form == "su2" else
        f" (alternation exponent {res['parity_exponent']:.3g}, {form})")
    lines.append(f"boundary        {res['boundary']} ({res['boundary_source']}), window {a}:{b} "
                 f"({len(res['positions'])} cuts), corrections "
                 f"{', '.join(res['corrections']) or 'none'}{parity}")
    lines.append(f"rms residual    {res['rms_residual']:.3g} nats")
    ev = res["law_evidence"]
    if ev["page_ratio"] is not None:
        lines.append(f"middle cut      {ev['page_ratio']:.2f} of the Page value")
    if res.get("diagnostics") is not None:
        diag = res["diagnostics"]
        lines.append(f"spectrum        evenly degenerate at {len(diag['even_cuts'])} of "
                     f"{len(diag['cuts'])} cuts (tol {diag['tol']:g} + accuracy "
                     f"{diag['accuracy']:.2g} / lambda^2)")
        for c in diag["cuts"]:
            gap = "-" if c["entanglement_gap"] is None else f"{c['entanglement_gap']:.4g}"
            lines.append(f"  cut {c['position']:>4}  gap {gap:>10}  degeneracies "
                         f"{' '.join(map(str, c['degeneracies']))}")
    return lines


def _equipartition(prof, args):
    """The sector-entropy report when the profile carries charge sectors (else None)."""
    if not prof.cuts or "sectors" not in prof.cuts[0]:
        return None
    from .._analyses.equipartition import charge_equipartition

    return charge_equipartition(prof, window=args.window)
