"""Spectrum diagnostics: entanglement gap and degeneracy pattern at every cut."""

import dataclasses
import math

import numpy as np

from .._results import Result
from .inputs import as_profile

__all__ = ["DEFAULT_ACCURACY", "SpectrumDiagnostics", "spectrum_diagnostics"]

# lambda^2 of iterative eigensolvers and truncated sweeps are rarely better than this
# (common practice: Lanczos tolerances ~1e-10 on the state)
DEFAULT_ACCURACY = 1e-10


@dataclasses.dataclass(frozen=True)
class SpectrumDiagnostics(Result):
    """Result of :func:`spectrum_diagnostics`; fields as its JSON keys."""

    cuts: list
    even_cuts: list
    all_even: bool
    tol: float
    levels: int
    weight_floor: float
    accuracy: float

    _shown = ("all_even", "tol", "accuracy", "weight_floor")

    def _summary(self):
        return (f"evenly degenerate at {len(self.even_cuts)} of {len(self.cuts)} cuts "
                f"(tol {self.tol:g}, accuracy {self.accuracy:.2g})")


def _groups(energies, tol, slack):
    """Split ascending energies into runs whose spread from the run's first is within
    ``tol`` plus ``slack`` times the weight ratio (an absolute error on lambda^2 of
    ``slack`` moves eps = -ln lambda^2 by slack / lambda^2)."""
    if not len(energies):
        return []
    bounds = [0]
    for i in range(1, len(energies)):
        if energies[i] - energies[bounds[-1]] > tol + 2.0 * slack * math.exp(energies[i]):
            bounds.append(i)
    bounds.append(len(energies))
    return [(bounds[k], bounds[k + 1]) for k in range(len(bounds) - 1)]


def _accuracy(prof, accuracy):
    """Absolute accuracy of the stored lambda^2: the one given, else the largest of
    DEFAULT_ACCURACY, the run's discarded weight and the cuts' squared floors."""
    if accuracy is not None:
        return float(accuracy)
    found = [DEFAULT_ACCURACY] + [float(c.get("resolution_floor", 0.0)) ** 2 for c in prof.cuts]
    w = prof.get("max_discarded_weight")
    if isinstance(w, (int, float)) and not isinstance(w, bool) and 0 <= w < 1:
        found.append(float(w))
    return max(found)


def _cut_diagnostics(cut, levels, tol, weight_floor, accuracy):
    values = np.asarray(cut["schmidt_values"], dtype=float)
    floor = max(float(cut.get("resolution_floor", 0.0)), math.sqrt(weight_floor))
    kept = values[values > floor]
    if not len(kept):
        raise ValueError(f"cut at position {cut['position']}: no Schmidt value above the "
                         f"floor {floor:.3g} (largest {values.max(initial=0.0):.3g})")
    energies = -2.0 * np.log(np.sort(kept)[::-1])
    groups = _groups(energies, tol, accuracy)
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


def spectrum_diagnostics(source, *, levels=4, tol=1e-6, weight_floor=None, accuracy=None):
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
        the level's lowest by at most `tol` (nats) plus 2 accuracy / lambda^2,
        the change of eps = -ln lambda^2 that an error `accuracy` on lambda^2
        makes.  None: 1e-6.
    weight_floor : float, optional
        Weights lambda^2 below this (or Schmidt values below the cut's
        ``resolution_floor``) are left out as unresolved; default 10 x
        `accuracy`.
    accuracy : float, optional
        Absolute accuracy of the stored lambda^2.  Default: the largest of
        1e-10 (an iterative eigensolver's usual accuracy), the run's
        ``max_discarded_weight`` and the cuts' squared ``resolution_floor``.

    Returns
    -------
    SpectrumDiagnostics
        ``cuts``: per cut ``position``, ``entanglement_gap`` (eps_1 - eps_0,
        None for a rank-1 cut), ``levels`` and ``degeneracies`` (the lowest
        `levels` distinct levels and their multiplicities),
        ``resolved_values`` and ``even_degeneracy`` (every resolved level is
        evenly degenerate); top level ``even_cuts`` (positions flagged),
        ``all_even`` and the settings ``tol``, ``levels``, ``weight_floor``,
        ``accuracy``.

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
    Oshikawa, PRB 81, 064439 (2010)).  The converse does not hold: even
    multiplets also come from a broken symmetry or a cat state (a GHZ
    state of even local dimension d has d equal values at every cut), so
    ``even_degeneracy`` is necessary for such a phase, not sufficient; it
    says nothing about a state without the protecting symmetry.  A stored
    top-K spectrum that ends inside a degenerate group has that last group
    left out of the check.

    References
    ----------
    .. [1] H. Li and F. D. M. Haldane, PRL 101, 010504 (2008).
    .. [2] F. Pollmann, A. M. Turner, E. Berg, M. Oshikawa, PRB 81, 064439 (2010).
    """
    if not (isinstance(levels, (int, np.integer)) and levels >= 1):
        raise ValueError(f"levels must be a positive integer, found {levels!r}")
    tol = 1e-6 if tol is None else tol
    if not tol >= 0:
        raise ValueError(f"tol (--degeneracy-tol) must be >= 0, found {tol!r}")
    if accuracy is not None and not 0 <= accuracy < 1:
        raise ValueError(f"accuracy must be in [0, 1), found {accuracy!r}")
    prof = as_profile(source, spectra=True)
    accuracy = _accuracy(prof, accuracy)
    weight_floor = min(10.0 * accuracy, 0.5) if weight_floor is None else weight_floor
    if not 0 <= weight_floor < 1:
        raise ValueError(f"weight_floor must be in [0, 1), found {weight_floor!r}")
    cuts = [_cut_diagnostics(c, int(levels), float(tol), float(weight_floor), accuracy)
            for c in prof.cuts]
    even = [c["position"] for c in cuts if c["even_degeneracy"]]
    return SpectrumDiagnostics(cuts=cuts, even_cuts=even,
                               all_even=bool(cuts) and len(even) == len(cuts), tol=float(tol),
                               levels=int(levels), weight_floor=float(weight_floor),
                               accuracy=accuracy)
