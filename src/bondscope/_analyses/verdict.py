"""The scaling-law verdict: area, logarithmic or volume by AICc, or inconclusive."""

import math

import numpy as np

from .models import LEADS, aicc, fit_model

__all__ = ["decide_law", "AREA_C", "PAGE_FRACTION", "TIE", "RESOLVED"]

# c below half the smallest unitary central charge (1/2, Friedan, Qiu, Shenker, PRL 52,
# 1575 (1984)) means the entropy has stopped growing with the block: area law
AREA_C = 0.25
# an area verdict must rule out this central charge, the smallest of a unitary critical chain
SMALLEST_C = 0.5
# a volume-law middle cut holds at least this fraction of the Page value (our choice)
PAGE_FRACTION = 0.5
# models within this AICc of the best are tied (Burnham & Anderson (2002), Sec. 2.6:
# a difference below 2 is substantial support for both)
TIE = 2.0
# residual degrees of freedom a law comparison needs beyond the parameters (our choice)
MIN_DOF = 3
# c must exceed this many of its errors for a logarithmic verdict (our choice, 2 sigma)
RESOLVED = 2.0


def _page_ratio(l, S, sites, local_dims):
    from .scaling import page_entropy

    mid = int(np.argmin(np.abs(l - sites / 2.0)))
    # unknown dimensions: 2, the smallest, whose Page value bounds every other's from below
    logs = np.log(np.asarray(local_dims if local_dims is not None else [2] * sites, dtype=float))
    page = page_entropy(logs[:l[mid]].sum(), logs[l[mid]:].sum())
    return mid, page, (float(S[mid] / page) if page > 0 else None)


def decide_law(l, S, sites, boundary, corrections, form, exponent, c, c_err, local_dims, noise):
    """Compare the three laws on the window's cuts and give a verdict with its reason.

    Each law is a least-squares model with the same corrections: area
    (constant), logarithmic (Calabrese-Cardy) and volume (linear in the
    distance to the nearer end).  The lowest AICc wins unless another law is
    within ``TIE``; a logarithmic winner with c + 2 err below ``AREA_C`` is
    read as area; a logarithmic verdict needs c resolved (c > RESOLVED err)
    and c > 0; an area verdict needs c + 2 err below ``SMALLEST_C``; a volume
    verdict needs a rising slope and the middle cut at ``PAGE_FRACTION`` of
    the Page value (local dimensions 2 when unknown, the smallest possible,
    so the ratio is then an upper bound).

    Returns
    -------
    law : str
        "area", "logarithmic", "volume" or "inconclusive".
    reason : str
        One line saying why.
    evidence : dict
    flags : list of str
    """
    fits = {lead: fit_model(l, S, sites, boundary, lead, corrections, form, exponent)
            for lead in LEADS}
    scores = {lead: aicc(f, noise) for lead, f in fits.items()}
    mid, page, ratio = _page_ratio(l, S, sites, local_dims)
    evidence = {"criterion": "AICc", "aicc": {k: (None if math.isinf(v) else v)
                                              for k, v in scores.items()},
                "tie_threshold": TIE, "noise": float(noise), "area_threshold": AREA_C,
                "rss_area": fits["area"].rss, "rss_logarithmic": fits["logarithmic"].rss,
                "rss_linear": fits["volume"].rss, "volume_slope": float(fits["volume"].coef[0]),
                "middle_position": int(l[mid]), "middle_entropy": float(S[mid]),
                "page_entropy": page, "page_ratio": ratio, "page_fraction": PAGE_FRACTION}
    flags = []
    if c + 2.0 * c_err < 0:
        flags.append(f"unphysical central charge {c:.3g} +- {c_err:.2g} (negative)")
    # three residual degrees of freedom beyond the largest model and its variance
    need = max(f.k for f in fits.values()) + MIN_DOF + 1
    if len(l) < need or any(math.isinf(v) for v in scores.values()):
        return ("inconclusive", f"too few cuts to compare the laws ({len(l)} in the window, "
                f"{need} needed)", evidence, flags)
    small = c + 2.0 * c_err < AREA_C and c - 2.0 * c_err > -AREA_C
    bounded = c + 2.0 * c_err < SMALLEST_C

    def law_of(lead):
        if lead == "logarithmic" and small:
            return "area"
        if lead == "volume" and (fits["volume"].coef[0] <= 0 or
                                 (ratio is not None and ratio < PAGE_FRACTION)):
            return None
        return lead

    ranked = sorted((v, lead) for lead, v in scores.items() if law_of(lead) is not None)
    best_score, best = ranked[0]
    evidence["delta"] = float(ranked[1][0] - best_score) if len(ranked) > 1 else None
    law = law_of(best)
    rivals = {law_of(lead) for v, lead in ranked if v - best_score < TIE} - {law}
    if rivals:
        return ("inconclusive", f"{law} and {', '.join(sorted(rivals))} tied (AICc within "
                f"{TIE:g})", evidence, flags)
    if law == "area" and not bounded:
        return ("inconclusive", f"area law preferred but c = {c:.3g} +- {c_err:.2g} does not "
                f"rule out a critical chain (c + 2 err >= {SMALLEST_C:g})", evidence, flags)
    if law == "logarithmic":
        if c <= 0:
            return "inconclusive", f"unphysical central charge {c:.3g} <= 0", evidence, flags
        if c <= RESOLVED * c_err:
            return ("inconclusive", f"c = {c:.3g} +- {c_err:.2g} not resolved (error above "
                    f"1/{RESOLVED:g} of the value)", evidence, flags)
    why = (f"{law} law preferred (AICc lower by {evidence['delta']:.3g})"
           if evidence["delta"] is not None else f"{law} law, the only candidate left")
    if law == "area" and best == "logarithmic":
        why += f"; c + 2 err below {AREA_C:g}"
    return law, why, evidence, flags
