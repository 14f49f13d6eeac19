"""Names shown in figures and pages are text: never markup, never invisible.

File and dataset names come from other people's files.  A right-to-left
override (U+202E) would make ``evil\u202eh5.exe`` read as another name, a
terminal escape could restyle a console, and matplotlib would parse
``$x^{2}$.h5`` as mathematics (or fail on ``$\\foo$.h5``).  Every name a figure
or the report shows goes through :func:`visible` (and, in figures,
:func:`figure_text`).
"""

import unicodedata
from pathlib import Path

__all__ = ["visible", "figure_text", "shortened"]

# control, format (bidi overrides and isolates, zero-width marks), line and paragraph
# separators, and lone surrogates (undecodable bytes of a file name)
_HIDDEN = frozenset({"Cc", "Cf", "Zl", "Zp", "Cs"})


def _mark(ch):
    code = ord(ch)
    if 0xDC80 <= code <= 0xDCFF:  # a byte that was not UTF-8 (surrogateescape)
        return f"<0x{code - 0xDC00:02X}>"
    return f"<U+{code:04X}>"


def visible(text):
    """``text`` with every invisible or reordering character spelled out as <U+XXXX>.

    Examples
    --------
    >>> visible("run\\u202e5h.h5"), visible("tab\\there"), visible("plain name.h5")
    ('run<U+202E>5h.h5', 'tab<U+0009>here', 'plain name.h5')
    """
    text = str(text)
    if text.isprintable():
        return text
    return "".join(_mark(ch) if unicodedata.category(ch) in _HIDDEN else ch for ch in text)


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
