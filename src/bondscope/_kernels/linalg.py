"""Small linear-algebra steps shared by the kernels (LAPACK without copies)."""

import math

import numpy as np

from .._errors import CheckpointError

__all__ = ["r_factor", "svdvals", "normalised", "SweepResult"]


def r_factor(a):
    """R of the economic QR of a 2-D array (a may be overwritten); shape (min(m, n), n).

    A Fortran-ordered ``a`` reaches LAPACK without a copy.
    """
    from scipy.linalg import qr

    return qr(a, mode="raw", overwrite_a=True, check_finite=False)[1]


def svdvals(a):
    """Singular values of a 2-D array (a may be overwritten), descending."""
    from scipy.linalg import svdvals as values

    return values(a, overwrite_a=True, check_finite=False)


def normalised(s, where):
    """(s / ||s||, ||s||); CheckpointError naming ``where`` when the norm is zero."""
    total = math.sqrt(float(np.vdot(s, s).real))
    if not total > 0:
        raise CheckpointError(f"{where}: the state has zero norm")
    return s / total, total


class SweepResult:
    """Spectra of every cut plus truncation tracking, as a kernel returns them.

    Attributes
    ----------
    spectra : list of ndarray
        Normalised Schmidt values per cut (position 1..N-1), descending.
    floors : list of float
        Resolution floor per cut (on the normalised values).
    norm : float
        Norm of the stored state.
    route : str
    infidelity : float or None
        1 - |<psi|psi_trunc>|^2 of successive truncation, when asked.
    norm_exponent : int
        The norm of the state the kernel read is ``norm * 2**norm_exponent``
        (the scale its sweeps removed, :mod:`.balance`).
    """

    def __init__(self, spectra, floors, norm, route, infidelity=None, norm_exponent=0):
        self.spectra, self.floors, self.norm = spectra, floors, norm
        self.route, self.infidelity = route, infidelity
        self.norm_exponent = norm_exponent
