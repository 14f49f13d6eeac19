"""`bondscope demo`: profile the bundled demo checkpoint."""

HELP = "profile the bundled demo checkpoint and print its per-cut table"
ORDER = 2


def add_arguments(p):
    p.add_argument("-o", "--output", metavar="OUT", default="bondscope-profiles/demo.json",
                   help="where to save the profile (default: %(default)s)")


def demo_checkpoint():
    """Path of the demo checkpoint: packaged with the wheel, or data/ in a source tree."""
    from importlib import resources
    from pathlib import Path

    packaged = resources.files("bondscope").joinpath("_data/demo.h5")
    if packaged.is_file():
        return Path(str(packaged))
    tree = Path(__file__).resolve().parents[3] / "data" / "demo.h5"
    if tree.is_file():
        return tree
    raise OSError("the demo checkpoint is missing from this installation; reinstall "
                  "bondscope or run scripts/make_data.py in a source tree")


def run(args):
    import h5py

    from .._pipeline import profile
    from .._analyses.scaling import fit_scaling
    from .._text import profile_table
    from ._warnings import quiet_warnings

    path = demo_checkpoint()
    with h5py.File(path, "r") as f:
        about = [str(f.attrs[k]) for k in ("lab", "run_id", "description") if k in f.attrs]
    if about:
        print("demo checkpoint: " + "; ".join(about))
    with quiet_warnings():
        prof = profile(path, renyi=["2", "inf"], spectrum=8, bond_dim=16, progress=True)
    prof.save(args.output, protect=[path])
    print(profile_table(prof))
    fit = fit_scaling(prof, boundary="open")
    c = (f"central charge c = {fit.central_charge:.4f} +- {fit.central_charge_error:.4f}"
         if fit.law == "logarithmic" else fit.law_reason)
    print(f"scaling law {fit.law}: {c} (open-chain fit over cuts "
          f"{fit.window[0]}..{fit.window[1]})")
    print(f"profile written to {args.output}")
    return 0
