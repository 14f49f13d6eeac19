"""Entropy figure: S(l) per source with the central-charge fit and its residuals."""

import inspect
import math

import numpy as np

from .._errors import CheckpointError, one_line
from .._docs import filled
from .._options import ProfileOptions
from .._text import entropy_unit
from ._gather import collect, same_base
from ._names import visible
from ._style import (FAINT, RENYI_DASHES, curve_look, cut_label, marker_size, new_figure,
                     plus_minus, style, titled)

__all__ = ["entropy_figure", "fit_settings", "fit_entries", "fit_summary", "AXES"]

# x axis of the figure -> its label (chord: filled in per boundary)
AXES = {"cut": None, "fraction": "cut position l/N (fraction of the chain left of the cut)",
        "chord": "ln x,  x = {chord}  (chord length)"}
_CHORDS = {"open": "(2N/π) sin(πl/N)", "periodic": "(N/π) sin(πl/N)"}
_FIT_DASH = (0, (4, 2))
_SUBSCRIPTS = str.maketrans("0123456789", "₀₁₂₃₄₅₆₇₈₉")


def fit_settings(fit):
    """None for no fit, else the :func:`bondscope.fit_scaling` keywords asked for.

    Raises
    ------
    TypeError
        ``fit`` is not a bool or dict, or names a keyword fit_scaling does not take.
    """
    if fit is None or fit is False:
        return None
    if fit is True:
        return {}
    if not isinstance(fit, dict):
        raise TypeError(f"fit must be True, False or a dict of fit_scaling settings, found "
                        f"{type(fit).__name__}")
    from .._analyses.scaling import fit_scaling

    known = [p for p in inspect.signature(fit_scaling).parameters if p != "source"]
    unknown = [k for k in fit if k not in known]
    if unknown:
        raise TypeError(f"fit setting {unknown[0]!r} is not a keyword of fit_scaling; "
                        f"choose from {', '.join(known)}")
    return dict(fit)


def fit_summary(result):
    """What a fit says, for a legend or a table: c and its error (None where the analysis
    withholds c or its verdict is not logarithmic), the law, and a short text."""
    c, err = result.get("central_charge"), result.get("central_charge_error")
    law = result.get("law")
    if law not in (None, "logarithmic") or c is None or not math.isfinite(c):
        c = err = None
    if c is None:
        text = "law inconclusive" if law in (None, "inconclusive") else f"{law} law"
    else:
        text = f"c = {plus_minus(c, err)}" + (" (unphysical: c ≤ 0)" if c <= 0 else "")
    return {"central_charge": c, "central_charge_error": err, "law": law, "text": text}


@filled
def entropy_figure(sources, *, boundary=None, renyi=(), fit=True, against="cut", title=None,
                   options=None, **profiling):
    """S(l) against cut position, one curve per source, with the central-charge fit.

    Parameters
    ----------
    sources : source or list of sources
        Profiles, saved profiles, checkpoints or results directories.
    boundary : {"open", "periodic"}, optional
        Boundary condition of the chain, for the fit; by default each source's
        ``boundary`` (a checkpoint attribute or profile field), else "open".
    renyi : sequence of str or float
        Rényi orders to draw as well (dotted and dash-dotted), e.g. ``("2", "inf")``.
    fit : bool or dict
        Draw the central-charge fit (c and its error in the legend) and the
        residual panel beneath; a dict gives the fit's settings, keywords of
        :func:`bondscope.fit_scaling` (``window``, ``corrections``,
        ``parity_exponent``, ``boundary``).
    against : {"cut", "fraction", "chord"}
        x axis: the cut position l; the fraction l/N; or ln x with x the
        chord length of the fit, where the Calabrese-Cardy form is a straight
        line of slope c/6 (open) or c/3 (ring) up to its corrections (cuts
        l and N - l fall on the same x).
    title : str, optional
        Figure title ("" for none).
    options : ProfileOptions, optional
        How checkpoints are profiled.
    **profiling
        Fields of :class:`~bondscope.ProfileOptions` (layout, ``base``, ...),
        overriding ``options``.

    %(figure_returns)s
        Axes 0 holds the curves; with ``fit`` axes 1 holds the residuals
        S - S_fit over each source's fitted window (shaded when all sources
        share one window, else a bar per source in its colour).  The fits
        are in ``fig.bondscope_fits``: per source its ``label`` and the
        result of :func:`bondscope.fit_scaling` (``central_charge``,
        ``central_charge_error``, ``law``, ``window``, ``residuals`` in
        nats, ...), or ``error`` when that source could not be fitted.

    Notes
    -----
    The fit is the analysis one (Calabrese & Cardy, J. Stat. Mech. P06002
    (2004), with the corrections of open chains); the dashed curve is its
    full model, corrections included, on the cuts it was fitted to.  The
    legend shows c only for a logarithmic verdict; otherwise the law
    ("area", "volume" or "inconclusive").

    Raises
    ------
    ValueError
        A boundary other than "open" or "periodic", an unknown ``against``,
        or a fit setting no source can be fitted with.
    TypeError
        An unknown profiling option or fit setting.
    CheckpointError
        A Rényi order a saved profile does not hold.
    """
    if boundary not in (None, "open", "periodic"):
        raise ValueError(f"boundary must be 'open' or 'periodic', found {boundary!r}")
    if against not in AXES:
        raise ValueError(f"against must be one of {', '.join(AXES)}, found {against!r}")
    settings = fit_settings(fit)
    opts = ProfileOptions.from_kwargs(options, **profiling)
    orders = [str(a) for a in renyi]
    entries = collect(sources, options=opts.replace(renyi=orders) if orders else opts)
    for entry in entries:
        missing = [a for a in orders if _order_key(a, entry.profile) is None]
        if missing:
            raise CheckpointError(
                f"{visible(entry.origin or entry.label)}: no Rényi entropy of order "
                f"{', '.join(missing)} in this profile (present: "
                f"{', '.join(entry.profile.renyi_orders) or 'none'}); rerun `bondscope profile "
                f"CHECKPOINT --renyi {','.join(orders)} -o PROFILE`")
    kinds, fits = fit_entries(entries, settings, boundary)
    if fits is not None and all("error" in f for f in fits):
        raise ValueError(fits[0]["error"])
    scales, base = same_base(entries)
    with style():
        fig = new_figure(9.0, 5.0 if fits is not None else 4.0)
        if fits is not None:
            ax, res = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1))
        else:
            ax, res = fig.subplots(), None
        spans = []
        for i, (entry, scale, kind) in enumerate(zip(entries, scales, kinds)):
            look = curve_look(i, len(entries))
            prof = entry.profile
            x = _abscissa(against, prof.positions, prof.sites, kind)
            s = prof.entropies * scale
            label = entry.text
            if fits is not None:
                text, fitted = _draw_fit(ax, res, fits[i], prof, x, s, base, look)
                label += ": " + text
                spans.append(fitted)
            ax.plot(x, s, lw=0.7, alpha=0.6, label=label, ms=marker_size(len(x)), zorder=2,
                    **look)
            for k, a in enumerate(orders):
                ax.plot(x, prof.renyi(_order_key(a, prof)) * scale, color=look["color"],
                        lw=0.9, ls=RENYI_DASHES[k % 2])
        for k, a in enumerate(orders):
            ax.plot([], [], color=FAINT, lw=0.9, ls=RENYI_DASHES[k % 2],
                    label=f"Rényi $S_{{{_order_text(a)}}}$")
        ax.set_ylabel(f"S(l) [{entropy_unit(base)}]")
        bottom = ax if res is None else res
        if fits is not None:
            _fit_keys(ax, res, fits, spans, base, against)
        _x_label(bottom, against, kinds)
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0))
        fig.bondscope_fits = fits or []
        return titled(fig, ax, title, "Entanglement entropy across the chain")


def fit_entries(entries, settings, boundary=None):
    """The boundary and scaling fit of each entry.

    The boundary is the fit setting's, else ``boundary``, else the entry's
    own ``boundary`` metadata, else "open".  A fit is ``{"label", **result}``
    of :func:`bondscope.fit_scaling`, or ``{"label", "error"}`` (one line)
    when that entry cannot be fitted.

    Returns
    -------
    kinds : list of str
    fits : list of dict, or None when ``settings`` is None (no fit asked)
    """
    from .._analyses.scaling import fit_scaling

    given = (settings or {}).get("boundary") or boundary
    sources = ["given" if given else "profile field" if e.profile.get("boundary") else
               "checkpoint attribute" if e.meta.get("boundary") else "default" for e in entries]
    kinds = [given or e.meta.get("boundary") or "open" for e in entries]
    if settings is None:
        return kinds, None
    fits = []
    for entry, kind, source in zip(entries, kinds, sources):
        try:
            found = fit_scaling(entry.profile, **{**settings, "boundary": kind})
            found = found.to_dict() if hasattr(found, "to_dict") else dict(found)
            fits.append({"label": entry.label, **found, "boundary_source": source})
        except ValueError as exc:
            fits.append({"label": entry.label, "error": one_line(exc)})
    return kinds, fits


def _abscissa(against, positions, sites, boundary):
    if against == "cut":
        return positions
    if against == "fraction":
        return positions / sites
    from .._analyses.models import chord

    return np.log(chord(positions, sites, boundary))


def _draw_fit(ax, res, fit, prof, x, s, base, look):
    """Draw one source's fit (its full model, and the residuals); return its legend text
    and the x of the cuts fitted (None when it was not fitted)."""
    if "error" in fit:
        return "not fitted", None
    at = np.asarray(fit["positions"])
    index = np.searchsorted(prof.positions, at)
    resid = np.asarray(fit["residuals"]) / math.log(base)
    summary = fit_summary(fit)
    # above the data (zorder 4 over 2), in the curve's colour, darker than its faded line
    ax.plot(x[index], s[index] - resid, color=look["color"], lw=1.5, ls=_FIT_DASH, zorder=4)
    res.plot(x[index], resid, ls="none", ms=3.0, **look)
    return summary["text"], x[index]


def _fit_keys(ax, res, fits, spans, base, against):
    """Legend keys of the fit forms, the fitted cuts and the residual zero line."""
    for text in dict.fromkeys(_law_text(f, base) for f in fits if "error" not in f):
        ax.plot([], [], color=FAINT, lw=1.5, ls=_FIT_DASH, label=text)
    res.axhline(0.0, color=FAINT, lw=0.8)
    res.set_ylabel(f"S − fit [{entropy_unit(base)}]")
    fitted = [x for x in spans if x is not None]
    ranges = {(float(x.min()), float(x.max())) for x in fitted}
    if len(ranges) == 1:
        a, b = ranges.pop()
        pad = 0.5 if against == "cut" else 0.0
        for axes, key in ((ax, "cuts fitted"), (res, None)):
            axes.axvspan(a - pad, b + pad, color="#efefef", lw=0, zorder=0, label=key)
        return
    # one bar per source along the foot of the curves panel: its own fitted cuts
    keyed = False
    for i, x in enumerate(spans):
        if x is None:
            continue
        ax.plot([x.min(), x.max()], [0.012 + 0.015 * i] * 2, transform=ax.get_xaxis_transform(),
                color=curve_look(i, len(spans))["color"], lw=2.2, solid_capstyle="butt",
                zorder=1, label=None if keyed else "cuts fitted (a bar per source)")
        keyed = True


def _log_text(base):
    if abs(base - math.e) < 1e-12:
        return "ln"
    if float(base).is_integer():
        return "log" + str(int(base)).translate(_SUBSCRIPTS)
    return f"(1/ln {base:g}) ln"


def _law_text(fit, base):
    """The fitted form as the legend shows it: the fit's own corrections, in the
    entropy's own logarithm."""
    boundary = fit.get("boundary", "open")
    terms = [f"(c/{'6' if boundary == 'open' else '3'}) {_log_text(base)} x", "s₀"]
    corrections = fit.get("corrections") or ()
    if "parity" in corrections and fit.get("parity_form") == "su2":
        terms.append("b (−1)ˡ √(ln x)/√x")
    elif "parity" in corrections:
        k = fit.get("parity_exponent") or 1.0
        terms.append("b (−1)ˡ/x" + ("" if k == 1 else f"^{k:.3g}"))
    if "smooth" in corrections:
        terms.append("f/x")
    return (f"fit, {boundary} chain:\nS = " + " + ".join(terms) +
            f",\n   x = {_CHORDS.get(boundary, '?')}")


def _x_label(ax, against, kinds):
    if against == "cut":
        cut_label(ax)
    elif against == "fraction":
        ax.set_xlabel(AXES["fraction"])
    else:
        found = list(dict.fromkeys(kinds))
        chord = _CHORDS[found[0]] if len(found) == 1 else \
            f"{_CHORDS['open']} (open), {_CHORDS['periodic']} (ring)"
        ax.set_xlabel(AXES["chord"].format(chord=chord))


def _order_key(order, prof):
    """The profile's key for a Rényi order ("2" matches "2.0"), or None."""
    for key in prof.renyi_orders:
        if key == order or (_number(key) is not None and _number(key) == _number(order)):
            return key
    return None


def _number(text):
    try:
        return float(text)
    except ValueError:
        return None


def _order_text(order):
    return r"\infty" if str(order).lower() == "inf" else str(order)


# the figure this kind draws (bondscope._figures._kinds)
DRAW = entropy_figure
