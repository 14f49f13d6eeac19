"""Ordering figure: the entanglement profile before and after the suggested site order."""

import numpy as np

from .._docs import filled
from .._document import parse_log_base
from .._text import entropy_unit
from ._names import figure_text
from ._style import COLOURS, MARKERS, cut_label, marker_size, new_figure, style
from .mutual import one_result

__all__ = ["ordering_figure"]


@filled
def ordering_figure(sources, *, swap_bond_dim=None, title=None, options=None, **profiling):
    """S(l) and the bond budget per cut, in the current and in the suggested order.

    Parameters
    ----------
    sources : source
        One MutualInformation (computed with reordering), its saved .json,
        or a checkpoint.
    swap_bond_dim : int, optional
        Bond cap of the swap gates that reorder an MPS (default its largest bond).
    title : str, optional
        Figure title (default: the ordering costs; "" for none).
    %(profiling)s

    %(figure_returns)s

    Raises
    ------
    ValueError
        The document holds no reordered profile (the current order was kept,
        or it was computed with ``reorder=False``).
    """
    res = one_result(sources, options, profiling, {"swap_bond_dim": swap_bond_dim})
    r = res.reordered
    if not r:
        raise ValueError(f"{figure_text(res.source)}: no reordered profile "
                         f"({res.ordering['verdict']}: {res.ordering['reason']})")
    unit = entropy_unit(parse_log_base(res.log_base))
    with style():
        fig = new_figure(6.4, 5.2)
        ax_s, ax_b = fig.subplots(2, 1, sharex=True, height_ratios=(1.4, 1.0))
        cuts = np.arange(1, res.sites)
        size = marker_size(len(cuts))
        for k, (key, label) in enumerate((("before", "current order"),
                                          ("after", "suggested order"))):
            look = {"color": COLOURS[k], "marker": MARKERS[k], "markersize": size}
            ax_s.plot(cuts, r[key]["entropies"], label=label, **look)
            ax_b.step(cuts, r[key]["budget"], where="mid", color=COLOURS[k], label=label)
        ax_s.set_ylabel(f"S(l) [{unit}]")
        note = f"{r['method']}"
        if r["method"] == "swap gates":
            note += (f", chi <= {r['swap_bond_dim']}, infidelity <= "
                     f"{r['infidelity_bound']:.1e}")
        ax_s.legend(title=note, fontsize=8, title_fontsize=7.5)
        from matplotlib.ticker import ScalarFormatter

        ax_b.set_yscale("log", base=2)
        ax_b.yaxis.set_major_formatter(ScalarFormatter())
        ax_b.set_ylabel(f"chi for weight {r['after']['budget_target']:g}")
        cut_label(ax_b)
        text = (f"Profile before and after reordering, cost "
                f"{res.ordering['current_cost']:.3g} -> {res.ordering['suggested_cost']:.3g}") \
            if title is None else title
        if text:
            ax_s.set_title(text)
        return fig


# the figure this kind draws (bondscope._figures._kinds)
DRAW = ordering_figure
