"""The house style of bondscope's figures, and how they are saved.

Colours are the eight-colour palette of Okabe & Ito, "Color Universal Design"
(2008), safe for the common colour-vision deficiencies; each curve also has its
own marker so that figures read in greyscale.  Maps use matplotlib's
"cividis" (Nuñez, Anderton & Renslow, PLoS ONE 13, e0199239 (2018)), made for
readers with colour-vision deficiencies.  Figures are built without pyplot, so
nothing opens a window and no global figure state is touched.
"""

import math
from contextlib import contextmanager
from pathlib import Path

import numpy as np

__all__ = ["OKABE_ITO", "COLOURS", "MARKERS", "INK", "FAINT", "COLOUR_MAP", "FORMATS",
           "RENYI_DASHES", "style", "new_figure", "marker_size", "curve_look", "cut_label",
           "titled", "plus_minus", "figure_bytes", "save_figure"]

OKABE_ITO = {
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "bluish green": "#009E73",
    "reddish purple": "#CC79A7",
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "black": "#000000",
    "yellow": "#F0E442",
}
COLOURS = list(OKABE_ITO.values())
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "h")
INK = "#222222"
FAINT = "#8a8a8a"
COLOUR_MAP = "cividis"
FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}
# metadata that would make saved files differ from run to run
_STABLE_METADATA = {"png": {"Software": None}, "svg": {"Date": None},
                    "pdf": {"CreationDate": None, "ModDate": None}}

_RC = {
    "font.size": 9.5,
    "axes.titlesize": 10,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 9.5,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": "#d9d9d9",
    "grid.linestyle": (0, (1, 3)),
    "grid.linewidth": 0.8,
    "xtick.color": INK,
    "ytick.color": INK,
    "xtick.direction": "out",
    "ytick.direction": "out",
    "legend.frameon": False,
    "legend.fontsize": 8.5,
    "lines.linewidth": 1.4,
    "lines.markersize": 4.5,
    "svg.fonttype": "none",
    # fixed salt: the SVG's clip-path ids no longer change from run to run
    "svg.hashsalt": "bondscope",
    "pdf.fonttype": 42,
}


@contextmanager
def style():
    import matplotlib

    with matplotlib.rc_context(_RC):
        yield


def new_figure(width=6.4, height=4.2):
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), layout="constrained")


RENYI_DASHES = ((0, (3, 1, 1, 1)), (0, (1, 1.5)))


def marker_size(n_points):
    return 4.5 if n_points <= 30 else 3.0


# colours for curves: Okabe-Ito without yellow (too faint on white for a line)
_LINE_COLOURS = COLOURS[:7]


def curve_look(i, n=1):
    """Colour and marker of curve ``i`` of ``n``.

    Up to seven curves take the Okabe-Ito colours; more take evenly spaced
    colours of the cividis map in curve order (a series ordered by bond
    dimension or time reads as a gradient), so no two curves share a
    colour.  Markers cycle through eight shapes.
    """
    if n <= len(_LINE_COLOURS):
        colour = _LINE_COLOURS[i % len(_LINE_COLOURS)]
    else:
        from matplotlib import colormaps
        from matplotlib.colors import to_hex

        colour = to_hex(colormaps[COLOUR_MAP](0.9 * i / (n - 1)))
    return dict(color=colour, marker=MARKERS[i % len(MARKERS)])


def cut_label(ax):
    ax.set_xlabel("cut position l (sites left of the cut)")
    ax.xaxis.get_major_locator().set_params(integer=True)


def titled(fig, ax, title, default):
    text = default if title is None else title
    if text:
        ax.set_title(text)
    return fig


def plus_minus(value, error):
    """'0.501 ± 0.003' with the value rounded to the error's first digit (two if it is 1)."""
    if error is None or not np.isfinite(error) or error <= 0:
        return f"{value:.4g}"
    digits = max(0, -int(math.floor(math.log10(error))) + (1 if f"{error:e}"[0] == "1" else 0))
    return f"{value:.{digits}f} ± {error:.{digits}f}"


def figure_bytes(fig, fmt="png", *, dpi=150):
    """The figure encoded as PNG, SVG or PDF, in bondscope's style and without timestamps."""
    import io

    buf = io.BytesIO()
    with style():
        fig.savefig(buf, format=fmt, dpi=dpi, facecolor="white",
                    metadata=_STABLE_METADATA[fmt])
    return buf.getvalue()


def save_figure(fig, output, *, dpi=150, protect=()):
    """Write a figure as PNG, SVG or PDF, chosen by the suffix of ``output``.

    The file is written whole or not at all, and carries no timestamp, so the
    same data give the same bytes.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    output : str or Path
    dpi : float
        Resolution of a PNG.
    protect : iterable of paths
        Files never to write over (the figure's inputs).

    Returns
    -------
    Path
        ``output``, as written.

    Raises
    ------
    ValueError
        A suffix other than .png, .svg or .pdf, or ``output`` is a protected file.
    """
    from .._files import atomic_write, refuse_overwrite

    path = Path(output)
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise ValueError(f"{path}: cannot tell the figure format from {path.suffix or 'no'} "
                         f"suffix; use one of {', '.join(FORMATS)}")
    refuse_overwrite(path, protect, "an input of the figure")
    data = figure_bytes(fig, fmt, dpi=dpi)
    return atomic_write(path, lambda tmp: Path(tmp).write_bytes(data))
