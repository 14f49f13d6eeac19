"""Finite-entanglement scaling: central charge from unit cells at growing bond dimension.

At a critical point an infinite-chain state of bond dimension chi has a
finite correlation length xi(chi) ~ chi^kappa, and its half-chain entropy
follows S = (c/6) ln xi + s0.  A series of unit-cell profiles of one model
gives c from the first law and kappa from the second; kappa is predicted
from c alone as 6 / (c (sqrt(12/c) + 1)).
"""

import dataclasses
import math

import numpy as np

from .._results import Result
from .inputs import as_profile, nats_per_unit
from .lines import fit_line
from .scaling import AREA_C

__all__ = ["fit_cell_scaling", "CellScaling", "predicted_kappa"]


def predicted_kappa(c):
    """kappa = 6 / (c (sqrt(12/c) + 1)) (Pollmann, Mukerjee, Turner, Moore, PRL 102, 255701 (2009)).

    Examples
    --------
    >>> round(predicted_kappa(1.0), 4)
    1.3441
    """
    return 6.0 / (c * (math.sqrt(12.0 / c) + 1.0))


@dataclasses.dataclass(frozen=True)
class CellScaling(Result):
    """Result of :func:`fit_cell_scaling` (JSON keys as the field names)."""

    verdict: str
    reason: str
    central_charge: object
    central_charge_error: object
    error_parts: dict
    constant: object
    kappa: object
    kappa_error: object
    kappa_predicted: object
    kappa_predicted_error: object
    units: str
    points: list

    _shown = ("verdict", "central_charge", "central_charge_error", "kappa", "kappa_predicted")

    def _summary(self):
        if self.central_charge is None:
            return f"{self.verdict}: {self.reason}"
        err = "?" if self.central_charge_error is None else f"{self.central_charge_error:.3g}"
        return f"{self.verdict}: c = {self.central_charge:.4f} +- {err}"


def _point(prof, name):
    if prof.kind != "unit-cell":
        raise ValueError(f"{name}: a {prof.kind} profile; finite-entanglement scaling needs "
                         "unit-cell profiles (infinite chains); fit a finite chain with one file")
    xi = prof.get("correlation_length")
    if xi is None or not math.isfinite(xi) or xi <= 0:
        raise ValueError(f"{name}: correlation length {xi!r}; the fit needs a finite, positive "
                         "one (a product state or a non-injective cell cannot be fitted)")
    s = prof.entropies * nats_per_unit(prof)
    floors = [c.get("resolution_floor", 0.0) for c in prof.cuts]
    return {"name": name, "bond_dim": int(prof.bond_dimensions.max()),
            "entropy": float(s.mean()), "entropy_spread": float((s.max() - s.min()) / 2),
            "correlation_length": float(xi),
            "correlation_length_error": float(prof.get("correlation_length_error") or 0.0),
            "resolution_floor": float(max(floors))}


def fit_cell_scaling(sources, *, names=None, options=None):
    """Central charge and kappa from unit cells of one model at growing bond dimension.

    Parameters
    ----------
    sources : sequence of Profile, dict or path
        Unit-cell profiles (or checkpoints, profiled with ``options``), at
        least two, at different bond dimensions.
    names : sequence of str, optional
        Names of the runs for the result (default: their sources).
    options : ProfileOptions, optional
        How checkpoints are profiled.

    Returns
    -------
    CellScaling
        ``central_charge`` with ``central_charge_error`` (quadrature sum of
        ``error_parts``: ``fit``, the least-squares standard error;
        ``smallest_dropped``, the change of c without the smallest bond
        dimension; ``bonds``, the change of c when every run's entropy is
        moved by half the spread of its cell's bond entropies),
        ``constant`` s0 (nats), ``kappa`` from ln xi = kappa ln chi + b,
        ``kappa_predicted`` from c (for c >= 0.25), ``points`` per run, and
        ``verdict``: "critical" (xi grows with chi, kappa and c more than
        three error bars above 0), "gapped" (c + its error below 0.25, half
        the smallest unitary central charge, as in :func:`fit_scaling`: the
        entropy saturates while xi may still creep up), or "inconclusive"
        (with ``reason``).  Quantities that cannot
        be estimated are None, never zero.

    Raises
    ------
    ValueError
        Fewer than two runs, or a profile that is not a unit cell or has no
        finite correlation length.

    Notes
    -----
    Two least-squares lines over n runs, O(n).  Points are ordered by
    stored bond dimension (runs that stopped growing, as gapped states do
    under a weight cutoff, may share one).  With two runs c has no error estimate (None) and the
    verdict is at best "inconclusive".

    References
    ----------
    .. [1] P. Calabrese and J. Cardy, J. Stat. Mech. P06002 (2004): S = (c/6) ln xi.
    .. [2] L. Tagliacozzo, T. R. de Oliveira, S. Iblisdir, J. I. Latorre, PRB 78,
           024410 (2008): xi ~ chi^kappa.
    .. [3] F. Pollmann, S. Mukerjee, A. M. Turner, J. E. Moore, PRL 102, 255701
           (2009): kappa = 6 / (c (sqrt(12/c) + 1)).

    Examples
    --------
    >>> import numpy as np, bondscope, warnings
    >>> rng = np.random.default_rng(0)
    >>> cells = [[rng.standard_normal((chi, 2, chi))] for chi in (2, 3, 4)]
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
    ...     res = bondscope.fit_cell_scaling([bondscope.profile(c) for c in cells])
    >>> res.verdict, len(res.points)   # random cells are no critical series
    ('inconclusive', 3)
    """
    if isinstance(sources, (str, dict)) or not hasattr(sources, "__len__"):
        sources = [sources]
    if len(sources) < 2:
        raise ValueError(f"finite-entanglement scaling needs at least 2 unit cells at different "
                         f"bond dimensions, found {len(sources)}")
    profs = [as_profile(s, options=options) for s in sources]
    names = list(names) if names is not None else [p.source or f"run {i}"
                                                   for i, p in enumerate(profs)]
    points = sorted((_point(p, n) for p, n in zip(profs, names)),
                    key=lambda q: (q["bond_dim"], q["correlation_length"]))
    chis = [q["bond_dim"] for q in points]
    S = np.array([q["entropy"] for q in points])
    spread = np.array([q["entropy_spread"] for q in points])
    log_xi = np.log([q["correlation_length"] for q in points])
    log_chi = np.log(chis)
    slope, s0, slope_err = fit_line(log_xi, S)[:3]
    c = 6.0 * slope
    parts = {"fit": None if slope_err is None else 6.0 * slope_err}
    if len(points) >= 3:
        parts["smallest_dropped"] = abs(6.0 * fit_line(log_xi[1:], S[1:]).slope - c)
    parts["bonds"] = max(abs(6.0 * fit_line(log_xi, S + sign * spread).slope - c)
                         for sign in (-1, 1))
    known = [v for v in parts.values() if v is not None]
    c_err = math.sqrt(sum(v * v for v in known)) if len(points) >= 3 else None
    kappa, _, kappa_err = fit_line(log_chi, log_xi)[:3]
    kp = kp_err = None
    if c >= AREA_C:
        kp = predicted_kappa(c)
        if c_err is not None:
            step = 1e-6 * c
            kp_err = abs(predicted_kappa(c + step) - predicted_kappa(c - step)) / (2 * step) * c_err
    if c_err is None:
        verdict, reason = "inconclusive", "two runs give c without an error estimate; add a third"
    elif c + c_err < AREA_C:
        verdict, reason = "gapped", (f"S stops growing with ln xi (slope c = {c:.3g} +- "
                                     f"{c_err:.2g}, below {AREA_C}): the entropy saturates")
    elif kappa_err is not None and kappa > 3 * kappa_err and c > 3 * c_err:
        verdict, reason = "critical", (f"xi grows as chi^{kappa:.3g} over chi {chis[0]}.."
                                       f"{chis[-1]}")
    else:
        verdict, reason = "inconclusive", (f"xi or S does not grow clearly with chi (kappa "
                                           f"{kappa:.3g}, c {c:.3g} +- {c_err:.2g})")
    return CellScaling(verdict, reason, c, c_err, parts, s0, kappa, kappa_err, kp, kp_err,
                       "nats", points)
