"""Convergence figure: middle-cut entropy against discarded weight or 1/chi."""

import math

import numpy as np

from .._text import entropy_unit
from .._docs import filled
from .._options import ProfileOptions
from ._gather import collect, same_base
from ._names import figure_text, visible
from ._style import INK, curve_look, new_figure, style, titled

__all__ = ["convergence_figure"]


def _discarded(entry):
    value = entry.meta.get("max_discarded_weight", entry.profile.get("discarded_weight"))
    if not isinstance(value, (int, float)):
        raise ValueError(f"{visible(entry.label)}: the run's discarded weight is unknown (no "
                         "'max_discarded_weight' attribute in its checkpoint); plot against "
                         "1/chi instead (--against bond)")
    return float(value)


def _inverse_bond(entry):
    chi = entry.max_bond
    if not chi:
        raise ValueError(f"{visible(entry.label)}: no bond dimension known; "
                         "use against='weight'")
    return 1.0 / chi


def _limit(members, x, form):
    """The comparison's extrapolation S = S0 + a g(x) at the middle cut, in nats.

    Each profile goes to :func:`bondscope._analyses.comparison.compare_profiles` with
    ``x`` as its run-level ``discarded_weight`` (and its own truncation
    fields left out): g(w) = w (1 + ln(1/w)) against the weight, g = x
    against 1/chi.
    """
    from .._analyses.comparison import compare_profiles

    docs = []
    for (entry, _), xv in zip(members, x):
        doc = entry.profile.to_dict()
        doc.pop("truncation", None)
        for cut in doc["cuts"]:
            cut.pop("discarded_weight", None)
        doc["discarded_weight"] = float(xv)
        docs.append(doc)
    result = compare_profiles(docs, series="bond", form=form)
    fit = result["extrapolation"]
    if fit is None:
        raise ValueError(f"no extrapolation: {result['extrapolation_note']}")
    middle = _middle_position(members[0][0].profile)
    if middle not in result["positions"]:
        raise ValueError(f"no common cut at the middle position {middle}")
    at = result["positions"].index(middle)
    return {"position": middle, "value": fit["entropies"][at], "slope": fit["slopes"][at] or 0.0,
            "error": fit["errors"][at], "method": fit["methods"][at], "form": form,
            "units": "nats", "converged": result["converged"], "verdict": result["verdict"]}


@filled
def convergence_figure(sources, *, against="weight", title=None, options=None,
                       **profiling):
    """Middle-cut entropy across a series against discarded weight or 1/χ, extrapolated.

    Sources are grouped by their ``series`` (from a batch; otherwise all are
    one group).  Each group is extrapolated to zero by the comparison's
    fit (:func:`bondscope._analyses.comparison.compare_profiles`): S0 + a w (1 + ln(1/w))
    against the weight w, linear in 1/χ; the left panel shows the fit reaching the axis, the
    right one the same points on a logarithmic axis against the limit.

    Parameters
    ----------
    sources : list of sources
        At least two per group, of one chain length.
    against : {"weight", "bond"}
        x axis: each run's largest discarded weight (the checkpoint
        attribute ``max_discarded_weight``, or a top-level profile field
        ``discarded_weight``), or 1/χ with χ its bond dimension (the
        ``bond_dim`` attribute, else the largest stored one).
    title : str, optional
    %(profiling)s

    %(figure_returns)s
        The limits are in ``fig.bondscope_limits``: per group ``series``,
        ``value`` (in the figure's unit), ``slope``, ``position``, ``verdict``.

    Raises
    ------
    ValueError
        Fewer than two sources in a group, a source without the x quantity,
        or equal x for all sources.
    """
    from .._analyses.extrapolation import correction

    measure = {"weight": _discarded, "bond": _inverse_bond}.get(against)
    if measure is None:
        raise ValueError(f"against must be 'weight' or 'bond', found {against!r}")
    entries = collect(sources, options=ProfileOptions.from_kwargs(options, **profiling))
    scales, base = same_base(entries)
    to_unit = 1.0 / math.log(base)
    groups = {}
    for entry, scale in zip(entries, scales):
        groups.setdefault(entry.meta.get("series"), []).append((entry, scale))
    xlabel = ("largest discarded weight ε" if against == "weight"
              else "inverse bond dimension 1/χ")
    limits, marks = [], []
    with style():
        fig = new_figure(9.0, 4.0)
        ax, zoom = fig.subplots(1, 2, sharey=True, width_ratios=(1.15, 1))
        for i, (name, members) in enumerate(groups.items()):
            if len(members) < 2:
                raise ValueError(f"series {visible(name) if name else '(all sources)'}: "
                                 f"convergence needs at least two sources, found {len(members)}")
            members.sort(key=lambda m: -measure(m[0]))
            x = np.array([measure(e) for e, _ in members])
            y = np.array([_middle(e) * k for e, k in members])
            form = "wlogw" if against == "weight" else "linear"
            limit = _limit(members, x, form)
            value, slope = limit["value"] * to_unit, limit["slope"] * to_unit
            look = curve_look(i, len(groups))
            grid = np.linspace(0.0, x.max() * 1.05, 200)
            ax.plot(grid, value + slope * correction(grid, form), color=look["color"], lw=1.0,
                    ls=(0, (4, 2)))
            ax.plot(x, y, ls="none", label=figure_text(name) if name else "middle-cut entropy",
                    **look)
            ax.plot([0.0], [value], marker="*", ms=12, mfc="white", mec=look["color"],
                    mew=1.3, ls="none", clip_on=False, label=f"extrapolated: {value:.6g}")
            zoom.axhline(value, color=look["color"], lw=0.9, ls=(0, (4, 2)))
            zoom.plot(x, y, ls="-", lw=0.8, **look)
            marks.append((members, x, y))
            limits.append({"series": name, **limit, "value": value, "slope": slope,
                           "error": limit["error"] * to_unit,
                           "units": entropy_unit(base)})
        ax.set_xlim(left=0.0)
        ax.set_xlabel(xlabel)
        ax.set_ylabel(f"S(N/2) [{entropy_unit(base)}]")
        ax.legend(loc="best")
        zoom.set_xscale("log")
        _log_ticks(zoom, np.concatenate([m[1] for m in marks]), against)
        zoom.margins(y=0.12)
        _run_labels(zoom, marks)
        zoom.set_xlabel(xlabel + " (log scale)")
        zoom.set_title("the approach to the limit", fontweight="normal", fontsize=9)
        fig.bondscope_limits = limits
        return titled(fig, ax, title, "Convergence of the middle-cut entropy")


def _log_ticks(ax, x, against):
    """Decade ticks when the runs span two decades or more, else a tick at each run
    (1/chi written as a fraction): never the crowded labels of minor log ticks."""
    from matplotlib.ticker import LogLocator, NullFormatter

    x = x[x > 0]
    ax.xaxis.set_minor_formatter(NullFormatter())
    if x.size == 0:
        return
    if np.log10(x.max() / x.min()) >= 2:
        ax.xaxis.set_major_locator(LogLocator(base=10, numticks=6))
        return
    ticks = np.unique(x)
    ax.set_xticks(ticks, [f"1/{round(1 / t):d}" if against == "bond" else f"{t:.2g}"
                          for t in ticks])
    ax.set_xticks([], minor=True)


def _run_labels(ax, marks):
    """χ (or the name) beside each run: above it, or below it in the top fifth of the
    panel, so no label leaves the axes."""
    low, high = ax.get_ylim()
    for members, x, y in marks:
        for (e, _), xv, yv in zip(members, x, y):
            above = (yv - low) < 0.8 * (high - low)
            ax.annotate(f"χ={e.max_bond}" if e.max_bond else e.text, (xv, yv),
                        xytext=(0, 7 if above else -7), textcoords="offset points",
                        ha="center", va="bottom" if above else "top", fontsize=7.5,
                        color=INK)


def _middle_position(prof):
    """The middle cut; a one-site unit cell's only bond (position 1)."""
    return max(prof.sites // 2, 1)


def _middle(entry):
    prof = entry.profile
    at = np.flatnonzero(prof.positions == _middle_position(prof))
    if at.size == 0:
        raise ValueError(f"{visible(entry.label)}: no cut at the middle position "
                         f"{_middle_position(prof)}")
    return float(prof.entropies[at[0]])


# the figure this kind draws (bondscope._figures._kinds)
DRAW = convergence_figure
