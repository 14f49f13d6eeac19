"""Straight-line least squares shared by the analyses."""

import math
from collections import namedtuple

import numpy as np

__all__ = ["LineFit", "fit_line"]

LineFit = namedtuple("LineFit", "slope intercept slope_error rms r_squared")
LineFit.__doc__ = """Least-squares line y = slope x + intercept.

``slope_error`` is the standard error of the slope (None for two points or
fewer: no residual to estimate it from); ``rms`` the root-mean-square
residual; ``r_squared`` the coefficient of determination (0 for constant y).
"""


def fit_line(x, y):
    """Least-squares line through (x, y), 1-D float arrays of one length >= 2: a `LineFit`."""
    design = np.column_stack([x, np.ones_like(x)])
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    square = float(resid @ resid)
    dof = len(x) - 2
    error = None
    if dof > 0:
        cov = (square / dof) * np.linalg.pinv(design.T @ design)
        error = math.sqrt(max(float(cov[0, 0]), 0.0))
    total = float(((y - y.mean()) ** 2).sum())
    return LineFit(float(coef[0]), float(coef[1]), error, math.sqrt(square / len(x)),
                   1.0 - square / total if total > 0 else 0.0)
