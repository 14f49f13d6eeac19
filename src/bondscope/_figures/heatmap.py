"""Heatmap figure: S(l, t) over a time series of checkpoints."""

import numpy as np

from .._text import entropy_unit, natural_key
from .._docs import filled
from .._options import ProfileOptions
from ._gather import collect, same_base
from ._style import COLOUR_MAP, cut_label, new_figure, style, titled

__all__ = ["heatmap_figure"]


def _edges(centres):
    c = np.asarray(centres, dtype=float)
    if c.size == 1:
        return np.array([c[0] - 0.5, c[0] + 0.5])
    mid = (c[1:] + c[:-1]) / 2
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


@filled
def heatmap_figure(sources, *, title=None, options=None, **profiling):
    """S(l, t) over a time series of checkpoints as a colour map.

    Rows are ordered by each source's ``time`` (a top-level profile field, a
    summary column or a checkpoint attribute); when some source has no time
    the rows are the sources in natural name order, labelled by name, and
    the figure is titled "per checkpoint" rather than "in time".

    Parameters
    ----------
    sources : list of sources
        All of the same chain length.
    title : str, optional
    %(profiling)s

    %(figure_returns)s

    Raises
    ------
    ValueError
        Sources of different chain lengths, or repeated times.
    """
    entries = collect(sources, options=ProfileOptions.from_kwargs(options, **profiling))
    sites = {e.profile.sites for e in entries}
    if len(sites) > 1:
        raise ValueError(f"a heatmap needs chains of one length; found {sorted(sites)} sites "
                         f"across {len(entries)} sources")
    timed = all("time" in e.meta for e in entries)
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
    with style():
        fig = new_figure(6.4, 4.4)
        ax = fig.subplots()
        ax.grid(False)
        mesh = ax.pcolormesh(_edges(entries[0].profile.positions), _edges(times), grid,
                             cmap=COLOUR_MAP, shading="flat", vmin=0.0)
        bar = fig.colorbar(mesh, ax=ax, pad=0.02)
        bar.set_label(f"{'S(l, t)' if timed else 'S(l)'} [{entropy_unit(base)}]")
        cut_label(ax)
        unit = entries[0].meta.get("time_unit")
        if timed:
            ax.set_ylabel(f"time t [{unit}]" if unit else "time t")
        else:
            ax.set_ylabel("checkpoint (name order)")
            ax.set_yticks(times, [e.text for e in entries], fontsize=7.5)
        in_time = timed and len(entries) > 1
        return titled(fig, ax, title, "Entanglement entropy in time" if in_time
                      else "Entanglement entropy per checkpoint")


# the figure this kind draws (bondscope._figures._kinds)
DRAW = heatmap_figure
