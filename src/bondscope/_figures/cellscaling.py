"""Finite-entanglement scaling figure: cell entropy against ln xi with the fitted line."""

import numpy as np

from .._docs import filled
from .._options import ProfileOptions
from ._gather import collect
from ._names import visible
from ._style import INK, curve_look, new_figure, plus_minus, style, titled

__all__ = ["cellscaling_figure"]


@filled
def cellscaling_figure(sources, *, title=None, options=None, **profiling):
    """Entropy of unit cells against the log of their correlation length, with the fit.

    Left panel: each run's mean bond entropy S (nats; the bar spans its
    cell's bond entropies) against ln xi, and the line S = (c/6) ln xi + s0
    of :func:`bondscope._analyses.cellscaling.fit_cell_scaling`.  Right
    panel: xi against chi on log axes with the fitted power chi^kappa and
    (dotted) the power predicted from c.

    Parameters
    ----------
    sources : list of sources
        Unit-cell profiles or checkpoints of one model (at least two).
    title : str, optional
    %(profiling)s

    %(figure_returns)s
        The fit is in ``fig.bondscope_fit`` (the :class:`CellScaling` as a dict).

    Raises
    ------
    ValueError
        Fewer than two sources, or a source that is not a unit cell.
    """
    from .._analyses.cellscaling import fit_cell_scaling

    entries = collect(sources, options=ProfileOptions.from_kwargs(options, **profiling))
    res = fit_cell_scaling([e.profile for e in entries],
                           names=[visible(e.label) for e in entries])
    pts = res.points
    log_xi = np.log([q["correlation_length"] for q in pts])
    S = np.array([q["entropy"] for q in pts])
    chi = np.array([q["bond_dim"] for q in pts], dtype=float)
    look = curve_look(0)
    with style():
        fig = new_figure(9.0, 4.0)
        ax, right = fig.subplots(1, 2, width_ratios=(1.2, 1))
        ax.errorbar(log_xi, S, yerr=[q["entropy_spread"] for q in pts], ls="none", capsize=2,
                    label="unit cells", **look)
        grid = np.linspace(log_xi.min() - 0.2, log_xi.max() + 0.2, 20)
        c = res.central_charge
        ax.plot(grid, c / 6 * grid + res.constant, color=INK, lw=1.0, ls=(0, (4, 2)),
                label=f"S = (c/6) ln ξ + s0, c = {plus_minus(c, res.central_charge_error)}")
        for q, x, y in zip(pts, log_xi, S):
            ax.annotate(f"χ={q['bond_dim']}", (x, y), xytext=(0, 7), textcoords="offset points",
                        ha="center", fontsize=7.5, color=INK)
        ax.set_xlabel("ln ξ (correlation length in sites)")
        ax.set_ylabel("S [nats] (mean over the cell's bonds)")
        ax.legend(loc="upper left")
        right.loglog(chi, np.exp(log_xi), ls="none", **look)
        fit_chi = np.geomspace(chi.min() / 1.2, chi.max() * 1.2, 20)
        b = np.mean(log_xi - res.kappa * np.log(chi))
        right.loglog(fit_chi, np.exp(b) * fit_chi ** res.kappa, color=INK, lw=1.0,
                     ls=(0, (4, 2)), label=f"ξ ~ χ^κ, κ = {plus_minus(res.kappa, res.kappa_error)}")
        if res.kappa_predicted is not None:
            kp = res.kappa_predicted
            b_pred = np.mean(log_xi - kp * np.log(chi))
            right.loglog(fit_chi, np.exp(b_pred) * fit_chi ** kp, color=INK, lw=0.8,
                         ls=(0, (1, 2)),
                         label=f"κ from c: {plus_minus(kp, res.kappa_predicted_error)}")
        right.set_xlabel("bond dimension χ")
        right.set_ylabel("ξ [sites]")
        right.legend(loc="upper left")
        right.set_title(f"verdict: {res.verdict}", fontweight="normal", fontsize=9)
        fig.bondscope_fit = res.to_dict()
        return titled(fig, ax, title, "Finite-entanglement scaling")


# the figure this kind draws (bondscope._figures._kinds)
DRAW = cellscaling_figure
