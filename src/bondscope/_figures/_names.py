"""Names shown in figures and pages are text: never markup, never invisible.

File and dataset names come from other people's files.  A right-to-left
override (U+202E) would make ``evil\u202eh5.exe`` read as another name, a
terminal escape could restyle a console, and matplotlib would parse
``$x^{2}$.h5`` as mathematics (or fail on ``$\\foo$.h5``).  Every name a figure
or the report shows goes through :func:`visible` (and, in figures,
:func:`figure_text`).
"""

from pathlib import Path

from .._text import visible

__all__ = ["visible", "figure_text", "shortened"]

def figure_text(name):
    """A name as matplotlib text: :func:`visible`, with ``$`` shown as a dollar sign.

    Matplotlib reads text with an even number of unescaped ``$`` as mathtext;
    an escaped ``\\$`` is drawn as ``$`` and never starts mathematics.

    Examples
    --------
    >>> figure_text("$x^{2}$ normal.h5")
    '\\\\$x^{2}\\\\$ normal.h5'
    """
    return visible(name).replace("$", r"\$")


def shortened(message, names):
    """``message`` with each path of ``names`` (as given or resolved) replaced by its
    short form ``names[path]``; longest paths first, so a folder never cuts a file's path.

    Examples
    --------
    >>> shortened("/scan/J1/ck.h5: norm 1.1", {"/scan/J1/ck.h5": "J1/ck.h5"})
    'J1/ck.h5: norm 1.1'
    """
    forms = {}
    for path, short in names.items():
        forms[str(path)] = short
        try:
            forms.setdefault(str(Path(str(path)).resolve()), short)
        except (OSError, RuntimeError, ValueError):
            pass
    for form in sorted(forms, key=len, reverse=True):
        if form and form != forms[form]:
            message = message.replace(form, forms[form])
    return message
