"""Scaling fit: central charge from the Calabrese-Cardy form, and the scaling law."""

import dataclasses
import math

import numpy as np

from .._results import ABSENT, Result
from .diagnostics import spectrum_diagnostics
from .inputs import as_profile, nats_per_unit
from .models import choose_alternation, fit_model
from .saturation import finite_chi
from .verdict import AREA_C, PAGE_FRACTION, decide_law

__all__ = ["fit_scaling", "ScalingFit", "parse_window", "page_entropy", "resolve_boundary",
           "BOUNDARIES", "CORRECTIONS", "AREA_C", "PAGE_FRACTION"]

BOUNDARIES = ("open", "periodic")
CORRECTIONS = ("parity", "smooth")
# a finite-chi bias moving c by more than this makes the verdict inconclusive (our choice:
# a tenth of the gap between the two smallest unitary central charges, 1/2 and 7/10)
SATURATED_C = 0.02
# a fitted alternation exponent this close to 1/2 marks an SU(2)-like chain (K = 1/2 at the
# isotropic point, Laflorencie et al. (2006)), whose marginal operator's corrections enter c
SU2_EXPONENT = 0.25
# entropies are trusted to no better than this (nats; our choice, ~1e6 float64 eps)
NOISE_MIN = 1e-10
# above this ln(dA dB) the digamma difference is replaced by Page's asymptotic form
_PAGE_ASYMPTOTIC = 600.0


def page_entropy(log_dA, log_dB):
    """Mean entropy (nats) of the smaller part of a Haar-random state on C^dA x C^dB.

    Parameters
    ----------
    log_dA, log_dB : float
        Natural logarithms of the two dimensions (so 2^500 is no overflow).

    Returns
    -------
    float
        psi(mn + 1) - psi(n + 1) - (m - 1) / (2n) with m = min, n = max,
        psi the digamma function; for ln(mn) > 600, ln m - m / (2n).

    References
    ----------
    .. [1] D. N. Page, PRL 71, 1291 (1993), eqs. (2) and (5).
    """
    from scipy.special import digamma

    log_m, log_n = sorted((float(log_dA), float(log_dB)))
    ratio = math.exp(log_m - log_n)
    if log_m + log_n > _PAGE_ASYMPTOTIC:
        return log_m - ratio / 2.0
    m, n = math.exp(log_m), math.exp(log_n)
    return float(digamma(m * n + 1.0) - digamma(n + 1.0)) - (m - 1.0) / (2.0 * n)


def parse_window(window, sites):
    """A window ``"A:B"``, ``(A, B)`` or None as an inclusive (A, B) of cut positions.

    Either end may be empty (``"A:"``, ``":B"``) or None for the chain end.

    Raises
    ------
    ValueError
        Not of the form A:B, not integers, or not 1 <= A <= B <= sites - 1.
    """
    if window is None:
        return None
    if isinstance(window, str):
        parts = window.split(":")
        if len(parts) != 2:
            raise ValueError(f"window (--window) {window!r} is not of the form A:B")
        try:
            window = tuple(int(p) if p.strip() else None for p in parts)
        except ValueError:
            raise ValueError(f"window (--window) {window!r}: A and B must be integers") from None
    try:
        a, b = window
    except (TypeError, ValueError):
        raise ValueError(f"window (--window) {window!r} is not a pair (A, B)") from None
    a = 1 if a is None else a
    b = sites - 1 if b is None else b
    if not all(isinstance(v, (int, np.integer)) for v in (a, b)):
        raise ValueError(f"window (--window) ({a!r}, {b!r}): A and B must be integers")
    if not 1 <= a <= b <= sites - 1:
        raise ValueError(f"window (--window) {a}:{b} is not within 1..{sites - 1} with A <= B")
    return int(a), int(b)


def resolve_boundary(boundary, prof):
    """The boundary a fit uses and where it came from: the one given, else the profile's
    ``boundary`` field (or its batch record's checkpoint attribute), else "open".

    Raises
    ------
    ValueError
        A given boundary other than "open" or "periodic".
    """
    if boundary is not None:
        if boundary not in BOUNDARIES:
            raise ValueError(f"boundary (--boundary) must be one of {', '.join(BOUNDARIES)}, "
                             f"found {boundary!r}")
        return boundary, "given"
    if prof.get("boundary") in BOUNDARIES:
        return prof["boundary"], "profile field"
    record = prof.get("batch")
    attrs = record.get("attrs") if isinstance(record, dict) else None
    if isinstance(attrs, dict) and attrs.get("boundary") in BOUNDARIES:
        return attrs["boundary"], "checkpoint attribute"
    return "open", "default"


def _alternatives(a, b, default_margin, sites):
    t = max(1, (b - a) // 8)
    wins = [(a + t, b - t), (a + t, b), (a, b - t)]
    if default_margin is not None:
        m = max(1, default_margin // 2)
        wins.append((m, sites - m))
    return [w for w in dict.fromkeys(wins) if w[0] <= w[1] and w != (a, b)]


def _noise(prof, positions):
    """The entropies' accuracy in nats: NOISE_MIN, or the unresolved weight's entropy."""
    from .saturation import entropy_bias

    by_pos = {c["position"]: c for c in prof.cuts}
    worst = NOISE_MIN
    for p in positions:
        cut = by_pos[int(p)]
        floor = float(cut.get("resolution_floor", 0.0))
        rank = int(cut.get("bond_dimension") or cut.get("schmidt_rank") or 1)
        worst = max(worst, entropy_bias(min(1.0, rank * floor ** 2)) / 2.0)
    return worst


def _parity_setting(parity_exponent):
    """(form, exponent) of the alternating term; form None: chosen from the data."""
    if parity_exponent is None or parity_exponent == "auto":
        return None, None
    if parity_exponent == "su2":
        return "su2", 0.5
    if isinstance(parity_exponent, str) or not parity_exponent > 0:
        raise ValueError(f"parity_exponent (--parity-exponent) must be a number > 0, 'auto' "
                         f"or 'su2', found {parity_exponent!r}")
    return "fixed", float(parity_exponent)


def _corrections(corrections, boundary):
    if corrections is None:
        corrections = CORRECTIONS if boundary == "open" else ()
    elif isinstance(corrections, str):
        corrections = (corrections,)
    corrections = tuple(dict.fromkeys(corrections))
    unknown = [c for c in corrections if c not in CORRECTIONS]
    if unknown:
        raise ValueError(f"unknown correction {unknown[0]!r} (corrections=, --corrections); "
                         f"choose from {', '.join(CORRECTIONS)} or none")
    return corrections


@dataclasses.dataclass(frozen=True)
class ScalingFit(Result):
    """Result of :func:`fit_scaling`; fields as its JSON keys (docs/analysis.md)."""

    boundary: str
    boundary_source: str
    sites: int
    window: list
    corrections: list
    parity_exponent: float
    parity_form: str
    central_charge: float
    central_charge_error: float
    error_parts: dict
    constant: float
    amplitudes: dict
    units: str
    positions: list
    residuals: list
    rms_residual: float
    law: str
    law_reason: str
    law_evidence: dict
    flags: list
    saturation: dict
    diagnostics: object = ABSENT

    _shown = ("law", "central_charge", "central_charge_error", "boundary", "window",
              "parity_form", "law_reason")

    def _summary(self):
        if self.law == "logarithmic":
            return (f"logarithmic, c = {self.central_charge:.4g} +- "
                    f"{self.central_charge_error:.2g} ({self.boundary})")
        return f"{self.law}: {self.law_reason}"


def fit_scaling(source, *, boundary=None, window=None, corrections=None, parity_exponent=None,
                local_dim=None, spectrum_report=False, degeneracy_tol=None):
    """Fit the Calabrese-Cardy form to a profile: central charge, constant, scaling law.

    The model, in nats, for a cut after l of L sites::

        open:      S(l) = (c/6) ln x + s0 [+ b A(l, x)] [+ f / x],  x = (2L/pi) sin(pi l/L)
        periodic:  S(l) = (c/3) ln x + s0 [+ ...],                   x = (L/pi) sin(pi l/L)

    with the alternating term A = (-1)^l / x^K, or (-1)^l sqrt(ln x) / x^(1/2)
    for SU(2) chains.

    Parameters
    ----------
    source : Profile, dict or path
        The profile (or a checkpoint, profiled with default options).
    boundary : {"open", "periodic"}, optional
        Chain with two ends, or ring.  Default: the profile's ``boundary``
        field (or its batch record's checkpoint attribute), else "open";
        ``boundary_source`` in the result says which.
    window : str or (int, int), optional
        Inclusive range ``"A:B"`` of cut positions to fit.  Default: drop
        ``m = max(1, L // 8)`` cuts at each end (the boundary region), i.e.
        ``m:L-m``.
    corrections : sequence of {"parity", "smooth"}, optional
        Extra terms: "parity", the alternating b A(l, x); "smooth", a term
        f / x.  Default: both for open chains, none for rings.
    parity_exponent : float, "su2" or "auto", optional
        The alternating term's form: a number K for (-1)^l / x^K (1 for free
        fermions); "su2" for the SU(2) form; None or "auto" (default) to
        choose by AICc among K = 1, K fitted, and the SU(2) form.
    local_dim : int or sequence of int, optional
        Local dimensions for the Page comparison when the document has no
        ``local_dims``.
    spectrum_report : bool
        Add ``diagnostics`` (see `spectrum_diagnostics`); needs spectra.
    degeneracy_tol : float, optional
        Tolerance of the spectrum report (default: from the data's accuracy).

    Returns
    -------
    ScalingFit
        ``central_charge``, ``central_charge_error`` (its parts in
        ``error_parts``), ``constant`` (s0, nats), ``amplitudes`` of the
        corrections, ``parity_form`` and ``parity_exponent`` used,
        ``boundary`` and ``boundary_source``, ``window``, ``positions``,
        ``residuals`` (nats), ``rms_residual``, ``law`` ("area",
        "logarithmic", "volume" or "inconclusive") with ``law_reason`` and
        ``law_evidence``, ``flags`` (warnings such as an unphysical c) and
        ``saturation`` (cuts at the run's bond dimension); see
        docs/analysis.md.

    Raises
    ------
    ValueError
        Unknown boundary or correction, a bad window, or too few cuts.

    Notes
    -----
    Linear least squares, O(n p^2) for n cuts and p <= 4 parameters, run
    once per window (and about 30 times to fit the exponent).
    ``central_charge_error`` is the quadrature sum of four parts: the
    fit's standard error; the largest change of c over the windows
    trimmed by an eighth at the left, right or both ends (and, for the
    default window, the one with half the margin); for open chains the
    change of c when the chord is taken for a chain of L + 1 with the cut
    at l + 1/2; and the change of c when the entropies of cuts at the
    run's bond dimension are raised by their truncation bias (see
    `bondscope._analyses.saturation`).  A bias moving c by more than 0.02
    makes the verdict "inconclusive" (saturated).  The law is chosen by
    AICc among the area, logarithmic and volume models (docs/analysis.md).

    References
    ----------
    .. [1] P. Calabrese and J. Cardy, J. Stat. Mech. P06002 (2004).
    .. [2] N. Laflorencie, E. S. Sorensen, M.-S. Chang, I. Affleck, PRL 96,
           100603 (2006): the alternating term of open chains.
    .. [3] D. N. Page, PRL 71, 1291 (1993): the volume-law reference.
    .. [4] C. M. Hurvich and C.-L. Tsai, Biometrika 76, 297 (1989): AICc.
    """
    form, exponent = _parity_setting(parity_exponent)
    if boundary is not None:
        resolve_boundary(boundary, None)
    prof = as_profile(source, spectra=spectrum_report)
    if prof.kind == "unit-cell":
        raise ValueError(f"{prof.source or 'profile'}: a unit cell of an infinite chain has no "
                         "finite-size scaling; fit several cells at growing bond dimension "
                         "(fit_cell_scaling, `bondscope fit cell_chi*.h5`)")
    boundary, boundary_source = resolve_boundary(boundary, prof)
    corrections = _corrections(corrections, boundary)
    sites = prof.sites
    if sites < 3:
        raise ValueError(f"a scaling fit needs at least 3 sites, the profile has {sites}")
    local_dims = prof.local_dims
    if local_dims is None and local_dim is not None:
        local_dims = [local_dim] * sites if np.isscalar(local_dim) else list(local_dim)
    if local_dims is not None and len(local_dims) != sites:
        raise ValueError(f"{len(local_dims)} local dimensions for {sites} sites")
    order = np.argsort(prof.positions)
    l_all = prof.positions[order]
    S_all = prof.entropies[order] * nats_per_unit(prof)
    user = parse_window(window, sites)
    margin = None if user is not None else max(1, sites // 8)
    a, b = user if user is not None else (margin, sites - margin)
    n_par = 2 + len(corrections)
    sel = (l_all >= a) & (l_all <= b)
    if sel.sum() < n_par + 1:
        raise ValueError(f"window (--window) {a}:{b} holds {int(sel.sum())} cuts; a fit with "
                         f"{n_par} parameters needs at least {n_par + 1} (use --window or fewer "
                         "corrections)")
    l, S = l_all[sel], S_all[sel]
    noise = _noise(prof, l)
    alternation = None
    if "parity" not in corrections:
        form, exponent = None, None
    elif form is None:
        if sel.sum() >= n_par + 4:
            form, exponent, alternation = choose_alternation(l, S, sites, boundary, corrections,
                                                             noise)
        else:
            form, exponent = "fixed", 1.0

    def c_of(lo, hi, walls=False, shift=None):
        pick = (l_all >= lo) & (l_all <= hi)
        if pick.sum() < n_par + 1:
            return None
        y = S_all[pick] if shift is None else S_all[pick] + shift[pick]
        return float(fit_model(l_all[pick], y, sites, boundary, "logarithmic", corrections,
                               form or "fixed", exponent or 1.0, walls).coef[0])

    best = fit_model(l, S, sites, boundary, "logarithmic", corrections, form or "fixed",
                     exponent or 1.0)
    c = float(best.coef[0])
    fit_err = float(math.sqrt(best.cov[0, 0])) if best.cov is not None else 0.0
    others = [{"window": [lo, hi], "central_charge": v}
              for lo, hi in _alternatives(a, b, margin, sites)
              if (v := c_of(lo, hi)) is not None]
    spread = max((abs(o["central_charge"] - c) for o in others), default=0.0)
    length = abs(c_of(a, b, walls=True) - c) if boundary == "open" else 0.0
    marginal = 0.0
    if form == "su2" or (form == "fitted" and abs(exponent - 0.5) <= SU2_EXPONENT):
        # the SU(2) form against the plain power: how much c hangs on the log factor
        other = "fixed" if form == "su2" else "su2"
        marginal = abs(float(fit_model(l, S, sites, boundary, "logarithmic", corrections, other,
                                       0.5).coef[0]) - c)
    sat = finite_chi(prof, l)
    sat_part, sat_unknown = _saturation_part(sat, l_all, c, c_of, a, b)
    if sat_unknown:
        # bias unknown: the curvature a saturated middle puts on S against ln x, read as
        # the change of c on the window's middle half
        sat_part = max(sat_part, _middle_drift(l_all, S_all, a, b, sites, boundary, corrections,
                                               form, exponent, alternation, noise, c))
    shape_error = math.sqrt(fit_err ** 2 + spread ** 2 + length ** 2 + marginal ** 2)
    error = float(math.sqrt(shape_error ** 2 + sat_part ** 2))
    # the law is judged on the profile as it is; saturation is weighed after
    law, reason, evidence, flags = decide_law(l, S, sites, boundary, corrections,
                                              form or "fixed", exponent or 1.0, c, shape_error,
                                              local_dims, noise)
    if alternation is not None:
        evidence["alternation"] = [{**a_, "aicc": None if math.isinf(a_["aicc"]) else a_["aicc"]}
                                   for a_ in alternation]
    if sat["capped"]:
        chi = sat["bond_dimension"]
        where = f"{len(sat['capped'])} of {len(l)} fitted cuts at the run's bond dimension {chi}"
        if sat_unknown and sat_part > SATURATED_C and law in ("logarithmic", "inconclusive"):
            law, reason = "inconclusive", (f"possibly saturated: {where}, their truncation "
                                           f"bias unknown, and c on the window's middle half "
                                           f"differs by {sat_part:.2g}; profile with "
                                           "--spectrum or use a larger bond dimension")
            flags.append(reason)
        elif sat_unknown:
            flags.append(f"{where}; their truncation bias is unknown without spectra or a "
                         "discarded weight (profile with --spectrum); the curvature of the "
                         f"middle half ({sat_part:.2g} in c) is in the error")
        elif (sat_part > SATURATED_C or sat["severe"]) and law in ("logarithmic",
                                                                   "inconclusive"):
            moved = (f"move c by {sat_part:.2g}" if not sat["severe"] else
                     f"drop up to half their weight at {len(sat['severe'])} cuts")
            law, reason = "inconclusive", (f"saturated: {where} {moved}; use a larger bond "
                                           "dimension or a window of uncapped cuts")
            flags.append(reason)
        elif sat_part > SATURATED_C or sat["severe"]:
            flags.append(f"{where}: a {law} law, or a critical profile saturated by the bond "
                         "dimension; a run at larger bond dimension tells")
    diagnostics = (spectrum_diagnostics(prof, tol=degeneracy_tol) if spectrum_report
                   else ABSENT)
    return ScalingFit(
        boundary=boundary, boundary_source=boundary_source, sites=sites, window=[a, b],
        corrections=list(corrections), parity_exponent=exponent, parity_form=form,
        central_charge=c, central_charge_error=error,
        error_parts={"fit": fit_err, "window": float(spread), "length": length,
                     "saturation": sat_part, "marginal": marginal,
                     "windows": others},
        constant=float(best.coef[1]),
        amplitudes={name: float(v) for name, v in zip(corrections, best.coef[2:])},
        units="nats", positions=[int(v) for v in l], residuals=[float(v) for v in best.resid],
        rms_residual=float(np.sqrt(np.mean(best.resid ** 2))), law=law, law_reason=reason,
        law_evidence=evidence, flags=flags, saturation={**sat, "c_shift": sat_part},
        diagnostics=diagnostics)


def _middle_drift(l_all, S_all, a, b, sites, boundary, corrections, form, exponent,
                  alternation, noise, c):
    """|c on the window's middle half - c|, the alternation chosen afresh when it was chosen
    from the data (0 when the middle half is too short)."""
    q = (b - a) // 4
    pick = (l_all >= a + q) & (l_all <= b - q)
    n_par = 2 + len(corrections)
    if not q or pick.sum() < n_par + 1:
        return 0.0
    l, S = l_all[pick], S_all[pick]
    if alternation is not None and pick.sum() >= n_par + 4:
        form, exponent, _ = choose_alternation(l, S, sites, boundary, corrections, noise)
    fit = fit_model(l, S, sites, boundary, "logarithmic", corrections, form or "fixed",
                    exponent or 1.0)
    return abs(float(fit.coef[0]) - c)


def _saturation_part(sat, l_all, c, c_of, a, b):
    """(change of c when capped cuts are raised by their bias, whether a bias is unknown)."""
    if not sat["capped"]:
        return 0.0, False
    known = [v for v in sat["bias"] if v is not None]
    unknown = len(known) < len(sat["bias"])
    shift = np.zeros(len(l_all))
    index = {int(p): i for i, p in enumerate(l_all)}
    for p, v in zip(sat["capped"], sat["bias"]):
        shift[index[p]] = v or 0.0
    if not shift.any():
        return 0.0, unknown
    return abs(c_of(a, b, shift=shift) - c), unknown
