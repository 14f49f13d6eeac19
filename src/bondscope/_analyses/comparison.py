"""Comparison of profiles of one system: convergence in bond dimension, or growth in time."""

import dataclasses
import os
import re
from pathlib import Path

import numpy as np

from .._results import ABSENT, Result
from .._runinfo import run_attributes
from .extrapolation import Extrapolation, extrapolate, extrapolate_series, run_precision
from .inputs import as_profile, nats_per_unit

__all__ = ["SERIES", "Comparison", "Extrapolation", "checkpoint_meta", "compare_profiles",
           "extrapolate"]

SERIES = ("auto", "bond", "time")
# checkpoint root attributes read as run metadata
_META_ATTRS = ("time", "max_discarded_weight")
_NUMBER = re.compile(r"[-+]?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?")


@dataclasses.dataclass(frozen=True)
class Comparison(Result):
    """Result of :func:`compare_profiles`; fields as its JSON keys (docs/analysis.md).
    Bond series have no time fields, time series no extrapolation."""

    series: str
    runs: list
    sites: int
    positions: list
    entropies: list
    units: str
    differences: list
    largest_difference: dict
    last_difference: float
    tol: float
    converged: bool
    verdict: str
    extrapolation: object = ABSENT
    extrapolation_note: str = ABSENT
    times: list = ABSENT
    time_source: str = ABSENT
    middle_position: int = ABSENT
    middle_growth_rate: float = ABSENT
    middle_growth_rates: list = ABSENT

    _shown = ("series", "verdict", "last_difference", "tol", "runs")

    def _summary(self):
        return (f"{self.series} series of {len(self.runs)} runs: {self.verdict} (last change "
                f"{self.last_difference:.3g} nats)")


def _name(source, prof, i):
    if isinstance(source, (str, os.PathLike)):
        return Path(source).name
    return prof.source or f"#{i}"


def checkpoint_meta(path, rename=None):
    """Root attributes ``time`` and ``max_discarded_weight`` of an HDF5 checkpoint.

    ``rename`` maps those quantities to the attribute names a series uses
    (as in :func:`.._runinfo.run_attributes`).  Returns an empty dict for saved
    profiles and files without them; values that are not finite numbers are
    left out.
    """
    return {k: float(v) for k, v in run_attributes(path, _META_ATTRS, rename).items()
            if _number(v)}


def _number(value):
    return (isinstance(value, (int, float, np.integer, np.floating))
            and not isinstance(value, bool) and bool(np.isfinite(value)))


def _run_weight(prof, meta):
    """A run-level discarded weight and where it came from, or (None, None)."""
    for key in ("max_discarded_weight", "discarded_weight"):
        if _number(prof.get(key)):
            return float(prof[key]), key
    if _number(meta.get("max_discarded_weight")):
        return float(meta["max_discarded_weight"]), "checkpoint max_discarded_weight"
    return None, None


def _weights(profs, metas, positions):
    """Per-run, per-cut discarded weights (runs x cuts) and their sources."""
    rows, sources = [], []
    for prof, meta in zip(profs, metas):
        by_pos = {c["position"]: c.get("discarded_weight") for c in prof.cuts}
        cut_w = [by_pos.get(p) for p in positions]
        # with a `truncation` object they are of a what-if truncation, not of the run
        if prof.truncation is None and all(_number(w) for w in cut_w):
            rows.append(np.array(cut_w, dtype=float))
            sources.append("cuts.discarded_weight")
            continue
        w, src = _run_weight(prof, meta)
        if w is None:
            return None, None
        rows.append(np.full(len(positions), w))
        sources.append(src)
    return np.array(rows), sources


def _time_of(prof, meta):
    return prof.get("time") if _number(prof.get("time")) else meta.get("time")


def _times(profs, metas, names):
    if all(_number(_time_of(p, m)) for p, m in zip(profs, metas)):
        return [float(_time_of(p, m)) for p, m in zip(profs, metas)], "time field"
    found = [_NUMBER.findall(Path(n).stem) for n in names]
    if all(found):
        return [float(f[-1]) for f in found], "file name"
    return [float(i) for i in range(len(profs))], "order"


def compare_profiles(sources, *, tol=1e-3, series="auto", names=None, meta=None, runs=None,
                     form="wlogw"):
    """Compare profiles of one system at several bond dimensions or times.

    Parameters
    ----------
    sources : sequence of Profile, dict or path
        Two or more profiles (or checkpoints) of chains with the same number
        of sites.
    tol : float
        Convergence threshold in nats: the largest per-cut entropy change
        between the last two runs must be <= `tol`.
    series : {"auto", "bond", "time"}
        "bond": runs at increasing bond dimension, ordered by the sum of
        their ``cuts[].bond_dimension`` (given order where absent); "time":
        ordered by the top-level ``time`` field (or checkpoint attribute),
        else the last number in the
        file name, else the given order; "auto": "time" when every document
        has a ``time`` field, "bond" otherwise.
    names : sequence of str, optional
        Labels of the runs, used for time ordering by name; default the
        file names of path inputs, else the documents' ``source``.
    meta : sequence of dict, optional
        Per run, ``time`` and ``max_discarded_weight`` when the documents
        lack them; default `checkpoint_meta` of path inputs.
    runs : int or sequence of str, optional
        Runs of a bond series used for the extrapolation: the last `runs`
        (smallest weights), or those named; default the last three.
    form : {"wlogw", "linear"}
        Extrapolation form S = S0 + a g(w): g = w (1 + ln(1/w)) (default),
        or g = w.

    Returns
    -------
    Comparison
        ``series``, ``runs`` (names in order), ``positions`` (the common
        cuts), ``entropies`` (runs x cuts, nats), ``differences`` (per step
        between consecutive runs, per cut), ``largest_difference`` (value,
        position, runs), ``converged``, ``verdict``, ``tol``; for "bond" an
        ``extrapolation`` (``entropies``, ``errors``, ``slopes``, ``methods``,
        ``runs``, ``form``, ``weights``, ``weight_sources``; or None with
        ``extrapolation_note``); for "time"
        ``times``, ``time_source``, ``middle_position``,
        ``middle_growth_rate`` and ``middle_growth_rates``.

    Raises
    ------
    ValueError
        Fewer than two inputs, differing numbers of sites, no common cut,
        or a bad setting.

    Notes
    -----
    Cost O(runs x cuts).  Entropies are compared in nats whatever each
    document's ``log_base``.  The extrapolation fits S = S0 + a g(w) per cut
    over the chosen runs by weighted least squares and keeps the best run
    where it is converged to its own precision, where the weights do not
    differ, or where the fit would move further than the runs' last step
    (see `bondscope._analyses.extrapolation.extrapolate_series`).  The
    weight of a run at a cut is its ``cuts[].discarded_weight`` when every
    common cut has one and the document has no ``truncation`` object
    (bondscope writes both for a what-if truncation of the profiled state,
    whose entropies are untruncated); else the run's top-level
    ``max_discarded_weight`` or ``discarded_weight``, or its checkpoint's
    ``max_discarded_weight`` attribute, used at every cut.  The middle
    growth rate is the least-squares slope dS/dt of the cut nearest N/2
    over all times.

    References
    ----------
    .. [1] O. Legeza and G. Fath, PRB 53, 14349 (1996): accuracy of DMRG
           results against the discarded weight.
    """
    if form not in ("wlogw", "linear"):
        raise ValueError(f"form (--form) must be wlogw or linear, found {form!r}")
    if series not in SERIES:
        raise ValueError(f"series must be one of {SERIES}, found {series!r}")
    if not tol >= 0:
        raise ValueError(f"tol must be >= 0, found {tol!r}")
    sources = list(sources)
    if len(sources) < 2:
        raise ValueError(f"compare needs at least two profiles, found {len(sources)}")
    profs = [as_profile(s) for s in sources]
    if names is None:
        names = [_name(s, p, i) for i, (s, p) in enumerate(zip(sources, profs))]
    elif len(names) != len(sources):
        raise ValueError(f"{len(names)} names for {len(sources)} profiles")
    names = [str(n) for n in names]
    if meta is None:
        meta = [checkpoint_meta(s) if isinstance(s, (str, os.PathLike)) else {} for s in sources]
    elif len(meta) != len(sources):
        raise ValueError(f"{len(meta)} metadata entries for {len(sources)} profiles")
    metas = [dict(m) for m in meta]
    sites = {p.sites for p in profs}
    if len(sites) > 1:
        listing = ", ".join(f"{n}: {p.sites}" for n, p in zip(names, profs))
        raise ValueError(f"profiles of different systems: sites differ ({listing})")
    common = set(profs[0].positions.tolist())
    for p in profs[1:]:
        common &= set(p.positions.tolist())
    if not common:
        raise ValueError("the profiles share no cut position")
    positions = sorted(common)
    if series == "auto":
        timed = all(_number(_time_of(p, m)) for p, m in zip(profs, metas))
        series = "time" if timed else "bond"
    if series == "time":
        times, time_source = _times(profs, metas, names)
        order = sorted(range(len(profs)), key=lambda i: times[i])
    else:
        bonds = [p.bond_dimensions for p in profs]
        keys = [int(b.sum()) if len(b) and (b >= 0).all() else 0 for b in bonds]
        order = sorted(range(len(profs)), key=lambda i: keys[i])
    profs = [profs[i] for i in order]
    names = [names[i] for i in order]
    metas = [metas[i] for i in order]
    S = np.array([[dict(zip(p.positions.tolist(), p.entropies * nats_per_unit(p)))[q]
                   for q in positions] for p in profs])
    diffs = np.diff(S, axis=0)
    step, cut = np.unravel_index(np.argmax(np.abs(diffs)), diffs.shape)
    last = float(np.max(np.abs(diffs[-1])))
    converged = last <= tol
    out = {
        "series": series,
        "runs": names,
        "sites": profs[0].sites,
        "positions": positions,
        "entropies": S.tolist(),
        "units": "nats",
        "differences": diffs.tolist(),
        "largest_difference": {"value": float(diffs[step, cut]), "position": positions[cut],
                               "runs": [names[step], names[step + 1]]},
        "last_difference": last,
        "tol": float(tol),
        "converged": bool(converged),
    }
    if series == "time":
        t = np.array([times[i] for i in order])
        mid = int(np.argmin(np.abs(np.array(positions) - profs[0].sites / 2.0)))
        s_mid = S[:, mid]
        rate = np.polyfit(t, s_mid, 1)[0] if np.ptp(t) > 0 else None
        dt = np.diff(t)
        out.update({
            "verdict": "stationary" if converged else "evolving",
            "times": t.tolist(),
            "time_source": time_source,
            "middle_position": positions[mid],
            "middle_growth_rate": None if rate is None else float(rate),
            "middle_growth_rates": ([float(v) for v in np.diff(s_mid) / dt]
                                    if (dt > 0).all() else None),
        })
        return Comparison(**out)
    out["verdict"] = "converged" if converged else "not converged"
    W, wsources = _weights(profs, metas, positions)
    if W is None:
        out["extrapolation"] = None
        out["extrapolation_note"] = "no discarded weight for every run"
        return Comparison(**out)
    precision = np.array([run_precision(p, positions) for p in profs])
    ext = extrapolate_series(W, S, names, precision, form=form, runs=runs)
    out["extrapolation"] = {**ext, "weights": W.tolist(), "weight_sources": wsources}
    return Comparison(**out)
