"""`bondscope fit` over a series of unit cells: finite-entanglement scaling."""

from ._common import print_json, read_input

__all__ = ["is_cell_series", "run_cells"]


def is_cell_series(profiles):
    """True when the fit is over unit cells (several inputs, or one unit-cell profile)."""
    return len(profiles) > 1 or profiles[0].kind == "unit-cell"


def read_all(args):
    return [read_input(f, args) for f in args.file]


def run_cells(args, profiles):
    from pathlib import Path

    from .._analyses.cellscaling import fit_cell_scaling

    res = fit_cell_scaling(profiles, names=[Path(f).name for f in args.file])
    if args.json:
        print_json(res)
        return 0
    print(f"finite-entanglement scaling over {len(res.points)} unit cells "
          f"(bond dimensions {', '.join(str(q['bond_dim']) for q in res.points)})")
    for q in res.points:
        print(f"  {q['name']:<28} chi {q['bond_dim']:>4}  S {q['entropy']:.6f} nats  "
              f"xi {q['correlation_length']:.6g}")
    if res.central_charge_error is None:
        err = "(no error estimate)"
    else:
        parts = ", ".join(f"{k} {v:.2g}" for k, v in res.error_parts.items() if v is not None)
        err = f"+- {res.central_charge_error:.4f}  ({parts})"
    print(f"central charge  {res.central_charge:.4f} {err}")
    print(f"constant        {res.constant:.4f} nats")
    kerr = "" if res.kappa_error is None else f" +- {res.kappa_error:.3f}"
    pred = "-" if res.kappa_predicted is None else f"{res.kappa_predicted:.3f}" + (
        "" if res.kappa_predicted_error is None else f" +- {res.kappa_predicted_error:.3f}")
    print(f"kappa           {res.kappa:.3f}{kerr} (xi ~ chi^kappa); predicted from c: {pred}")
    print(f"verdict         {res.verdict}: {res.reason}")
    return 0
