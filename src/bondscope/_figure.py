"""Figures of entanglement profiles (matplotlib, headless).

Every public function takes *sources* -- profiles, saved profiles, checkpoints
or batch results directories (see :func:`bondscope._gather.collect`) -- and
returns a :class:`matplotlib.figure.Figure` built without pyplot, so nothing
opens a window, no global figure state is touched, and notebook users can
restyle the result.  :func:`plot` picks a figure by kind and can save it as
PNG, SVG or PDF (by the output's suffix).

Colours are the eight-colour palette of Okabe & Ito, "Color Universal Design"
(2008), safe for the common colour-vision deficiencies; each curve also has its
own marker so that figures read in greyscale.  Maps use matplotlib's
"cividis" (Nuñez, Anderton & Renslow, PLoS ONE 13, e0199239 (2018)), made for
readers with colour-vision deficiencies.

Kinds
-----
entropy      -- S(l) per source with the central-charge fit and a residual panel
spectrum     -- entanglement spectrum levels -ln lambda^2 at every cut
budget       -- bond dimension needed per cut for several target errors
heatmap      -- S(l, t) over a time series of checkpoints
convergence  -- middle-cut entropy against discarded weight or 1/chi, extrapolated
"""

import math
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from ._errors import CheckpointError
from ._gather import collect, natural_key, same_base
from ._text import entropy_unit

__all__ = ["OKABE_ITO", "KINDS", "plot", "save_figure", "figure_bytes", "entropy_figure",
           "spectrum_figure", "budget_figure", "heatmap_figure", "convergence_figure"]

# Okabe & Ito (2008), in the order curves take them; yellow last (weak on white)
OKABE_ITO = {
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "bluish green": "#009E73",
    "reddish purple": "#CC79A7",
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "black": "#000000",
    "yellow": "#F0E442",
}
_COLOURS = list(OKABE_ITO.values())
_MARKERS = ("o", "s", "^", "D", "v", "P", "X", "h")
_INK = "#222222"
_FAINT = "#8a8a8a"
_MAP = "cividis"
_FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}
# metadata that would make saved files differ from run to run
_STABLE_METADATA = {"png": {"Software": None}, "svg": {"Date": None},
                    "pdf": {"CreationDate": None, "ModDate": None}}

_RC = {
    "font.size": 9.5,
    "axes.titlesize": 10,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 9.5,
    "axes.edgecolor": _INK,
    "axes.labelcolor": _INK,
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": "#d9d9d9",
    "grid.linestyle": (0, (1, 3)),
    "grid.linewidth": 0.8,
    "xtick.color": _INK,
    "ytick.color": _INK,
    "xtick.direction": "out",
    "ytick.direction": "out",
    "legend.frameon": False,
    "legend.fontsize": 8.5,
    "lines.linewidth": 1.4,
    "lines.markersize": 4.5,
    "svg.fonttype": "none",
    # fixed salt: the SVG's clip-path ids no longer change from run to run
    "svg.hashsalt": "bondscope",
    "pdf.fonttype": 42,
}


@contextmanager
def _style():
    import matplotlib

    with matplotlib.rc_context(_RC):
        yield


def _figure(width=6.4, height=4.2):
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), layout="constrained")


_RENYI_DASHES = ((0, (3, 1, 1, 1)), (0, (1, 1.5)))


def _marker_size(n_points):
    return 4.5 if n_points <= 30 else 3.0


def _look(i):
    return dict(color=_COLOURS[i % 7], marker=_MARKERS[i % len(_MARKERS)])


def _cut_label(ax):
    ax.set_xlabel("cut position l (sites left of the cut)")
    ax.xaxis.get_major_locator().set_params(integer=True)


def _title(fig, ax, title, default):
    text = default if title is None else title
    if text:
        ax.set_title(text)
    return fig


# --- entropy --------------------------------------------------------------------------
def entropy_figure(sources, *, boundary=None, renyi=(), fit=True, title=None, **options):
    """S(l) against cut position, one curve per source, with the central-charge fit.

    Parameters
    ----------
    sources : source or list of sources
        Profiles, saved profiles, checkpoints or results directories.
    boundary : {"open", "periodic"}, optional
        Boundary condition of the chain, for the fit; by default each source's
        ``boundary`` (a checkpoint attribute or profile field), else "open".
    renyi : sequence of str or float
        Rényi orders to draw as well (dotted and dash-dotted), e.g. ``("2", "inf")``.
    fit : bool
        Draw the central-charge fit (c and its error in the legend) and the
        residual panel beneath.
    title : str, optional
        Figure title ("" for none).
    **options
        Profiling options for checkpoints (layout, ``base``).

    Returns
    -------
    matplotlib.figure.Figure
        Axes 0 holds the curves; with ``fit`` axes 1 holds the residuals
        S - S_fit over the fitted window (shaded).  The fits are in
        ``fig.bondscope_fits``: per source its ``label`` and the result of
        :func:`bondscope._scaling.fit_scaling` (``central_charge``,
        ``central_charge_error``, ``window``, ``residuals`` in nats, ...).

    Notes
    -----
    The fit is the analysis one (Calabrese & Cardy, J. Stat. Mech. P06002
    (2004), with the corrections of open chains); the dashed curve is its
    full model, corrections included, on the cuts it was fitted to.

    Raises
    ------
    ValueError
        A boundary other than "open" or "periodic".
    CheckpointError
        A Rényi order a saved profile does not hold.
    """
    from ._scaling import fit_scaling

    if boundary not in (None, "open", "periodic"):
        raise ValueError(f"boundary must be 'open' or 'periodic', found {boundary!r}")
    orders = [str(a) for a in renyi]
    entries = collect(sources, renyi=orders or None, **options)
    for entry in entries:
        missing = [a for a in orders if _order_key(a, entry.profile) is None]
        if missing:
            raise CheckpointError(
                f"{entry.origin or entry.label}: no Rényi entropy of order "
                f"{', '.join(missing)} in this profile (present: "
                f"{', '.join(entry.profile.renyi_orders) or 'none'}); rerun `bondscope profile "
                f"CHECKPOINT --renyi {','.join(orders)} -o PROFILE`")
    scales, base = same_base(entries)
    unit = entropy_unit(base)
    with _style():
        fig = _figure(9.0, 5.0 if fit else 4.0)
        if fit:
            ax, res = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1))
        else:
            ax, res = fig.subplots(), None
        fits, laws, window = [], [], (np.inf, -np.inf)
        for i, (entry, scale) in enumerate(zip(entries, scales)):
            prof, look = entry.profile, _look(i)
            x, s = prof.positions, prof.entropies * scale
            label = entry.label
            if fit:
                kind = boundary or entry.meta.get("boundary") or "open"
                result = fit_scaling(prof, boundary=kind)
                fits.append({"label": entry.label, **result})
                at = np.asarray(result["positions"])
                resid = np.asarray(result["residuals"]) / math.log(base)
                model = s[np.searchsorted(x, at)] - resid
                label = (f"{entry.label}: c = "
                         f"{_pm(result['central_charge'], result['central_charge_error'])}")
                ax.plot(at, model, color=look["color"], lw=1.0, ls=(0, (4, 2)), zorder=3)
                res.plot(at, resid, ls="none", ms=3.0, **look)
                laws += [kind] if kind not in laws else []
                window = (min(window[0], at[0]), max(window[1], at[-1]))
            ax.plot(x, s, lw=0.9, label=label, ms=_marker_size(len(x)), **look)
            for k, a in enumerate(orders):
                ax.plot(x, prof.renyi(_order_key(a, prof)) * scale, color=look["color"],
                        lw=0.9, ls=_RENYI_DASHES[k % 2])
        for k, a in enumerate(orders):
            ax.plot([], [], color=_FAINT, lw=0.9, ls=_RENYI_DASHES[k % 2],
                    label=f"Rényi $S_{{{_order_text(a)}}}$")
        ax.set_ylabel(f"S(l) [{unit}]")
        if fit:
            for kind in laws:
                ax.plot([], [], color=_FAINT, lw=1.0, ls=(0, (4, 2)),
                        label=f"fit, {kind} chain:\n{_law(kind)}")
            res.axhline(0.0, color=_FAINT, lw=0.8)
            for a, key in ((ax, "cuts fitted"), (res, None)):
                a.axvspan(window[0] - 0.5, window[1] + 0.5, color="#efefef", lw=0, zorder=0,
                          label=key)
            res.set_ylabel(f"S − fit [{unit}]")
            _cut_label(res)
        else:
            _cut_label(ax)
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0))
        fig.bondscope_fits = fits
        return _title(fig, ax, title, "Entanglement entropy across the chain")


def _pm(value, error):
    """'0.501 ± 0.003' with the value rounded to the error's first digit (two if it is 1)."""
    if error is None or not np.isfinite(error) or error <= 0:
        return f"{value:.4g}"
    digits = max(0, -int(math.floor(math.log10(error))) + (1 if f"{error:e}"[0] == "1" else 0))
    return f"{value:.{digits}f} ± {error:.{digits}f}"


def _law(boundary):
    return ("S = (c/6) ln[(2N/π) sin(πl/N)] + s₀\n   + parity and 1/x corrections"
            if boundary == "open" else "S = (c/3) ln[(N/π) sin(πl/N)] + s₀")


def _order_key(order, prof):
    """The profile's key for a Rényi order ("2" matches "2.0"), or None."""
    for key in prof.renyi_orders:
        if key == order or (_number(key) is not None and _number(key) == _number(order)):
            return key
    return None


def _number(text):
    try:
        return float(text)
    except ValueError:
        return None


def _order_text(order):
    return r"\infty" if str(order).lower() == "inf" else str(order)


# --- spectrum -------------------------------------------------------------------------
def spectrum_figure(sources, *, tol=1e-6, max_level=None, title=None, **options):
    """Entanglement spectrum: the levels -ln lambda^2 at every cut, one panel per source.

    Only Schmidt values above each cut's ``resolution_floor`` are drawn.
    Levels are grouped as in :func:`bondscope._diagnostics.spectrum_diagnostics`
    (within ``tol`` of a group's lowest); a group is one marker whose area
    grows with its degeneracy, and on charts of at most 24 cuts the
    degeneracy is also written beside the marker.

    Parameters
    ----------
    sources : source or list of sources
        Checkpoints are profiled with all Schmidt values; saved profiles must
        hold them (``bondscope profile --spectrum``).
    tol : float
        Levels closer than this (absolute, -ln lambda^2 units) count as degenerate.
    max_level : float, optional
        Upper limit of the level axis.
    title : str, optional
    **options
        Profiling options for checkpoints.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    CheckpointError
        A saved profile without Schmidt values.
    """
    entries = collect(sources, spectrum=True, **options)
    with _style():
        fig = _figure(max(5.2, 3.4 * len(entries) + 1.6), 4.4)
        axes = np.atleast_1d(fig.subplots(1, len(entries), sharey=True, squeeze=False)[0])
        top = 0.0
        for i, (ax, entry) in enumerate(zip(axes, entries)):
            top = max(top, _spectrum_panel(ax, entry, _COLOURS[i % 7], tol))
            ax.set_title(entry.label, fontweight="normal", fontsize=9)
            _cut_label(ax)
        axes[0].set_ylabel("level ξ = −ln λ²  (λ: Schmidt value)")
        if max_level is not None:
            axes[0].set_ylim(top=max_level)
        else:
            axes[0].set_ylim(bottom=-0.02 * top, top=1.04 * top)
        _size_key(axes[-1])
        if title is None:
            title = "Entanglement spectrum per cut"
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontsize=10, fontweight="bold")
        return fig


def _size(count):
    return 20.0 * count


def _spectrum_panel(ax, entry, colour, tol):
    from ._diagnostics import spectrum_diagnostics

    prof = entry.profile
    longest = max(len(v) for v in prof.spectra)
    report = spectrum_diagnostics(prof, levels=max(longest, 1), tol=tol, weight_floor=0.0)
    cuts = report["cuts"]
    x = np.concatenate([np.full(len(c["levels"]), c["position"]) for c in cuts])
    y = np.concatenate([c["levels"] for c in cuts])
    n = np.concatenate([c["degeneracies"] for c in cuts])
    ax.scatter(x, y, s=_size(n), c=colour, alpha=0.85, linewidths=0.5, edgecolors="white",
               zorder=3)
    if len(cuts) <= 24:
        for xv, yv, nv in zip(x[n > 1], y[n > 1], n[n > 1]):
            ax.annotate(f"{int(nv)}", (xv, yv), xytext=(5, 0), textcoords="offset points",
                        va="center", fontsize=7, color=_INK)
    return float(y.max()) if y.size else 0.0


def _size_key(ax):
    handles = [ax.scatter([], [], s=_size(n), c=_FAINT, edgecolors="white") for n in (1, 2, 4)]
    ax.legend(handles, ["1", "2", "4"], title="degeneracy", loc="upper left",
              bbox_to_anchor=(1.01, 1.0), fontsize=7.5, title_fontsize=7.5, labelspacing=1.0)


# --- heatmap --------------------------------------------------------------------------
def _edges(centres):
    c = np.asarray(centres, dtype=float)
    if c.size == 1:
        return np.array([c[0] - 0.5, c[0] + 0.5])
    mid = (c[1:] + c[:-1]) / 2
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


def heatmap_figure(sources, *, title=None, **options):
    """S(l, t) over a time series of checkpoints as a colour map.

    Rows are ordered by each source's ``time`` (a top-level profile field, a
    summary column or a checkpoint attribute); when some source has no time
    the rows are the sources in natural name order, numbered 0, 1, ...

    Parameters
    ----------
    sources : list of sources
        All of the same chain length.
    title : str, optional
    **options
        Profiling options for checkpoints.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ValueError
        Sources of different chain lengths, or repeated times.
    """
    entries = collect(sources, **options)
    sites = {e.profile.sites for e in entries}
    if len(sites) > 1:
        raise ValueError(f"a heatmap needs chains of one length; found {sorted(sites)} sites "
                         f"across {len(entries)} sources")
    timed = all(isinstance(e.meta.get("time"), (int, float)) for e in entries)
    if timed:
        entries.sort(key=lambda e: float(e.meta["time"]))
        times = np.array([float(e.meta["time"]) for e in entries])
        if np.any(np.diff(times) == 0):
            raise ValueError(f"repeated times in the series: {times.tolist()}")
    else:
        entries.sort(key=lambda e: natural_key(e.label))
        times = np.arange(len(entries), dtype=float)
    scales, base = same_base(entries)
    grid = np.array([e.profile.entropies * k for e, k in zip(entries, scales)])
    with _style():
        fig = _figure(6.4, 4.4)
        ax = fig.subplots()
        ax.grid(False)
        mesh = ax.pcolormesh(_edges(entries[0].profile.positions), _edges(times), grid,
                             cmap=_MAP, shading="flat", vmin=0.0)
        bar = fig.colorbar(mesh, ax=ax, pad=0.02)
        bar.set_label(f"S(l, t) [{entropy_unit(base)}]")
        _cut_label(ax)
        unit = entries[0].meta.get("time_unit")
        if timed:
            ax.set_ylabel(f"time t [{unit}]" if unit else "time t")
        else:
            ax.set_ylabel("checkpoint (name order)")
            ax.set_yticks(times, [e.label for e in entries], fontsize=7.5)
        return _title(fig, ax, title, "Entanglement entropy in time")


# --- budget ---------------------------------------------------------------------------
def _target_text(eps):
    mant, exp = f"{eps:.0e}".split("e")
    exp = int(exp)
    return f"ε = 10$^{{{exp}}}$" if mant == "1" else f"ε = {mant}·10$^{{{exp}}}$"


_SPLITS = {"cut": "target per cut", "equal": "whole-state target, equal split",
           "pooled": "whole-state target, pooled"}


def budget_figure(sources, *, targets=(1e-4, 1e-6, 1e-8), split="cut", title=None,
                  **options):
    """Bond dimension needed at each cut to meet target errors, beside the stored ones.

    One panel per source.  For each target error the curve gives, per cut, the
    smallest bond dimension of the analysis budget
    (:func:`bondscope._budget.bond_budget`); the grey band is the bond
    dimension stored.  Each legend entry also gives the budget's largest χ
    and its memory against the stored chain.

    Parameters
    ----------
    sources : source or list of sources
        Checkpoints are profiled with all Schmidt values; saved profiles must hold them.
    targets : sequence of float
        Target errors in (0, 1).
    split : {"cut", "equal", "pooled"}
        "cut": each target is the discarded weight allowed at every cut;
        "equal", "pooled": each target bounds the whole state's truncation
        error (the sum of the per-cut discarded weights), spread equally
        over the cuts or pooled across them.
    title : str, optional
    **options
        Profiling options for checkpoints.

    Returns
    -------
    matplotlib.figure.Figure
        The budgets are in ``fig.bondscope_budgets`` (per source, a list of
        the :func:`~bondscope._budget.bond_budget` results, one per target).

    Raises
    ------
    CheckpointError
        A saved profile without Schmidt values.
    ValueError
        A target outside (0, 1), or an unknown split.
    """
    from matplotlib.ticker import FuncFormatter

    targets = sorted({float(t) for t in targets}, reverse=True)
    bad = [t for t in targets if not 0 < t < 1]
    if not targets or bad:
        raise ValueError(f"target errors must lie in (0, 1), found {bad or 'none'}")
    if split not in _SPLITS:
        raise ValueError(f"split must be one of {', '.join(_SPLITS)}, found {split!r}")
    entries = collect(sources, spectrum=True, **options)
    from ._budget import bond_budget

    def budget(prof, eps):
        if split == "cut":
            return bond_budget(prof, target=eps)
        return bond_budget(prof, total=eps, split=split)

    budgets = []
    with _style():
        fig = _figure(max(6.4, 4.0 * len(entries) + 2.6), 4.2)
        axes = np.atleast_1d(fig.subplots(1, len(entries), sharey=True, squeeze=False)[0])
        for ax, entry in zip(axes, entries):
            prof = entry.profile
            x = prof.positions
            stored = prof.bond_dimensions
            ax.fill_between(x, 1, stored, step="mid", color="#e6e6e6", lw=0)
            ax.step(x, stored, where="mid", color=_FAINT, lw=1.2,
                    label=f"stored χ (max {int(stored.max())})")
            found = [budget(prof, eps) for eps in targets]
            for i, (eps, result) in enumerate(zip(targets, found)):
                need = [c["bond_dimension"] for c in result["cuts"]]
                ax.plot([c["position"] for c in result["cuts"]], need, lw=1.2,
                        ms=_marker_size(len(x)), drawstyle="steps-mid",
                        label=_budget_text(eps, result), **_look(i))
            budgets.append({"label": entry.label, "budgets": found})
            ax.set_yscale("log", base=2)
            ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
            ax.set_ylim(bottom=1)
            ax.set_title(entry.label, fontweight="normal", fontsize=9)
            _cut_label(ax)
            ax.legend(title=_SPLITS[split], title_fontsize=8, fontsize=7.5, loc="lower center")
        axes[0].set_ylabel("bond dimension χ")
        if title is None:
            title = "Bond dimension needed per cut"
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontsize=10, fontweight="bold")
        fig.bondscope_budgets = budgets
        return fig


def _budget_text(eps, result):
    text = f"{_target_text(eps)}: max χ {result['max_bond_dimension']}"
    if result.get("memory_ratio") is not None:
        text += f", memory ×{result['memory_ratio']:.2g}"
    return text


# --- convergence ----------------------------------------------------------------------
def _discarded(entry):
    value = entry.meta.get("max_discarded_weight", entry.profile.get("discarded_weight"))
    if not isinstance(value, (int, float)):
        raise ValueError(f"{entry.label}: the run's discarded weight is unknown (no "
                         "'max_discarded_weight' attribute in its checkpoint); plot against "
                         "1/chi instead (--against bond)")
    return float(value)


def _inverse_bond(entry):
    chi = entry.max_bond
    if not chi:
        raise ValueError(f"{entry.label}: no bond dimension known; use against='weight'")
    return 1.0 / chi


def _limit(members, x):
    """The comparison's extrapolation S = S0 + a x at the middle cut, in nats.

    Each profile goes to :func:`bondscope._comparison.compare_profiles` with
    ``x`` as its run-level ``discarded_weight`` (and its own truncation
    fields left out), so the extrapolation is linear in the plotted quantity.
    """
    from ._comparison import compare_profiles

    docs = []
    for (entry, _), xv in zip(members, x):
        doc = entry.profile.to_dict()
        doc.pop("truncation", None)
        for cut in doc["cuts"]:
            cut.pop("discarded_weight", None)
        doc["discarded_weight"] = float(xv)
        docs.append(doc)
    result = compare_profiles(docs, series="bond")
    fit = result["extrapolation"]
    if fit is None:
        raise ValueError(f"no extrapolation: {result['extrapolation_note']}")
    middle = members[0][0].profile.sites // 2
    if middle not in result["positions"]:
        raise ValueError(f"no common cut at the middle position {middle}")
    at = result["positions"].index(middle)
    return {"position": middle, "value": fit["entropies"][at], "slope": fit["slopes"][at],
            "units": "nats", "converged": result["converged"], "verdict": result["verdict"]}


def convergence_figure(sources, *, against="weight", title=None, **options):
    """Middle-cut entropy across a series against discarded weight or 1/χ, extrapolated.

    Sources are grouped by their ``series`` (from a batch; otherwise all are
    one group).  Each group is extrapolated to zero by the comparison's
    linear fit (:func:`bondscope._comparison.compare_profiles`) in the
    plotted quantity; the left panel shows the fit reaching the axis, the
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
    **options
        Profiling options for checkpoints.

    Returns
    -------
    matplotlib.figure.Figure
        The limits are in ``fig.bondscope_limits``: per group ``series``,
        ``value`` (in the figure's unit), ``slope``, ``position``, ``verdict``.

    Raises
    ------
    ValueError
        Fewer than two sources in a group, a source without the x quantity,
        or equal x for all sources.
    """
    measure = {"weight": _discarded, "bond": _inverse_bond}.get(against)
    if measure is None:
        raise ValueError(f"against must be 'weight' or 'bond', found {against!r}")
    entries = collect(sources, **options)
    scales, base = same_base(entries)
    to_unit = 1.0 / math.log(base)
    groups = {}
    for entry, scale in zip(entries, scales):
        groups.setdefault(entry.meta.get("series"), []).append((entry, scale))
    xlabel = ("largest discarded weight ε" if against == "weight"
              else "inverse bond dimension 1/χ")
    limits = []
    with _style():
        fig = _figure(9.0, 4.0)
        ax, zoom = fig.subplots(1, 2, sharey=True, width_ratios=(1.15, 1))
        for i, (name, members) in enumerate(groups.items()):
            if len(members) < 2:
                raise ValueError(f"series {name or '(all sources)'}: convergence needs at "
                                 f"least two sources, found {len(members)}")
            members.sort(key=lambda m: -measure(m[0]))
            x = np.array([measure(e) for e, _ in members])
            y = np.array([_middle(e) * k for e, k in members])
            limit = _limit(members, x)
            value, slope = limit["value"] * to_unit, limit["slope"] * to_unit
            look = _look(i)
            grid = np.linspace(0.0, x.max() * 1.05, 50)
            ax.plot(grid, value + slope * grid, color=look["color"], lw=1.0, ls=(0, (4, 2)))
            ax.plot(x, y, ls="none", label=name or "middle-cut entropy", **look)
            ax.plot([0.0], [value], marker="*", ms=12, mfc="white", mec=look["color"],
                    mew=1.3, ls="none", clip_on=False, label=f"extrapolated: {value:.6g}")
            zoom.axhline(value, color=look["color"], lw=0.9, ls=(0, (4, 2)))
            zoom.plot(x, y, ls="-", lw=0.8, **look)
            for (e, _), xv, yv in zip(members, x, y):
                chi = e.max_bond
                zoom.annotate(f"χ={chi}" if chi else e.label, (xv, yv), xytext=(0, 7),
                              textcoords="offset points", ha="center", fontsize=7.5,
                              color=_INK)
            limits.append({"series": name, **limit, "value": value, "slope": slope,
                           "units": entropy_unit(base)})
        ax.set_xlim(left=0.0)
        ax.set_xlabel(xlabel)
        ax.set_ylabel(f"S(N/2) [{entropy_unit(base)}]")
        ax.legend(loc="best")
        zoom.set_xscale("log")
        zoom.set_xlabel(xlabel + " (log scale)")
        zoom.set_title("the approach to the limit", fontweight="normal", fontsize=9)
        fig.bondscope_limits = limits
        return _title(fig, ax, title, "Convergence of the middle-cut entropy")


def _middle(entry):
    prof = entry.profile
    at = np.flatnonzero(prof.positions == prof.sites // 2)
    if at.size == 0:
        raise ValueError(f"{entry.label}: no cut at the middle position {prof.sites // 2}")
    return float(prof.entropies[at[0]])


# --- saving and dispatch --------------------------------------------------------------
def figure_bytes(fig, fmt="png", *, dpi=150):
    """The figure encoded as PNG, SVG or PDF, in bondscope's style and without timestamps."""
    import io

    buf = io.BytesIO()
    with _style():
        fig.savefig(buf, format=fmt, dpi=dpi, facecolor="white",
                    metadata=_STABLE_METADATA[fmt])
    return buf.getvalue()


def save_figure(fig, output, *, dpi=150):
    """Write a figure as PNG, SVG or PDF, chosen by the suffix of ``output``.

    The file is written whole or not at all, and carries no timestamp, so the
    same data give the same bytes.

    Returns
    -------
    Path

    Raises
    ------
    ValueError
        A suffix other than .png, .svg or .pdf.
    """
    from ._document import atomic_write

    path = Path(output)
    fmt = _FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise ValueError(f"{path}: cannot tell the figure format from {path.suffix or 'no'} "
                         f"suffix; use one of {', '.join(_FORMATS)}")
    data = figure_bytes(fig, fmt, dpi=dpi)
    return atomic_write(path, lambda tmp: Path(tmp).write_bytes(data))


KINDS = {
    "entropy": entropy_figure,
    "spectrum": spectrum_figure,
    "budget": budget_figure,
    "heatmap": heatmap_figure,
    "convergence": convergence_figure,
}


def plot(sources, kind="entropy", output=None, **options):
    """Draw one kind of figure and optionally save it.

    Parameters
    ----------
    sources : source or list of sources
        Profiles, saved profiles, checkpoints or batch results directories.
    kind : {"entropy", "spectrum", "budget", "heatmap", "convergence"}
    output : str or Path, optional
        Save as PNG, SVG or PDF by suffix.
    **options
        Keyword options of the chosen figure function (e.g. ``boundary``,
        ``renyi``, ``targets``, ``against``) and profiling options for checkpoints.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ValueError
        An unknown kind, or an output suffix that is not .png, .svg or .pdf.
    """
    draw = KINDS.get(kind)
    if draw is None:
        raise ValueError(f"unknown figure kind {kind!r}; choose one of {', '.join(KINDS)}")
    if output is not None and Path(output).suffix.lower() not in _FORMATS:
        raise ValueError(f"{output}: use a .png, .svg or .pdf name for the figure")
    fig = draw(sources, **options)
    if output is not None:
        save_figure(fig, output)
    return fig
