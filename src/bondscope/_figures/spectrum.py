"""Spectrum figure: entanglement levels -ln lambda^2 at every cut."""

import numpy as np

from .._docs import filled
from .._options import ProfileOptions
from ._gather import collect
from ._style import FAINT, INK, curve_look, cut_label, new_figure, style

__all__ = ["spectrum_figure"]


@filled
def spectrum_figure(sources, *, tol=1e-6, max_level=None, title=None, options=None,
                    **profiling):
    """Entanglement spectrum: the levels -ln lambda^2 at every cut, one panel per source.

    Only Schmidt values above each cut's ``resolution_floor`` are drawn.
    Levels are grouped as in :func:`bondscope._analyses.diagnostics.spectrum_diagnostics`
    (within ``tol`` of a group's lowest); a group is one marker whose area
    grows with its degeneracy (the key lists the degeneracies found), and on
    charts of at most 24 cuts the degeneracy is also written beside the
    marker (right, or left where the right is taken), wherever it clears
    the label below it.

    Parameters
    ----------
    sources : source or list of sources
        Checkpoints are profiled with all Schmidt values; saved profiles must
        hold them (``bondscope profile --spectrum``).
    tol : float
        Levels closer than this (absolute, -ln lambda^2 units) count as degenerate.
    max_level : float, optional
        Upper limit of the level axis (``--max-level``); levels above it are
        not shown.
    title : str, optional
    %(profiling)s

    %(figure_returns)s

    Raises
    ------
    CheckpointError
        A saved profile without Schmidt values.
    ValueError
        ``max_level`` not a number > 0.
    """
    if max_level is not None and not (isinstance(max_level, (int, float)) and max_level > 0):
        raise ValueError(f"max_level (--max-level) must be a number > 0, found {max_level!r}")
    entries = collect(sources, spectrum=True,
                      options=ProfileOptions.from_kwargs(options, **profiling))
    with style():
        fig = new_figure(max(5.2, 3.4 * len(entries) + 1.6), 4.4)
        axes = np.atleast_1d(fig.subplots(1, len(entries), sharey=True, squeeze=False)[0])
        groups = [_groups(entry, tol) for entry in entries]
        top = max((float(y.max()) for _, y, _ in groups if y.size), default=1.0)
        for i, (ax, entry, (x, y, n)) in enumerate(zip(axes, entries, groups)):
            ax.scatter(x, y, s=_size(n), c=curve_look(i, len(entries))["color"], alpha=0.85,
                       linewidths=0.5, edgecolors="white", zorder=3)
            ax.set_title(entry.text, fontweight="normal", fontsize=9)
            cut_label(ax)
        axes[0].set_ylabel("level ξ = −ln λ²  (λ: Schmidt value)")
        if max_level is not None:
            axes[0].set_ylim(bottom=-0.02 * max_level, top=max_level)
        else:
            axes[0].set_ylim(bottom=-0.02 * top, top=1.04 * top)
        counts = sorted({int(v) for _, _, n in groups for v in n})
        _size_key(axes[-1], counts)
        if title is None:
            title = "Entanglement spectrum per cut"
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontsize=10, fontweight="bold")
        fig.draw_without_rendering()  # lays the figure out, so label spacing is in points
        for ax, (x, y, n) in zip(axes, groups):
            if len(set(x.tolist())) <= 24:
                _degeneracy_labels(ax, x, y, n)
        return fig


def _size(count):
    return 16.0 * np.asarray(count, dtype=float)


def _groups(entry, tol):
    """Positions, levels and degeneracies of the level groups above each cut's floor."""
    from .._analyses.diagnostics import spectrum_diagnostics

    prof = entry.profile
    longest = max(len(v) for v in prof.spectra)
    report = spectrum_diagnostics(prof, levels=max(longest, 1), tol=tol, weight_floor=0.0,
                                  accuracy=0.0)
    cuts = report["cuts"]
    x = np.concatenate([np.full(len(c["levels"]), c["position"]) for c in cuts])
    y = np.concatenate([c["levels"] for c in cuts]).astype(float)
    n = np.concatenate([c["degeneracies"] for c in cuts]).astype(int)
    return x, y, n


# the degeneracy beside a marker is written only where it clears the one below by this
_LABEL_GAP_POINTS = 8.0


def _degeneracy_labels(ax, x, y, n):
    """Write each group's degeneracy (> 1) beside its marker: to the right, else to the
    left where the right would crowd the label below; skipped where both would (the
    marker's area still shows it)."""
    bottom, top = ax.get_ylim()
    height = ax.get_window_extent().height * 72.0 / ax.figure.dpi
    gap = _LABEL_GAP_POINTS * (top - bottom) / height
    for position in np.unique(x):
        at = (x == position) & (n > 1) & (y <= top)
        last = {1: -np.inf, -1: -np.inf}  # the highest label so far on each side
        for yv, nv in sorted(zip(y[at], n[at])):
            side = next((k for k in (1, -1) if yv - last[k] >= gap), None)
            if side is None:
                continue
            ax.annotate(f"{int(nv)}", (position, yv), xytext=(6 * side, 0),
                        textcoords="offset points", ha="left" if side > 0 else "right",
                        va="center", fontsize=7, color=INK)
            last[side] = yv


def _size_key(ax, counts):
    """The marker-area key, with the degeneracies the data hold (at most five shown)."""
    if len(counts) > 5:
        picks = np.unique(np.round(np.linspace(0, len(counts) - 1, 5)).astype(int))
        counts = [counts[k] for k in picks]
    handles = [ax.scatter([], [], s=_size(k), c=FAINT, edgecolors="white") for k in counts]
    ax.legend(handles, [str(k) for k in counts], title="degeneracy", loc="upper left",
              bbox_to_anchor=(1.01, 1.0), fontsize=7.5, title_fontsize=7.5, labelspacing=1.0)


# the figure this kind draws (bondscope._figures._kinds)
DRAW = spectrum_figure
