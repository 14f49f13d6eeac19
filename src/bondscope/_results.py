"""Typed results of the analyses: dataclasses that print well and serialise to JSON.

A result is a frozen dataclass deriving from :class:`Result`.  Its fields are
the keys of its JSON document, in order; ``to_dict`` turns nested results,
numpy scalars and arrays into plain values, and ``result["key"]`` reads a
field as the document's key (so code written against the JSON keeps working).
A subclass may define ``_summary()`` (one line for ``repr``) and list the
fields a notebook table shows in ``_shown``.  A field holding :data:`ABSENT`
does not apply to this result (e.g. the time fields of a bond series): it is
left out of the document, ``keys()`` and ``in``.
"""

import dataclasses
import html
import json

import numpy as np

__all__ = ["ABSENT", "Result", "plain"]


class _Absent:
    """Marker of a field that does not apply to a result (left out of its document)."""

    def __bool__(self):
        return False

    def __repr__(self):
        return "ABSENT"


ABSENT = _Absent()


def plain(value):
    """A JSON-ready copy of ``value``: results, numpy values, tuples and dicts resolved."""
    if isinstance(value, Result):
        return value.to_dict()
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return plain(value.tolist())
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    return value


@dataclasses.dataclass(frozen=True)
class Result:
    """Base of the analyses' typed results.

    Examples
    --------
    >>> import dataclasses
    >>> @dataclasses.dataclass(frozen=True)
    ... class Gap(Result):
    ...     position: int
    ...     gap: float
    >>> g = Gap(3, 0.25)
    >>> g.to_dict(), g["gap"]
    ({'position': 3, 'gap': 0.25}, 0.25)
    >>> g
    Gap(position=3, gap=0.25)
    """

    _shown = ()

    def _names(self):
        return [f.name for f in dataclasses.fields(self) if getattr(self, f.name) is not ABSENT]

    def to_dict(self):
        """The result as plain JSON-ready values, keyed by field name."""
        return {name: plain(getattr(self, name)) for name in self._names()}

    def to_json(self, indent=None):
        """The result as JSON text (NaN and Inf refused)."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def __getitem__(self, key):
        if key not in self._names():
            raise KeyError(key)
        return getattr(self, key)

    def __contains__(self, key):
        return key in self._names()

    def get(self, key, default=None):
        return getattr(self, key) if key in self else default

    def keys(self):
        return self._names()

    def __repr__(self):
        summary = getattr(self, "_summary", None)
        if summary is not None:
            return f"<{type(self).__name__}: {summary()}>"
        fields = ", ".join(f"{f.name}={getattr(self, f.name)!r}" for f in dataclasses.fields(self)
                           if f.repr and getattr(self, f.name) is not ABSENT)
        return f"{type(self).__name__}({fields})"

    def _repr_html_(self):
        names = self._shown or [n for n in self._names()
                                if not isinstance(getattr(self, n), (list, dict, tuple))]
        rows = "".join(f"<tr><th style='text-align:left'>{html.escape(n)}</th>"
                       f"<td>{html.escape(_short(getattr(self, n)))}</td></tr>" for n in names)
        return (f"<table><caption style='text-align:left'><b>{html.escape(type(self).__name__)}"
                f"</b></caption>{rows}</table>")


def _short(value):
    if isinstance(value, float):
        return f"{value:.6g}"
    text = str(plain(value))
    return text if len(text) <= 80 else text[:77] + "..."
