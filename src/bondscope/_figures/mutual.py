"""Mutual-information figure: the matrix I(i, j), its decay I(r) with the fit, and s_i."""

from pathlib import Path

import numpy as np

from .._docs import filled
from .._document import parse_log_base
from .._options import ProfileOptions
from .._text import entropy_unit
from ._names import figure_text
from ._style import COLOUR_MAP, COLOURS, FAINT, INK, marker_size, new_figure, style

__all__ = ["mutual_figure", "one_result"]


def one_result(sources, options, profiling, settings):
    """The MutualInformation of the single source a site-resolved figure draws."""
    from .._analyses.mutual import as_mutual

    if isinstance(sources, (list, tuple)):
        if len(sources) != 1:
            raise ValueError(f"this figure draws one state; found {len(sources)} sources")
        sources = sources[0]
    return as_mutual(sources, ProfileOptions.from_kwargs(options, **profiling), **settings)


def _fit_curves(ax, decay):
    if not decay.get("window"):
        return
    x = np.linspace(*decay["window"], 200)
    looks = (("exponential", "correlation_length", COLOURS[1], "--"),
             ("power_law", "exponent", COLOURS[2], ":"))
    for key, param, colour, dash in looks:
        fit = decay.get(key)
        if not fit or fit.get(param) is None:
            continue
        if key == "exponential":
            y, text = fit["amplitude"] * np.exp(-x / fit[param]), f"exp, ξ = {fit[param]:.3g}"
        else:
            y, text = fit["amplitude"] * x ** -fit[param], f"power, η = {fit[param]:.3g}"
        chosen = decay["law"].replace(" ", "_") == key
        ax.plot(x, y, dash, color=colour, linewidth=1.6 if chosen else 1.0,
                label=text + (" (preferred)" if chosen else ""))


@filled
def mutual_figure(sources, *, select=0.1, title=None, options=None, **profiling):
    """I(i, j) as a map, its mean over pairs at distance r with the fits, and s_i per site.

    Parameters
    ----------
    sources : source
        One MutualInformation, its document or saved .json, or a checkpoint
        (computed with the profiling options, ``parity`` among them).
    select : float
        Selection threshold (fraction of the largest s_i), marked on the s_i panel.
    title : str, optional
    %(profiling)s

    %(figure_returns)s

    Notes
    -----
    Distances whose I(r) is at or below ten floors are drawn hollow: they are
    not resolved and are left out of the fit (see
    :func:`bondscope._analyses.decay.fit_decay`).
    """
    res = one_result(sources, options, profiling, {"select": select, "reorder": False})
    unit = entropy_unit(parse_log_base(res.log_base))
    n = res.sites
    with style():
        fig = new_figure(9.6, 4.4)
        grid = fig.add_gridspec(2, 2, width_ratios=(1.0, 1.15))
        ax_map = fig.add_subplot(grid[:, 0])
        ax_r, ax_s = fig.add_subplot(grid[0, 1]), fig.add_subplot(grid[1, 1])
        ax_map.grid(False)
        edges = np.arange(n + 1) + 0.5
        image = ax_map.pcolormesh(edges, edges, res.matrix, cmap=COLOUR_MAP, vmin=0.0)
        ax_map.set_aspect("equal")
        ax_map.invert_yaxis()
        ax_map.set_xlabel("site j")
        ax_map.set_ylabel("site i")
        bar = fig.colorbar(image, ax=ax_map, pad=0.02, shrink=0.85)
        bar.set_label(f"I(i, j) [{unit}]")
        rows = res.distances
        r = np.array([row["distance"] for row in rows], dtype=float)
        mean = np.array([row["mean"] for row in rows])
        resolved = mean > 10 * np.array([row["floor"] for row in rows])
        size = marker_size(len(r))
        ax_r.plot(r[resolved], mean[resolved], "o", color=COLOURS[0], markersize=size,
                  label="mean over pairs")
        if (~resolved).any():
            ax_r.plot(r[~resolved], np.maximum(mean[~resolved], 1e-300), "o",
                      markerfacecolor="none", color=FAINT, markersize=size,
                      label="below 10 floors")
        _fit_curves(ax_r, res.decay)
        if resolved.any():
            ax_r.set_yscale("log")
        ax_r.set_xlabel("distance r = |i - j|")
        ax_r.set_ylabel(f"I(r) [{unit}]")
        ax_r.set_title(f"Decay: {res.decay['law']}", loc="left")
        ax_r.legend(fontsize=7.5)
        sites = np.arange(1, n + 1)
        s = np.asarray(res.site_entropies)
        ax_s.plot(sites, s, "-", color=COLOURS[0], marker="s", markersize=size, label="s_i")
        chosen = np.array(res.selection["sites"], dtype=int)
        if chosen.size:
            ax_s.plot(chosen, s[chosen - 1], "o", markerfacecolor="none", color=COLOURS[1],
                      markersize=size + 3, label="selected")
        ax_s.axhline(res.selection["threshold"], color=INK, linestyle=":", linewidth=0.9,
                     label=f"{res.selection['threshold_fraction']:g} × max")
        ax_s.set_xlabel("site i")
        ax_s.set_ylabel(f"s_i [{unit}]")
        ax_s.xaxis.get_major_locator().set_params(integer=True)
        ax_s.legend(fontsize=7.5)
        kind = "fermionic" if res.parity else "site"
        name = figure_text(Path(res.source.split(":")[0]).name + res.source[
            len(res.source.split(":")[0]):])
        text = f"{kind.capitalize()} mutual information, {name}" \
            if title is None else title
        if text:
            fig.suptitle(text, x=0.01, ha="left", fontweight="bold", fontsize=10)
        return fig


# the figure this kind draws (bondscope._figures._kinds)
DRAW = mutual_figure
