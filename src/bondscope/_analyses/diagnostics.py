"""Spectrum diagnostics: entanglement gap and degeneracy pattern at every cut."""

import math

import numpy as np

from .inputs import as_profile

__all__ = ["spectrum_diagnostics"]


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
