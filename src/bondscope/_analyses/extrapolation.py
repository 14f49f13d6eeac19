"""Extrapolation of a bond-dimension series to zero discarded weight, with honest errors."""

import math

import numpy as np

__all__ = ["Extrapolation", "extrapolate", "extrapolate_series", "correction", "FORMS",
           "DEFAULT_RUNS"]

# S0 + a g(w): "wlogw" g = w (1 + ln(1/w)), the entropy a dropped tail of weight w carries;
# "linear" g = w (common practice for energies)
FORMS = ("wlogw", "linear")
# runs used by default: the three with the smallest weights (our choice: the asymptotic end)
DEFAULT_RUNS = 3
# entropies are trusted to no better than this (nats; our choice, ~1e4 float64 eps)
_PRECISION_MIN = 1e-12


def correction(w, form="wlogw"):
    """g(w) of the form: w (1 + ln(1/w)) (0 at w = 0), or w itself."""
    w = np.asarray(w, dtype=float)
    if form == "linear":
        return w
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(w > 0, w * (1.0 + np.log(1.0 / np.where(w > 0, w, 1.0))), 0.0)


class Extrapolation:
    """A fit y = value + slope * g(x) to a series, read at x = 0.

    Attributes
    ----------
    value : float
        y extrapolated to x = 0.
    slope : float
    error : float or None
        Standard error of `value` (scaled by the residual variance); None
        with only two points.
    form : str
        "linear" (g = x) or "wlogw" (g = x (1 + ln(1/x))).
    """

    def __init__(self, value, slope, error, form="linear"):
        self.value, self.slope, self.error, self.form = value, slope, error, form

    def curve(self, x):
        """The fitted curve at `x` (array_like)."""
        return self.value + self.slope * correction(x, self.form)

    def to_dict(self):
        return {"value": self.value, "slope": self.slope, "error": self.error}


def extrapolate(x, y, *, form="linear", sigma=None):
    """Fit y = y0 + a g(x) by (weighted) least squares and return y0, the value at x = 0.

    Parameters
    ----------
    x, y : array_like, shape (n,)
        n >= 2 points with at least two distinct x (e.g. discarded weights
        and entropies of runs at growing bond dimension).
    form : {"linear", "wlogw"}
        g(x) = x, or x (1 + ln(1/x)).
    sigma : array_like, shape (n,), optional
        Relative uncertainty of each y (weights 1 / sigma^2).

    Returns
    -------
    Extrapolation

    Raises
    ------
    ValueError
        Shapes differ, fewer than two points, all x equal, or an unknown form.

    Notes
    -----
    Linear extrapolation in the discarded weight is common practice for
    energies (Legeza & Fath, PRB 53, 14349 (1996)); an entropy's error from
    a dropped tail of weight w goes as w ln(1/w) (the tail's own entropy),
    hence "wlogw".  Cost O(n).
    """
    if form not in FORMS:
        raise ValueError(f"form must be one of {', '.join(FORMS)}, found {form!r}")
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.shape != y.shape or x.ndim != 1 or len(x) < 2:
        raise ValueError(f"extrapolation needs two equal 1-D series of >= 2 points, found "
                         f"shapes {x.shape} and {y.shape}")
    if np.ptp(x) == 0:
        raise ValueError(f"extrapolation needs distinct x values, all are {x[0]!r}")
    g = correction(x, form)
    s = np.ones_like(x) if sigma is None else np.asarray(sigma, dtype=float)
    A = np.stack([np.ones_like(g), g], axis=1) / s[:, None]
    b = y / s
    (y0, a), *_ = np.linalg.lstsq(A, b, rcond=None)
    resid = b - A @ np.array([y0, a])
    dof = len(x) - 2
    error = (float(np.sqrt(resid @ resid / dof * np.linalg.pinv(A.T @ A)[0, 0]))
             if dof > 0 else None)
    return Extrapolation(float(y0), float(a), error, form)


def _cut(w, s, precision, form):
    """(value, error, slope, method) at one cut from the chosen runs (largest w first)."""
    last, step = s[-1], abs(s[-1] - s[-2])
    if w[-1] == 0:
        return float(last), float(precision), None, "exact run"
    if np.ptp(w) == 0:
        return float(last), float(max(step, precision)), None, "no spread"
    if step <= precision:
        return float(last), float(precision), None, "converged"
    g = correction(w, form)
    fit = extrapolate(w, s, form=form, sigma=g + precision)
    shift = abs(fit.value - last)
    if shift > step:
        # further than the last step: the runs are not in the asymptotic regime
        return float(last), float(step), fit.slope, "not asymptotic"
    stable = 0.0
    if len(w) >= 3 and np.ptp(w[1:]) > 0:
        stable = abs(extrapolate(w[1:], s[1:], form=form, sigma=g[1:] + precision).value
                     - fit.value)
    error = max(fit.error or 0.0, stable, shift, precision)
    return fit.value, float(error), fit.slope, "fit"


def extrapolate_series(W, S, names, precision, *, form="wlogw", runs=None):
    """Per-cut extrapolation of runs (rows, ordered by growing bond dimension) to w = 0.

    Parameters
    ----------
    W, S : ndarray, shape (runs, cuts)
        Discarded weights and entropies (nats).
    names : list of str
    precision : ndarray, shape (runs, cuts)
        Each entropy's own accuracy (nats).
    form : {"wlogw", "linear"}
    runs : int or sequence of str, optional
        The last `runs` runs, or the runs so named; default the last
        ``DEFAULT_RUNS``.

    Returns
    -------
    dict
        ``entropies``, ``errors``, ``slopes`` (None where no fit was made),
        ``methods`` per cut ("fit", "converged", "no spread", "exact run",
        "not asymptotic"), ``runs`` (the names used), ``form``.

    Notes
    -----
    Each cut is fitted by weighted least squares, sigma_i = g(w_i) +
    precision, since a run's error shrinks as g(w) does.  The error is the
    largest of the fit's standard error, the change when the
    largest-weight run is left out, the distance from the best run and the
    best run's precision.  The best run is kept as it stands when its last
    step is within its precision (converged), when the weights do not
    differ, or when the fit lands further from it than its last step.
    """
    if form not in FORMS:
        raise ValueError(f"form (--form) must be one of {', '.join(FORMS)}, found {form!r}")
    pick = _chosen(runs, names)
    order = np.argsort(-W[pick].max(axis=1), kind="stable")
    pick = [pick[i] for i in order]
    values, errors, slopes, methods = [], [], [], []
    for j in range(S.shape[1]):
        v, e, a, m = _cut(W[pick, j], S[pick, j], float(max(precision[pick[-1], j],
                                                              _PRECISION_MIN)), form)
        values.append(float(v))
        errors.append(e)
        slopes.append(None if a is None else float(a))
        methods.append(m)
    return {"entropies": values, "errors": errors, "slopes": slopes, "methods": methods,
            "runs": [names[i] for i in pick], "form": form}


def _chosen(runs, names):
    n = len(names)
    if runs is None:
        return list(range(max(0, n - DEFAULT_RUNS), n))
    if isinstance(runs, (int, np.integer)) and not isinstance(runs, bool):
        if not 2 <= runs <= n:
            raise ValueError(f"runs (--runs) must be between 2 and {n}, found {runs}")
        return list(range(n - int(runs), n))
    wanted = [str(r) for r in ([runs] if isinstance(runs, str) else runs)]
    missing = [r for r in wanted if r not in names]
    if missing:
        raise ValueError(f"runs (--runs): no run named {missing[0]!r}; the runs are "
                         f"{', '.join(names)}")
    if len(set(wanted)) < 2:
        raise ValueError(f"runs (--runs) needs at least two runs, found {len(set(wanted))}")
    return [i for i, name in enumerate(names) if name in wanted]


def run_precision(prof, positions):
    """Per cut, the entropy's own accuracy from its floor (nats), at least 1e-12."""
    from .saturation import entropy_bias

    by_pos = {c["position"]: c for c in prof.cuts}
    out = []
    for p in positions:
        cut = by_pos[p]
        floor = float(cut.get("resolution_floor", 0.0))
        rank = int(cut.get("bond_dimension") or cut.get("schmidt_rank") or 1)
        out.append(max(_PRECISION_MIN, entropy_bias(min(1.0, rank * floor ** 2)) / 2.0,
                       math.ulp(1.0) * 8))
    return out
