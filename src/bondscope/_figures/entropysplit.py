"""Entropy-split figure: number and configurational entropy along the chain."""

from .._docs import filled
from .._errors import CheckpointError
from .._options import ProfileOptions
from .._text import entropy_unit
from ._gather import collect
from ._names import visible
from ._style import COLOURS, MARKERS, cut_label, marker_size, new_figure, style

__all__ = ["entropysplit_figure"]

# (field, label, line style) of the three curves per source
_CURVES = (("entropy", "S", "-"), ("configurational_entropy", "S_conf", "--"),
           ("number_entropy", "S_num", ":"))


@filled
def entropysplit_figure(sources, *, title=None, options=None, **profiling):
    """S = S_num + S_conf along the chain: total, configurational and number entropy.

    Parameters
    ----------
    sources : source or list of sources
        Profiles with charge sectors (``profile --charges Q``), or checkpoints
        (profiled with ``charges=`` from the profiling options).
    title : str, optional
    %(profiling)s

    %(figure_returns)s

    Raises
    ------
    CheckpointError
        A profile without charge sectors.

    Notes
    -----
    The split is exact at every cut (S_num = -sum p ln p over the sectors,
    S_conf = sum p S(q); Lukin et al., Science 364, 256 (2019)).
    """
    entries = collect(sources, options=ProfileOptions.from_kwargs(options, **profiling))
    with style():
        fig = new_figure(6.4, 4.2)
        ax = fig.subplots()
        for i, entry in enumerate(entries):
            prof = entry.profile
            if not prof.cuts or "number_entropy" not in prof.cuts[0]:
                raise CheckpointError(f"{visible(entry.origin or entry.label)}: no charge "
                                      "sectors; profile with --charges Q")
            x = [c["position"] for c in prof.cuts]
            size = marker_size(len(x))
            for field, label, dash in _CURVES:
                ax.plot(x, [c[field] for c in prof.cuts], linestyle=dash,
                        color=COLOURS[i % 7], marker=MARKERS[i % len(MARKERS)],
                        markersize=size if field == "entropy" else 0,
                        label=f"{label} ({entry.text})" if len(entries) > 1 else label)
        ax.set_ylabel(f"entropy ({entropy_unit(entries[0].profile.log_base)})")
        cut_label(ax)
        ax.legend(fontsize=8, frameon=False)
        if title is None:
            title = "Number and configurational entropy, S = S_num + S_conf"
        if title:
            ax.set_title(title)
        return fig


DRAW = entropysplit_figure
