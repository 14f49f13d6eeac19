"""Docstring fragments shared by several public functions, filled in by :func:`filled`."""

import textwrap

__all__ = ["filled", "FRAGMENTS"]

FRAGMENTS = {
    "profiling": """\
options : ProfileOptions, optional
    How checkpoints are profiled.
**profiling
    Fields of :class:`~bondscope.ProfileOptions`, overriding ``options``.""",
    "figure_returns": """\
Returns
-------
matplotlib.figure.Figure""",
}


def filled(func):
    """Replace each line ``%(name)s`` of ``func``'s docstring by the fragment ``name``,
    indented as the line was (in the manner of scipy's doccer)."""
    lines = []
    for line in (func.__doc__ or "").split("\n"):
        token = line.strip()
        if token.startswith("%(") and token.endswith(")s"):
            indent = line[:len(line) - len(line.lstrip())]
            lines.append(textwrap.indent(FRAGMENTS[token[2:-2]], indent))
        else:
            lines.append(line)
    func.__doc__ = "\n".join(lines)
    return func
