"""The one place where analyses turn their input into a Profile.

An analysis accepts a Profile, a document dict, a saved profile or a
checkpoint path; :func:`as_profile` resolves each.
"""

import math
import os
from pathlib import Path

from .._document import Profile, is_saved_profile, load_profile

__all__ = ["as_profile", "require_spectra", "nats_per_unit"]


def as_profile(source, *, spectra=False, options=None):
    """A Profile from a Profile, a document dict, a saved profile or a checkpoint.

    Parameters
    ----------
    source : Profile, dict, str or os.PathLike
        A saved profile (.json, .csv, or an .h5 results file) is read as it
        is; any other path is profiled as a checkpoint.
    spectra : bool
        Profile a checkpoint with all Schmidt values, and require them in
        the result.
    options : ProfileOptions, optional
        How a checkpoint is profiled (default options otherwise).

    Raises
    ------
    TypeError
        `source` is none of the accepted types.
    ValueError
        `spectra` is asked for and the document has none.
    """
    if isinstance(source, Profile):
        prof = source
    elif isinstance(source, dict):
        prof = Profile.from_dict(source)
    elif isinstance(source, (str, os.PathLike)):
        path = Path(source)
        if is_saved_profile(path):
            prof = load_profile(path)
        else:
            from .._pipeline import profile

            prof = profile(path, options, **({"spectrum": True} if spectra else {}))
    else:
        raise TypeError("expected a Profile, a profile document (dict) or a path, found "
                        f"{type(source).__name__}")
    if spectra:
        require_spectra(prof)
    return prof


def require_spectra(prof):
    """Raise ValueError when a profile lacks Schmidt values at some cut."""
    if prof.has_spectra:
        return
    missing = [c["position"] for c in prof.cuts if "schmidt_values" not in c]
    where = prof.source or "profile"
    raise ValueError(f"{where}: no Schmidt values stored (cuts[].schmidt_values missing at "
                     f"{len(missing)} of {len(prof.cuts)} cuts, first at position "
                     f"{missing[0] if missing else '-'}); rerun `bondscope profile --spectrum` "
                     "or pass the checkpoint itself")


def nats_per_unit(prof):
    """Factor converting the profile's entropies to nats: ln(log_base)."""
    return math.log(prof.log_base)
