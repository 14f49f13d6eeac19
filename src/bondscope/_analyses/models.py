"""Least-squares models of S(l) for the scaling fit, and their comparison by AICc.

Every model is linear in its amplitudes once the alternating term's form is
fixed; the form's exponent, when fitted, is one more parameter.
"""

import math
from collections import namedtuple

import numpy as np

__all__ = ["chord", "Fit", "fit_model", "aicc", "choose_alternation", "LEADS", "FORMS"]

# leading term of each candidate law
LEADS = ("area", "logarithmic", "volume")
# forms of the alternating term: a power of the chord, its exponent fitted, or the SU(2) form
FORMS = ("fixed", "fitted", "su2")
# bounds of a fitted alternation exponent (our choice: 0.1 is slower than any Luttinger
# liquid met in spin chains, 3 faster than any boundary operator we fit)
_EXPONENT_RANGE = (0.1, 3.0)

Fit = namedtuple("Fit", "coef resid cov rss n k")
Fit.__doc__ = """One least-squares fit: amplitudes, residuals, covariance (None without
degrees of freedom), residual sum of squares, number of cuts and of fitted parameters."""


def chord(l, sites, boundary, walls=False):
    """Chord length; ``walls``: open chain with its walls half a site beyond the ends."""
    if walls:
        return 2.0 * (sites + 1) / np.pi * np.sin(np.pi * (l + 0.5) / (sites + 1))
    scale = 2.0 * sites if boundary == "open" else float(sites)
    return scale / np.pi * np.sin(np.pi * l / sites)


def _alternating(l, x, form, exponent):
    sign = (-1.0) ** l
    if form == "su2":
        # marginal operator of SU(2) chains: a sqrt(ln x) factor on the x^(-1/2) decay
        return sign * np.sqrt(np.log(np.maximum(x, 1.0))) / np.sqrt(x)
    return sign / x ** exponent


def _design(l, x, sites, boundary, lead, corrections, form, exponent):
    cols = []
    if lead == "logarithmic":
        cols.append(np.log(x) / (6.0 if boundary == "open" else 3.0))
    elif lead == "volume":
        cols.append(np.minimum(l, sites - l).astype(float))
    cols.append(np.ones_like(x))
    if "parity" in corrections:
        cols.append(_alternating(l, x, form, exponent))
    if "smooth" in corrections:
        cols.append(1.0 / x)
    return np.stack(cols, axis=1)


def fit_model(l, S, sites, boundary, lead, corrections, form="fixed", exponent=1.0,
              walls=False):
    """Least squares of one model over the cuts ``l`` (entropies ``S`` in nats).

    Returns
    -------
    Fit
        ``coef`` in column order (leading amplitude first unless ``lead`` is
        "area", then the constant, then the corrections); ``k`` counts a
        fitted exponent as a parameter.
    """
    x = chord(l, sites, boundary, walls)
    A = _design(l, x, sites, boundary, lead, corrections, form, exponent)
    coef, *_ = np.linalg.lstsq(A, S, rcond=None)
    resid = S - A @ coef
    rss = float(resid @ resid)
    dof = len(S) - A.shape[1]
    cov = (rss / dof) * np.linalg.pinv(A.T @ A) if dof > 0 else None
    k = A.shape[1] + (1 if "parity" in corrections and form == "fitted" else 0)
    return Fit(coef, resid, cov, rss, len(S), k)


def aicc(fit, noise):
    """Corrected Akaike information criterion of a least-squares fit.

    ``n ln(RSS/n) + 2k' + 2k'(k' + 1)/(n - k' - 1)`` with ``k' = k + 1`` (the
    residual variance is estimated too); the RSS is floored at ``n noise^2``
    so that data exact to rounding do not rank models by their rounding.
    Infinite when ``n <= k' + 1``.

    References
    ----------
    .. [1] C. M. Hurvich and C.-L. Tsai, Biometrika 76, 297 (1989).
    .. [2] K. P. Burnham and D. R. Anderson, Model Selection and Multimodel
           Inference, 2nd ed. (Springer, 2002), Sec. 2.4 and 2.6.
    """
    n, k = fit.n, fit.k + 1
    if n - k - 1 <= 0:
        return math.inf
    rss = max(fit.rss, n * noise ** 2, np.finfo(float).tiny)
    return n * math.log(rss / n) + 2 * k + 2 * k * (k + 1) / (n - k - 1)


def choose_alternation(l, S, sites, boundary, corrections, noise):
    """The alternating term's form for the logarithmic model: (form, exponent, candidates).

    Candidates: the free-fermion power x^-1 ("fixed"), a power with its
    exponent fitted by a bounded scalar minimisation of the RSS ("fitted"),
    and the SU(2) form sqrt(ln x) / x^(1/2) ("su2"); the one with the lowest
    AICc is used, so a fitted exponent must pay for its parameter.
    """
    from scipy.optimize import minimize_scalar

    def rss(k):
        return fit_model(l, S, sites, boundary, "logarithmic", corrections, "fixed", k).rss

    best = minimize_scalar(rss, bounds=_EXPONENT_RANGE, method="bounded",
                           options={"xatol": 1e-4})
    candidates = []
    for form, k in (("fixed", 1.0), ("fitted", float(best.x)), ("su2", 0.5)):
        fit = fit_model(l, S, sites, boundary, "logarithmic", corrections, form, k)
        candidates.append({"form": form, "exponent": k, "aicc": aicc(fit, noise)})
    chosen = min(candidates, key=lambda c: c["aicc"])
    return chosen["form"], chosen["exponent"], candidates
