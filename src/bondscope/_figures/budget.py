"""Budget figure: the bond dimension needed per cut for target errors."""

import math

import numpy as np

from .._docs import filled
from .._options import ProfileOptions
from ._gather import collect
from ._style import FAINT, cut_label, curve_look, marker_size, new_figure, style

__all__ = ["budget_figure"]


def _target_text(eps):
    mant, exp = f"{eps:.0e}".split("e")
    exp = int(exp)
    return f"ε = 10$^{{{exp}}}$" if mant == "1" else f"ε = {mant}·10$^{{{exp}}}$"


_SPLITS = {"cut": "target per cut", "equal": "whole-state target, equal split",
           "pooled": "whole-state target, pooled"}


@filled
def budget_figure(sources, *, targets=(1e-4, 1e-6, 1e-8), split="cut", title=None,
                  options=None, **profiling):
    """Bond dimension needed at each cut to meet target errors, beside the stored ones.

    One panel per source.  For each target error the curve gives, per cut, the
    smallest bond dimension of the analysis budget
    (:func:`bondscope._analyses.budget.bond_budget`); the grey band is the bond
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
    %(profiling)s

    %(figure_returns)s
        The budgets are in ``fig.bondscope_budgets`` (per source, a list of
        the :func:`~bondscope._analyses.budget.bond_budget` results, one per target).

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
    entries = collect(sources, spectrum=True,
                      options=ProfileOptions.from_kwargs(options, **profiling))
    from .._analyses.budget import bond_budget

    def budget(prof, eps):
        if split == "cut":
            return bond_budget(prof, target=eps)
        return bond_budget(prof, total=eps, split=split)

    budgets, top = [], 1
    with style():
        fig = new_figure(max(6.4, 4.0 * len(entries) + 2.6), 4.2)
        axes = np.atleast_1d(fig.subplots(1, len(entries), sharey=True, squeeze=False)[0])
        for ax, entry in zip(axes, entries):
            prof = entry.profile
            x = prof.positions
            stored = prof.bond_dimensions
            ax.fill_between(x, 1, stored, step="mid", color="#e6e6e6", lw=0)
            ax.step(x, stored, where="mid", color=FAINT, lw=1.2,
                    label=f"stored χ (max {int(stored.max())})")
            found = [budget(prof, eps) for eps in targets]
            for i, (eps, result) in enumerate(zip(targets, found)):
                need = [c["bond_dimension"] for c in result["cuts"]]
                ax.plot([c["position"] for c in result["cuts"]], need, lw=1.2,
                        ms=marker_size(len(x)), drawstyle="steps-mid",
                        label=_budget_text(eps, result), **curve_look(i, len(targets)))
                top = max([top, *need])
            budgets.append({"label": entry.label, "budgets": found})
            ax.set_yscale("log", base=2)
            ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
            top = max(top, int(stored.max()))
            ax.set_title(entry.text, fontweight="normal", fontsize=9)
            cut_label(ax)
            ax.legend(title=_SPLITS[split], title_fontsize=8, fontsize=7.5, loc="lower center")
        # one scale for every panel, up to the largest chi of any (shared axes)
        axes[0].set_ylim(1, 2 ** (math.log2(max(top, 2)) + 0.35))
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


# the figure this kind draws (bondscope._figures._kinds)
DRAW = budget_figure
