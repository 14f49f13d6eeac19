"""The figure kinds: one module per kind in this package, found by name.

A kind is a module ``bondscope._figures.<kind>`` (not starting with an
underscore) whose ``DRAW`` is its figure function.  Listing the kinds imports
nothing heavy, so the CLI can offer them at start-up.
"""

import pkgutil
from importlib import import_module
from pathlib import Path

from .._docs import filled

__all__ = ["kinds", "figure_function", "plot"]


def kinds():
    """Names of the figure kinds, in alphabetical order."""
    package = Path(__file__).parent
    return sorted(m.name for m in pkgutil.iter_modules([str(package)])
                  if not m.name.startswith("_"))


def figure_function(kind):
    """The function drawing figures of ``kind``.

    Raises
    ------
    ValueError
        An unknown kind.
    """
    if kind not in kinds():
        raise ValueError(f"unknown figure kind {kind!r}; choose one of {', '.join(kinds())}")
    return import_module(f"{__package__}.{kind}").DRAW


@filled
def plot(sources, kind="entropy", output=None, **options):
    """Draw one kind of figure and optionally save it.

    Parameters
    ----------
    sources : source or list of sources
        Profiles, saved profiles, checkpoints or batch results directories.
    kind : str
        One of the figure kinds: "budget", "convergence", "entropy",
        "heatmap", "spectrum" (and any added since; see :func:`kinds`).
    output : str or Path, optional
        Save as PNG, SVG or PDF by suffix.
    **options
        Keywords of the chosen figure function (e.g. ``boundary``, ``renyi``,
        ``fit``, ``targets``, ``against``, ``options`` and profiling fields).

    %(figure_returns)s

    Raises
    ------
    ValueError
        An unknown kind, an output suffix that is not .png, .svg or .pdf, or
        an output that is one of the inputs (a checkpoint named ``ck.pdf``,
        or a checkpoint of a results directory); checked before anything
        is drawn.
    TypeError
        An option the chosen figure does not take.
    """
    from .._files import refuse_overwrite
    from ._gather import input_files
    from ._style import FORMATS, save_figure

    draw = figure_function(kind)
    inputs = []
    if output is not None:
        if Path(output).suffix.lower() not in FORMATS:
            raise ValueError(f"{output}: use a .png, .svg or .pdf name for the figure")
        inputs = input_files(sources)
        refuse_overwrite(output, inputs, "an input of the figure")
    fig = draw(sources, **options)
    if output is not None:
        save_figure(fig, output, protect=inputs)
    return fig
