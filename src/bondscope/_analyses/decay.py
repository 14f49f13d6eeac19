"""Decay of the mutual information with distance: exponential or power law, or neither."""

import math

import numpy as np

from .lines import fit_line

__all__ = ["GOOD_R2", "PREFERENCE", "RESOLVED", "distance_profile", "fit_decay"]

# a distance counts in the fit when its mean I(r) exceeds this many floors (common practice)
RESOLVED = 10.0
# one law is preferred when its residual (rms of ln I) is this many times smaller
# than the other's, and its R^2 at least GOOD_R2 (common practice)
PREFERENCE = 2.0
GOOD_R2 = 0.9
_MIN_POINTS = 4


def distance_profile(mi, floors):
    """I(r): the mean of I(i, i + r) over the N - r pairs at distance r, r = 1..N-1.

    Returns a list of dicts ``distance``, ``mean``, ``spread`` (standard deviation
    over the pairs), ``pairs`` and ``floor`` (the mean floor).
    """
    mi, floors = np.asarray(mi), np.asarray(floors)
    n = mi.shape[0]
    rows = []
    for r in range(1, n):
        vals, fl = np.diagonal(mi, r), np.diagonal(floors, r)
        rows.append({"distance": r, "mean": float(vals.mean()), "spread": float(vals.std()),
                     "pairs": int(vals.size), "floor": float(fl.mean())})
    return rows


def fit_decay(rows, max_distance=None):
    """Fit ln I(r) to a line in r (exponential) and in ln r (power law); say which fits.

    Parameters
    ----------
    rows : list of dict
        From :func:`distance_profile`.
    max_distance : int, optional
        Largest distance fitted (default N // 2: farther pairs all touch the
        chain's ends).

    Returns
    -------
    dict
        ``law`` ("exponential", "power law" or "inconclusive"), ``reason``,
        ``window`` [r_min, r_max] of the points used, ``points``,
        ``exponential`` (``correlation_length`` xi with ``error``,
        ``amplitude``, ``rms``, ``r_squared``) and ``power_law``
        (``exponent`` eta, ``error``, ``amplitude``, ``rms``, ``r_squared``),
        with I(r) ~ A exp(-r / xi) or A r^-eta.

    Notes
    -----
    Only distances whose mean I(r) exceeds :data:`RESOLVED` times its floor
    are fitted; with fewer than four such points, or when neither law is
    clearly better (residual ratio < :data:`PREFERENCE` or R^2 < :data:`GOOD_R2`),
    the verdict is "inconclusive".  Error bars are the least-squares standard
    errors of the slopes (the xi error through d xi = xi^2 d(1/xi)).  Gapped
    chains decay exponentially with distance, critical ones as a power
    (Wolf, Verstraete, Hastings, Cirac, Phys. Rev. Lett. 100, 070502 (2008):
    the mutual information bounds every connected correlation function).
    """
    n = len(rows) + 1
    r_max = max_distance if max_distance is not None else max(n // 2, 1)
    used = [row for row in rows if row["distance"] <= r_max
            and row["mean"] > RESOLVED * row["floor"] and row["mean"] > 0]
    out = {"law": "inconclusive", "points": len(used),
           "window": [used[0]["distance"], used[-1]["distance"]] if used else None,
           "exponential": None, "power_law": None}
    if len(used) < _MIN_POINTS:
        out["reason"] = (f"{len(used)} distances up to {r_max} have I(r) above "
                         f"{RESOLVED:g} x its floor; a fit needs {_MIN_POINTS}")
        return out
    r = np.array([row["distance"] for row in used], dtype=float)
    y = np.log([row["mean"] for row in used])
    b, a, sb, rms_e, r2_e = fit_line(r, y)
    xi = -1.0 / b if b < 0 else math.inf
    out["exponential"] = {"correlation_length": xi if math.isfinite(xi) else None,
                          "error": xi * xi * sb if math.isfinite(xi) else None,
                          "amplitude": math.exp(a), "rms": rms_e, "r_squared": r2_e}
    b, a, sb, rms_p, r2_p = fit_line(np.log(r), y)
    out["power_law"] = {"exponent": -b, "error": sb, "amplitude": math.exp(a),
                        "rms": rms_p, "r_squared": r2_p}
    if rms_e * PREFERENCE <= rms_p and r2_e >= GOOD_R2 and math.isfinite(xi):
        out["law"], out["reason"] = "exponential", (
            f"residual {rms_e:.2g} vs {rms_p:.2g} for a power law")
    elif rms_p * PREFERENCE <= rms_e and r2_p >= GOOD_R2 and b < 0:
        out["law"], out["reason"] = "power law", (
            f"residual {rms_p:.2g} vs {rms_e:.2g} for an exponential")
    else:
        out["reason"] = (f"residuals {rms_e:.2g} (exponential, R^2 {r2_e:.2f}) and "
                         f"{rms_p:.2g} (power law, R^2 {r2_p:.2f}) do not single out a law")
    return out
