"""Sectors figure: the entanglement spectrum at one cut, levels grouped by charge."""

import numpy as np

from .._docs import filled
from .._errors import CheckpointError
from .._options import ProfileOptions
from ._gather import collect
from ._names import visible
from ._style import COLOURS, new_figure, style

__all__ = ["sectors_figure"]


def _charge_text(charge):
    return f"({','.join(map(str, charge))})" if isinstance(charge, list) else str(charge)


@filled
def sectors_figure(sources, *, cut=None, max_level=None, title=None, options=None,
                   **profiling):
    """Entanglement spectrum at one cut with its levels grouped by charge sector.

    Each level xi = -ln(p(q) lambda_q^2) of the left block's reduced density
    matrix is a short bar in the column of its sector's charge q (lambda_q
    normalised within the sector); degenerate levels across sectors, the
    signature of symmetry-protected phases, line up horizontally.  One panel
    per source.  Levels above a sector's resolution floor only.

    Parameters
    ----------
    sources : source or list of sources
        Profiles with charge sectors and spectra (``profile --charges Q
        --spectrum``), or checkpoints (profiled with ``charges=`` from the
        profiling options and all Schmidt values).
    cut : int, optional
        Cut position (default: the middle cut).
    max_level : float, optional
        Upper limit of the level axis.
    title : str, optional
    %(profiling)s

    %(figure_returns)s

    Raises
    ------
    CheckpointError
        A profile without charge sectors or without their Schmidt values.
    ValueError
        A cut outside 1..N-1.
    """
    entries = collect(sources, spectrum=True,
                      options=ProfileOptions.from_kwargs(options, **profiling))
    with style():
        fig = new_figure(max(5.2, 3.4 * len(entries) + 1.6), 4.4)
        axes = np.atleast_1d(fig.subplots(1, len(entries), sharey=True, squeeze=False)[0])
        for i, (ax, entry) in enumerate(zip(axes, entries)):
            position = _panel(ax, entry, cut, COLOURS[i % 7])
            ax.set_title(f"{entry.text}, cut {position}", fontweight="normal", fontsize=9)
            ax.set_xlabel("charge q of the left block")
        axes[0].set_ylabel("level ξ = −ln(p(q) λ²)")
        if max_level is not None:
            axes[0].set_ylim(top=max_level)
        if title is None:
            title = "Entanglement spectrum by charge sector"
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontsize=10, fontweight="bold")
        return fig


def _panel(ax, entry, cut, colour):
    prof = entry.profile
    cuts = {c["position"]: c for c in prof.cuts}
    position = cut if cut is not None else max(1, prof.sites // 2)
    if position not in cuts:
        raise ValueError(f"cut {position} is not one of 1..{prof.sites - 1}")
    sectors = cuts[position].get("sectors")
    if sectors is None or any("schmidt_values" not in s for s in sectors):
        raise CheckpointError(f"{visible(entry.origin or entry.label)}: cut {position} has "
                              "no charge sectors with Schmidt values; profile with "
                              "--charges Q --spectrum")
    labels = [f"{_charge_text(s['charge'])}\np={s['probability']:.2g}" for s in sectors]
    for x, sec in enumerate(sectors):
        values = np.asarray(sec["schmidt_values"], dtype=float)
        levels = -np.log(sec["probability"] * values[values > 0] ** 2)
        ax.hlines(levels, x - 0.3, x + 0.3, colors=colour, linewidth=1.6)
    ax.set_xticks(range(len(sectors)), labels, fontsize=8)
    ax.set_xlim(-0.6, len(sectors) - 0.4)
    return position


DRAW = sectors_figure
