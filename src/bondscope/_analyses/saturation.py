"""Finite bond dimension: which cuts sit at the run's bond dimension, and what it costs S."""

import math

import numpy as np

__all__ = ["finite_chi", "entropy_bias", "TAIL_FACTOR"]

# the weight a capped cut stands for, as a multiple of its smallest kept lambda^2 (our choice:
# the entropy bias it gives covers, at the middle cut, the deficit of the generator's DMRG
# runs of the bundled critical Ising series at chi = 8 (data/series, against Peschel's exact
# entropies); a variational state loses more than the tail of one optimal truncation)
TAIL_FACTOR = 150.0
# cuts at the largest bond dimension that make it a cap when no bond_dim is recorded
PLATEAU = 3
# a dropped weight this large leaves the entropy unbounded by the estimate
SEVERE = 0.5


def entropy_bias(w):
    """Bound on the entropy a truncation dropping weight ``w`` removes: 2 w (1 + ln(1/w)).

    Dropping a tail of weight w and renormalising changes S by about
    w (1 + ln(1/w)) when w << 1 (the tail's own entropy plus the
    renormalisation); the factor 2 covers the spread seen on truncated
    free-fermion spectra (tests/test_saturation.py).
    """
    w = min(float(w), 1.0)
    if w <= 0.0:
        return 0.0
    return 2.0 * w * (1.0 + math.log(1.0 / w))


def _run_bond(prof):
    chi = prof.get("bond_dim")
    if isinstance(chi, (int, np.integer)) and not isinstance(chi, bool) and chi >= 1:
        return int(chi), "bond_dim field"
    if prof.kind != "mps":
        return None, None
    ranks = [c.get("bond_dimension") for c in prof.cuts if c.get("bond_dimension")]
    # a cap shows as a plateau; an exact chain's largest bond sits at one or two middle cuts
    if not ranks or ranks.count(max(ranks)) < PLATEAU:
        return None, None
    return max(ranks), "largest stored bond dimension"


def _run_weight(prof):
    if prof.truncation is not None:
        return None
    for key in ("max_discarded_weight", "discarded_weight"):
        w = prof.get(key)
        if isinstance(w, (int, float)) and not isinstance(w, bool) and 0 <= w < 1:
            return float(w)
    return None


def _full_rank(position, dims):
    left = sum(math.log(d) for d in dims[:position])
    right = sum(math.log(d) for d in dims[position:])
    return math.exp(min(left, right, 700.0))


def finite_chi(prof, positions):
    """Cuts among ``positions`` whose rank is the run's bond dimension, and their bias.

    A cut is *capped* when its bond dimension (else Schmidt rank) equals the
    run's bond dimension chi (the document's ``bond_dim``, else for an MPS
    its largest stored bond dimension when at least ``PLATEAU`` cuts share it) while the cut
    could hold more
    (``local_dims`` known: chi below the smaller side's dimension).  The
    weight it stands for is the larger of ``TAIL_FACTOR`` times its
    smallest stored lambda^2 (complete spectra only) and the run's
    discarded weight when the document records one; its entropy bias is
    :func:`entropy_bias` of that weight, None when neither is known.

    Returns
    -------
    dict
        ``bond_dimension`` (chi or None), ``bond_source``, ``capped``
        (positions), ``bias`` (nats per capped position, None where unknown),
        ``weight_source``.
    """
    chi, bond_source = _run_bond(prof)
    out = {"bond_dimension": chi, "bond_source": bond_source, "capped": [], "bias": [],
           "severe": [], "weight_source": None}
    if chi is None:
        return out
    by_pos = {c["position"]: c for c in prof.cuts}
    dims = prof.local_dims
    run_w = _run_weight(prof)
    for p in positions:
        cut = by_pos[int(p)]
        rank = cut.get("bond_dimension") or cut.get("schmidt_rank")
        if rank is None or rank < chi or (dims is not None and chi >= _full_rank(p, dims)):
            continue
        values = cut.get("schmidt_values")
        complete = values is not None and len(values) >= cut.get("schmidt_rank", len(values))
        proxy = TAIL_FACTOR * float(min(values)) ** 2 if complete and len(values) else None
        if proxy is not None and (run_w is None or proxy >= run_w):
            w, source = proxy, "smallest stored Schmidt value"
        elif run_w is not None:
            w, source = run_w, "discarded weight of the run"
        else:
            w, source = None, None
        out["capped"].append(int(p))
        out["bias"].append(None if w is None else entropy_bias(w))
        if w is not None and w >= SEVERE:
            out["severe"].append(int(p))
        out["weight_source"] = out["weight_source"] or source
    return out
