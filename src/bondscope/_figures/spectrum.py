"""Spectrum figure: entanglement levels -ln lambda^2 at every cut."""

import numpy as np

from .._docs import filled
from .._options import ProfileOptions
from ._gather import collect
from ._style import COLOURS, FAINT, INK, cut_label, new_figure, style

__all__ = ["spectrum_figure"]


@filled
def spectrum_figure(sources, *, tol=1e-6, max_level=None, title=None, options=None,
                    **profiling):
    """Entanglement spectrum: the levels -ln lambda^2 at every cut, one panel per source.

    Only Schmidt values above each cut's ``resolution_floor`` are drawn.
    Levels are grouped as in :func:`bondscope._analyses.diagnostics.spectrum_diagnostics`
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
    %(profiling)s

    %(figure_returns)s

    Raises
    ------
    CheckpointError
        A saved profile without Schmidt values.
    """
    entries = collect(sources, spectrum=True,
                      options=ProfileOptions.from_kwargs(options, **profiling))
    with style():
        fig = new_figure(max(5.2, 3.4 * len(entries) + 1.6), 4.4)
        axes = np.atleast_1d(fig.subplots(1, len(entries), sharey=True, squeeze=False)[0])
        top = 0.0
        for i, (ax, entry) in enumerate(zip(axes, entries)):
            top = max(top, _spectrum_panel(ax, entry, COLOURS[i % 7], tol))
            ax.set_title(entry.label, fontweight="normal", fontsize=9)
            cut_label(ax)
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
    from .._analyses.diagnostics import spectrum_diagnostics

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
                        va="center", fontsize=7, color=INK)
    return float(y.max()) if y.size else 0.0


def _size_key(ax):
    handles = [ax.scatter([], [], s=_size(n), c=FAINT, edgecolors="white") for n in (1, 2, 4)]
    ax.legend(handles, ["1", "2", "4"], title="degeneracy", loc="upper left",
              bbox_to_anchor=(1.01, 1.0), fontsize=7.5, title_fontsize=7.5, labelspacing=1.0)


# the figure this kind draws (bondscope._figures._kinds)
DRAW = spectrum_figure
