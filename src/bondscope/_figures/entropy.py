"""Entropy figure: S(l) per source with the central-charge fit and its residuals."""

import math

import numpy as np

from .._errors import CheckpointError
from .._docs import filled
from .._options import ProfileOptions
from .._text import entropy_unit
from ._gather import collect, same_base
from ._style import (FAINT, RENYI_DASHES, curve_look, cut_label, marker_size, new_figure,
                     plus_minus, style, titled)

__all__ = ["entropy_figure"]


@filled
def entropy_figure(sources, *, boundary=None, renyi=(), fit=True, title=None, options=None,
                   **profiling):
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
    title : str, optional
        Figure title ("" for none).
    options : ProfileOptions, optional
        How checkpoints are profiled.
    **profiling
        Fields of :class:`~bondscope.ProfileOptions` (layout, ``base``, ...),
        overriding ``options``.

    %(figure_returns)s
        Axes 0 holds the curves; with ``fit`` axes 1 holds the residuals
        S - S_fit over the fitted window (shaded).  The fits are in
        ``fig.bondscope_fits``: per source its ``label`` and the result of
        :func:`bondscope._analyses.scaling.fit_scaling` (``central_charge``,
        ``central_charge_error``, ``window``, ``residuals`` in nats, ...).

    Notes
    -----
    The fit is the analysis one (Calabrese & Cardy, J. Stat. Mech. P06002
    (2004), with the corrections of open chains); the dashed curve is its
    full model, corrections included, on the cuts it was fitted to.

    Raises
    ------
    ValueError
        A boundary other than "open" or "periodic", or a bad fit setting.
    TypeError
        An unknown profiling option or fit setting.
    CheckpointError
        A Rényi order a saved profile does not hold.
    """
    from .._analyses.scaling import fit_scaling

    if boundary not in (None, "open", "periodic"):
        raise ValueError(f"boundary must be 'open' or 'periodic', found {boundary!r}")
    settings = _fit_settings(fit)
    fit = settings is not None
    opts = ProfileOptions.from_kwargs(options, **profiling)
    orders = [str(a) for a in renyi]
    entries = collect(sources, options=opts.replace(renyi=orders) if orders else opts)
    for entry in entries:
        missing = [a for a in orders if _order_key(a, entry.profile) is None]
        if missing:
            raise CheckpointError(
                f"{entry.origin or entry.label}: no Rényi entropy of order "
                f"{', '.join(missing)} in this profile (present: "
                f"{', '.join(entry.profile.renyi_orders) or 'none'}); rerun `bondscope profile "
                f"CHECKPOINT --renyi {','.join(orders)} -o PROFILE`")
    scales, base = same_base(entries)
    unit = entropy_unit(base)
    with style():
        fig = new_figure(9.0, 5.0 if fit else 4.0)
        if fit:
            ax, res = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1))
        else:
            ax, res = fig.subplots(), None
        fits, laws, window = [], [], (np.inf, -np.inf)
        for i, (entry, scale) in enumerate(zip(entries, scales)):
            prof, look = entry.profile, curve_look(i)
            x, s = prof.positions, prof.entropies * scale
            label = entry.label
            if fit:
                kind = settings.get("boundary") or boundary or entry.meta.get("boundary") \
                    or "open"
                result = fit_scaling(prof, **{**settings, "boundary": kind})
                fits.append({"label": entry.label, **result})
                at = np.asarray(result["positions"])
                resid = np.asarray(result["residuals"]) / math.log(base)
                model = s[np.searchsorted(x, at)] - resid
                label = (f"{entry.label}: c = "
                         f"{plus_minus(result['central_charge'], result['central_charge_error'])}")
                ax.plot(at, model, color=look["color"], lw=1.0, ls=(0, (4, 2)), zorder=3)
                res.plot(at, resid, ls="none", ms=3.0, **look)
                laws += [kind] if kind not in laws else []
                window = (min(window[0], at[0]), max(window[1], at[-1]))
            ax.plot(x, s, lw=0.9, label=label, ms=marker_size(len(x)), **look)
            for k, a in enumerate(orders):
                ax.plot(x, prof.renyi(_order_key(a, prof)) * scale, color=look["color"],
                        lw=0.9, ls=RENYI_DASHES[k % 2])
        for k, a in enumerate(orders):
            ax.plot([], [], color=FAINT, lw=0.9, ls=RENYI_DASHES[k % 2],
                    label=f"Rényi $S_{{{_order_text(a)}}}$")
        ax.set_ylabel(f"S(l) [{unit}]")
        if fit:
            for kind in laws:
                ax.plot([], [], color=FAINT, lw=1.0, ls=(0, (4, 2)),
                        label=f"fit, {kind} chain:\n{_law(kind)}")
            res.axhline(0.0, color=FAINT, lw=0.8)
            for a, key in ((ax, "cuts fitted"), (res, None)):
                a.axvspan(window[0] - 0.5, window[1] + 0.5, color="#efefef", lw=0, zorder=0,
                          label=key)
            res.set_ylabel(f"S − fit [{unit}]")
            cut_label(res)
        else:
            cut_label(ax)
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0))
        fig.bondscope_fits = fits
        return titled(fig, ax, title, "Entanglement entropy across the chain")


def _fit_settings(fit):
    """None for no fit, else the :func:`bondscope.fit_scaling` keywords asked for."""
    if fit is None or fit is False:
        return None
    if fit is True:
        return {}
    if isinstance(fit, dict):
        return dict(fit)
    raise TypeError(f"fit must be True, False or a dict of fit_scaling settings, found "
                    f"{type(fit).__name__}")


def _law(boundary):
    return ("S = (c/6) ln[(2N/π) sin(πl/N)] + s₀\n   + parity and 1/x corrections"
            if boundary == "open" else "S = (c/3) ln[(N/π) sin(πl/N)] + s₀")


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
