"""Mixed-state figure: the physical state's S_2 and I_2 along the chain beside the cut
entropy of the stored form (purification before and after disentangling, or the
operator-space entropy of a density matrix)."""

import numpy as np

from .._docs import filled
from .._errors import CheckpointError
from .._options import ProfileOptions
from .._text import entropy_unit
from ._gather import collect
from ._names import visible
from ._style import curve_look, cut_label, marker_size, new_figure, style

__all__ = ["mixed_figure", "is_mixed"]

# physical panel: field, label, line style
_PHYSICAL = (("renyi2_left", "S_2(A)", "-"), ("mutual_information_2", "I_2(A:B)", "--"))


def is_mixed(profile):
    """True for a profile with the mixed-state fields (density-matrix or purified)."""
    return bool(profile.cuts) and "renyi2_left" in profile.cuts[0]


def _band(ax, x, y, err, colour):
    """A shaded error band where the error bound is visible at all."""
    if np.nanmax(err) > 1e-3 * max(np.nanmax(np.abs(y)), 1e-12):
        ax.fill_between(x, y - err, y + err, color=colour, alpha=0.2, linewidth=0)


@filled
def mixed_figure(sources, *, title=None, options=None, **profiling):
    """S_2 and I_2 of the physical state, and the stored form's cut entropy, along the chain.

    Parameters
    ----------
    sources : source or list of sources
        Profiles of density-matrix or purified checkpoints, or such
        checkpoints (profiled with the profiling options; add
        ``disentangle=True`` for the disentangled curve of a purification).
    title : str, optional
        Figure title (default "Mixed state along the chain"; "" for none).
    %(profiling)s

    %(figure_returns)s

    Raises
    ------
    CheckpointError
        A source is a pure state (its profile has no ``renyi2_left``).

    Notes
    -----
    Left panel: S_2(A) = -ln Tr rho_A^2 of the block left of each cut and the
    Rényi-2 mutual information I_2 = S_2(A) + S_2(B) - S_2(AB), with their
    error bounds shaded where visible.  Right panel: for a purification its
    own cut entropy (solid) and, when present, after disentangling (dashed),
    with I_2/2 dotted for scale (the disentangled value bounds the
    entanglement of purification, which is at least half the von Neumann
    mutual information; Terhal et al., J. Math. Phys. 43, 4286 (2002)); for
    a density matrix the operator-space entropy of rho/||rho||_2.
    """
    entries = collect(sources, options=ProfileOptions.from_kwargs(options, **profiling))
    with style():
        fig = new_figure(9.6, 4.0)
        physical, stored = fig.subplots(1, 2, sharex=True)
        for i, entry in enumerate(entries):
            prof = entry.profile
            if not is_mixed(prof):
                raise CheckpointError(f"{visible(entry.origin or entry.label)}: not a mixed "
                                      "state (no renyi2_left); the mixed figure needs a "
                                      "density-matrix or purified checkpoint")
            look = curve_look(i, len(entries))
            colour = look["color"]
            x = prof.positions
            size = marker_size(len(x))
            name = f" ({entry.text})" if len(entries) > 1 else ""
            for field, label, dash in _PHYSICAL:
                y = prof.column(field)
                err = prof.column("renyi2_error" if field == "renyi2_left"
                                  else "mutual_information_2_error")
                physical.plot(x, y, linestyle=dash, color=colour, marker=look["marker"],
                              markersize=size if dash == "-" else 0, label=label + name)
                _band(physical, x, y, err, colour)
            own = "purification S" if prof.kind == "purified" else "operator-space S"
            stored.plot(x, prof.entropies, color=colour, marker=look["marker"],
                        markersize=size, label=own + name)
            if "disentangled_entropy" in prof.cuts[0]:
                stored.plot(x, prof.column("disentangled_entropy"), linestyle="--",
                            color=colour, marker=look["marker"], markersize=size,
                            markerfacecolor="none", label="after disentangling" + name)
            if prof.kind == "purified":
                stored.plot(x, prof.column("mutual_information_2") / 2, linestyle=":",
                            color=colour, label="I_2/2" + name)
        unit = entropy_unit(entries[0].profile.log_base)
        physical.set_ylabel(f"physical state ({unit})")
        stored.set_ylabel(f"stored form's cut entropy ({unit})")
        for ax in (physical, stored):
            cut_label(ax)
            ax.legend(fontsize=8, frameon=False)
        physical.set_title("Rényi-2 of the physical state", fontsize=10)
        stored.set_title("cut entropy of the stored form", fontsize=10)
        if title is None:
            title = "Mixed state along the chain"
        if title:
            fig.suptitle(title)
        return fig


DRAW = mixed_figure
