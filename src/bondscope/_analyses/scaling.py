"""Scaling fit: central charge from the Calabrese-Cardy form, and the scaling law."""

import math

import numpy as np

from .diagnostics import spectrum_diagnostics
from .inputs import as_profile, nats_per_unit

__all__ = ["fit_scaling", "parse_window", "page_entropy", "BOUNDARIES", "CORRECTIONS"]

BOUNDARIES = ("open", "periodic")
CORRECTIONS = ("parity", "smooth")
# c below half the smallest unitary central charge (1/2, Friedan, Qiu, Shenker, PRL 52,
# 1575 (1984)) means the entropy has stopped growing with the block: area law
AREA_C = 0.25
# a volume-law middle cut holds at least this fraction of the Page value (our choice)
PAGE_FRACTION = 0.5
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


def _chord(l, sites, boundary, walls=False):
    """Chord length; ``walls``: open chain with its walls half a site beyond the ends."""
    if walls:
        return 2.0 * (sites + 1) / np.pi * np.sin(np.pi * (l + 0.5) / (sites + 1))
    scale = 2.0 * sites if boundary == "open" else float(sites)
    return scale / np.pi * np.sin(np.pi * l / sites)


def _design(l, x, boundary, corrections, exponent):
    cols = [np.log(x) / (6.0 if boundary == "open" else 3.0), np.ones_like(x)]
    if "parity" in corrections:
        cols.append((-1.0) ** l / x ** exponent)
    if "smooth" in corrections:
        cols.append(1.0 / x)
    return np.stack(cols, axis=1)


def _lstsq(A, y):
    coef, *_ = np.linalg.lstsq(A, y, rcond=None)
    resid = y - A @ coef
    dof = len(y) - A.shape[1]
    cov = (resid @ resid / dof) * np.linalg.pinv(A.T @ A) if dof > 0 else None
    return coef, resid, cov


def _fit(l, S, sites, boundary, corrections, exponent, walls=False):
    x = _chord(l, sites, boundary, walls)
    return _lstsq(_design(l, x, boundary, corrections, exponent), S)


def _law(l, S, sites, boundary, c, local_dims):
    """Classify the profile; see docs/analysis.md for the criterion."""
    x = _chord(l, sites, boundary)
    _, r_log, _ = _lstsq(np.stack([np.log(x), np.ones_like(x)], axis=1), S)
    dist = np.minimum(l, sites - l).astype(float)
    (slope, _), r_lin, _ = _lstsq(np.stack([dist, np.ones_like(dist)], axis=1), S)
    mid = int(np.argmin(np.abs(l - sites / 2.0)))
    page = ratio = None
    if local_dims is not None:
        logs = np.log(np.asarray(local_dims, dtype=float))
        page = page_entropy(logs[:l[mid]].sum(), logs[l[mid]:].sum())
        ratio = float(S[mid] / page) if page > 0 else None
    rss_log, rss_lin = float(r_log @ r_log), float(r_lin @ r_lin)
    if c < AREA_C:
        law = "area"
    elif slope > 0 and rss_lin < rss_log and (ratio is None or ratio >= PAGE_FRACTION):
        law = "volume"
    else:
        law = "logarithmic"
    evidence = {"area_threshold": AREA_C, "rss_logarithmic": rss_log, "rss_linear": rss_lin,
                "volume_slope": float(slope), "middle_position": int(l[mid]),
                "middle_entropy": float(S[mid]), "page_entropy": page, "page_ratio": ratio,
                "page_fraction": PAGE_FRACTION}
    return law, evidence


def _alternatives(a, b, default_margin, sites):
    t = max(1, (b - a) // 8)
    wins = [(a + t, b - t), (a + t, b), (a, b - t)]
    if default_margin is not None:
        m = max(1, default_margin // 2)
        wins.append((m, sites - m))
    return [w for w in dict.fromkeys(wins) if w[0] <= w[1] and w != (a, b)]


def fit_scaling(source, *, boundary="open", window=None, corrections=None, parity_exponent=1.0,
                local_dim=None, spectrum_report=False, degeneracy_tol=1e-6):
    """Fit the Calabrese-Cardy form to a profile: central charge, constant, scaling law.

    The model, in nats, for a cut after l of L sites::

        open:      S(l) = (c/6) ln x + s0 [+ b (-1)^l / x^K] [+ f / x],  x = (2L/pi) sin(pi l/L)
        periodic:  S(l) = (c/3) ln x + s0 [+ ...],                       x = (L/pi) sin(pi l/L)

    Parameters
    ----------
    source : Profile, dict or path
        The profile (or a checkpoint, profiled with default options).
    boundary : {"open", "periodic"}
        Chain with two ends, or ring.
    window : str or (int, int), optional
        Inclusive range ``"A:B"`` of cut positions to fit.  Default: drop
        ``m = max(1, L // 8)`` cuts at each end (the boundary region), i.e.
        ``m:L-m``.
    corrections : sequence of {"parity", "smooth"}, optional
        Extra terms: "parity", the alternating b (-1)^l / x^K; "smooth", a
        term f / x.  Default: both for open chains, none for rings.
    parity_exponent : float
        K of the alternating term (1 for free fermions).
    local_dim : int or sequence of int, optional
        Local dimensions for the Page comparison when the document has no
        ``local_dims``.
    spectrum_report : bool
        Add ``diagnostics`` (see `spectrum_diagnostics`); needs spectra.
    degeneracy_tol : float
        Tolerance of the spectrum report.

    Returns
    -------
    dict
        ``central_charge``, ``central_charge_error`` (its fit, window and
        length parts in ``error_parts``), ``constant`` (s0, nats), ``amplitudes`` of the
        corrections, ``boundary``, ``window``, ``positions``, ``residuals``
        (nats, per position), ``rms_residual``, ``law`` ("area",
        "logarithmic" or "volume") with ``law_evidence``; see
        docs/analysis.md.

    Raises
    ------
    ValueError
        Unknown boundary or correction, a bad window, or too few cuts.

    Notes
    -----
    Linear least squares: O(n p^2) for n cuts and p <= 4 parameters, run
    once per window.  ``central_charge_error`` is the quadrature sum of
    three parts: the fit's standard error (covariance scaled by the
    residual variance); the largest change of c over the windows trimmed
    by an eighth at the left, right or both ends (and, for the default
    window, the one with half the margin); and, for open chains, the
    change of c when the chord is taken for a chain of L + 1 with the cut
    at l + 1/2 (walls half a site beyond the end sites), the finite-size
    ambiguity of the chord.  The residuals of exact critical data are
    systematic, so the last two usually dominate.  Entropies are
    converted from the document's ``log_base`` to nats.

    References
    ----------
    .. [1] P. Calabrese and J. Cardy, J. Stat. Mech. P06002 (2004).
    .. [2] N. Laflorencie, E. S. Sorensen, M.-S. Chang, I. Affleck, PRL 96,
           100603 (2006): the alternating term of open chains.
    .. [3] D. N. Page, PRL 71, 1291 (1993): the volume-law reference.
    """
    if boundary not in BOUNDARIES:
        raise ValueError(f"boundary (--boundary) must be one of {', '.join(BOUNDARIES)}, "
                         f"found {boundary!r}")
    if corrections is None:
        corrections = CORRECTIONS if boundary == "open" else ()
    elif isinstance(corrections, str):
        corrections = (corrections,)
    corrections = tuple(dict.fromkeys(corrections))
    unknown = [c for c in corrections if c not in CORRECTIONS]
    if unknown:
        raise ValueError(f"unknown correction {unknown[0]!r} (corrections=, --corrections); "
                         f"choose from {', '.join(CORRECTIONS)} or none")
    if not parity_exponent > 0:
        raise ValueError(f"parity_exponent (--parity-exponent) must be > 0, "
                         f"found {parity_exponent!r}")
    prof = as_profile(source, spectra=spectrum_report)
    if prof.kind == "unit-cell":
        raise ValueError(f"{prof.source or 'profile'}: a unit cell of an infinite chain has no "
                         "finite-size scaling; fit several cells at growing bond dimension "
                         "(fit_cell_scaling, `bondscope fit cell_chi*.h5`)")
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

    def run(lo, hi, walls=False):
        sel = (l_all >= lo) & (l_all <= hi)
        if sel.sum() < n_par + 1:
            return None
        return sel, _fit(l_all[sel], S_all[sel], sites, boundary, corrections, parity_exponent,
                         walls)

    best = run(a, b)
    if best is None:
        held = int(((l_all >= a) & (l_all <= b)).sum())
        raise ValueError(f"window (--window) {a}:{b} holds {held} cuts; a fit with {n_par} parameters "
                         f"needs at least {n_par + 1} (use --window or fewer corrections)")
    sel, (coef, resid, cov) = best
    c = float(coef[0])
    fit_err = float(math.sqrt(cov[0, 0])) if cov is not None else 0.0
    others = []
    for lo, hi in _alternatives(a, b, margin, sites):
        alt = run(lo, hi)
        if alt is not None:
            others.append({"window": [lo, hi], "central_charge": float(alt[1][0][0])})
    spread = max((abs(o["central_charge"] - c) for o in others), default=0.0)
    length = abs(float(run(a, b, walls=True)[1][0][0]) - c) if boundary == "open" else 0.0
    law, evidence = _law(l_all[sel], S_all[sel], sites, boundary, c, local_dims)
    out = {
        "boundary": boundary,
        "sites": sites,
        "window": [a, b],
        "corrections": list(corrections),
        "parity_exponent": float(parity_exponent),
        "central_charge": c,
        "central_charge_error": float(math.sqrt(fit_err ** 2 + spread ** 2 + length ** 2)),
        "error_parts": {"fit": fit_err, "window": float(spread), "length": length,
                        "windows": others},
        "constant": float(coef[1]),
        "amplitudes": {name: float(v) for name, v in zip(corrections, coef[2:])},
        "units": "nats",
        "positions": [int(v) for v in l_all[sel]],
        "residuals": [float(v) for v in resid],
        "rms_residual": float(np.sqrt(np.mean(resid ** 2))),
        "law": law,
        "law_evidence": evidence,
    }
    if spectrum_report:
        out["diagnostics"] = spectrum_diagnostics(prof, tol=degeneracy_tol)
    return out
