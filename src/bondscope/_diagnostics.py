"""Spectrum diagnostics: entanglement gap and degeneracy pattern at every cut.

Also holds `as_profile`, the one place where the analyses (scaling fit,
bond budget, comparison, diagnostics) turn their input -- a Profile, a
document dict, a saved profile or a checkpoint path -- into a Profile.
"""

import math
import os
from pathlib import Path

import numpy as np

from ._document import Profile, is_saved_profile, load_profile

__all__ = ["spectrum_diagnostics", "as_profile", "require_spectra", "nats_per_unit"]


def as_profile(source, *, spectra=False):
    """A Profile from a Profile, a document dict, a saved profile or a checkpoint.

    Parameters
    ----------
    source : Profile, dict, str or os.PathLike
        A saved profile (.json, .csv, or an .h5 results file) is read as it
        is; any other path is profiled as a checkpoint.
    spectra : bool
        Profile a checkpoint with all Schmidt values, and require them in
        the result.

    Raises
    ------
    TypeError
        `source` is none of the accepted types.
    ValueError
        `spectra` is asked for and the document has none.
    """
    if isinstance(source, Profile):
        prof = source
    elif isinstance(source, dict):
        prof = Profile.from_dict(source)
    elif isinstance(source, (str, os.PathLike)):
        path = Path(source)
        if is_saved_profile(path):
            prof = load_profile(path)
        else:
            from ._pipeline import profile

            prof = profile(path, spectrum=True if spectra else None)
    else:
        raise TypeError("expected a Profile, a profile document (dict) or a path, found "
                        f"{type(source).__name__}")
    if spectra:
        require_spectra(prof)
    return prof


def require_spectra(prof):
    """Raise ValueError when a profile lacks Schmidt values at some cut."""
    if prof.has_spectra:
        return
    missing = [c["position"] for c in prof.cuts if "schmidt_values" not in c]
    where = prof.source or "profile"
    raise ValueError(f"{where}: no Schmidt values stored (cuts[].schmidt_values missing at "
                     f"{len(missing)} of {len(prof.cuts)} cuts, first at position "
                     f"{missing[0] if missing else '-'}); rerun `bondscope profile --spectrum` "
                     "or pass the checkpoint itself")


def nats_per_unit(prof):
    """Factor converting the profile's entropies to nats: ln(log_base)."""
    return math.log(prof.log_base)


def _groups(energies, tol):
    """Split ascending energies into runs whose spread from the run's first is <= tol."""
    if not len(energies):
        return []
    bounds = [0]
    for i in range(1, len(energies)):
        if energies[i] - energies[bounds[-1]] > tol:
            bounds.append(i)
    bounds.append(len(energies))
    return [(bounds[k], bounds[k + 1]) for k in range(len(bounds) - 1)]


def _cut_diagnostics(cut, levels, tol, weight_floor):
    values = np.asarray(cut["schmidt_values"], dtype=float)
    floor = max(float(cut.get("resolution_floor", 0.0)), math.sqrt(weight_floor))
    kept = values[values > floor]
    if not len(kept):
        raise ValueError(f"cut at position {cut['position']}: no Schmidt value above the "
                         f"floor {floor:.3g} (largest {values.max(initial=0.0):.3g})")
    energies = -2.0 * np.log(np.sort(kept)[::-1])
    groups = _groups(energies, tol)
    # a top-K list may cut a degenerate group short: leave the last group out of the check
    truncated = len(values) < int(cut.get("schmidt_rank", len(values)))
    complete = groups[:-1] if truncated and len(kept) == len(values) else groups
    mults = [b - a for a, b in groups]
    return {
        "position": cut["position"],
        "entanglement_gap": float(energies[1] - energies[0]) if len(energies) > 1 else None,
        "levels": [float(energies[a:b].mean()) for a, b in groups[:levels]],
        "degeneracies": mults[:levels],
        "resolved_values": int(len(kept)),
        "even_degeneracy": bool(complete) and all((b - a) % 2 == 0 for a, b in complete),
    }


def spectrum_diagnostics(source, *, levels=4, tol=1e-6, weight_floor=1e-12):
    """Entanglement gap and degeneracy pattern of the spectrum at every cut.

    The entanglement energies of a cut are eps_i = -ln(lambda_i^2) for its
    Schmidt values lambda_i (Li & Haldane, PRL 101, 010504 (2008)).

    Parameters
    ----------
    source : Profile, dict or path
        A profile with ``cuts[].schmidt_values``, or a checkpoint (profiled
        with all spectra).
    levels : int
        Number of lowest distinct levels to report per cut.
    tol : float
        Two energies belong to one degenerate level when they differ from
        the level's lowest by at most `tol` (absolute, in nats).
    weight_floor : float
        Weights lambda^2 below this (or Schmidt values below the cut's
        ``resolution_floor``) are left out as unresolved.

    Returns
    -------
    dict
        ``cuts``: per cut ``position``, ``entanglement_gap`` (eps_1 - eps_0,
        None for a rank-1 cut), ``levels`` and ``degeneracies`` (the lowest
        `levels` distinct levels and their multiplicities),
        ``resolved_values`` and ``even_degeneracy`` (every resolved level is
        evenly degenerate); top level ``even_cuts`` (positions flagged),
        ``all_even`` and the settings ``tol``, ``levels``, ``weight_floor``.

    Raises
    ------
    ValueError
        No spectra, or a bad setting.

    Notes
    -----
    Cost O(sum of the stored spectrum lengths), after sorting each.
    A spectrum that is evenly degenerate at every cut is the mark of a
    symmetry-protected phase such as the Haldane phase: there the
    protecting symmetry acts projectively on the Schmidt states, which
    forces every level to an even multiplicity (Pollmann, Turner, Berg,
    Oshikawa, PRB 81, 064439 (2010)).  A stored top-K spectrum that ends
    inside a degenerate group has that last group left out of the check.

    References
    ----------
    .. [1] H. Li and F. D. M. Haldane, PRL 101, 010504 (2008).
    .. [2] F. Pollmann, A. M. Turner, E. Berg, M. Oshikawa, PRB 81, 064439 (2010).
    """
    if not (isinstance(levels, (int, np.integer)) and levels >= 1):
        raise ValueError(f"levels must be a positive integer, found {levels!r}")
    if not tol >= 0:
        raise ValueError(f"tol must be >= 0, found {tol!r}")
    if not 0 <= weight_floor < 1:
        raise ValueError(f"weight_floor must be in [0, 1), found {weight_floor!r}")
    prof = as_profile(source, spectra=True)
    cuts = [_cut_diagnostics(c, int(levels), float(tol), float(weight_floor))
            for c in prof.cuts]
    even = [c["position"] for c in cuts if c["even_degeneracy"]]
    return {"cuts": cuts, "even_cuts": even, "all_even": bool(cuts) and len(even) == len(cuts),
            "tol": float(tol), "levels": int(levels), "weight_floor": float(weight_floor)}
