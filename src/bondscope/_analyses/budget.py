"""Bond-dimension budget: the smallest bonds that meet an error target, and their cost."""

import dataclasses

import numpy as np

from .._results import Result
from .inputs import as_profile

__all__ = ["SPLITS", "BondBudget", "ResolutionError", "bond_budget"]

SPLITS = ("equal", "pooled")
# sum of squares above 1 by more than this is not normalised
_NORM_SLACK = 1e-8
# rounding of a sum of n squares: n * this (a few float64 eps)
_ROUNDING = 4 * np.finfo(float).eps


@dataclasses.dataclass(frozen=True)
class BondBudget(Result):
    """Result of :func:`bond_budget`; fields as its JSON keys (docs/analysis.md)."""

    target: float
    total: float
    split: str
    cuts: list
    max_bond_dimension: int
    discarded_weight_sum: float
    route: str
    resolution_floor: float
    dtype: str
    local_dims: list
    memory_bytes: int
    current_memory_bytes: int
    memory_ratio: float
    sweep_cost: int
    current_sweep_cost: int
    sweep_cost_ratio: float

    _shown = ("max_bond_dimension", "discarded_weight_sum", "target", "total", "route",
              "resolution_floor", "memory_ratio")

    def _summary(self):
        goal = f"target {self.target:g}" if self.target is not None else f"total {self.total:g}"
        return (f"{goal}: max bond dimension {self.max_bond_dimension}, discarded weight "
                f"<= {self.discarded_weight_sum:.3g}")


class ResolutionError(ValueError):
    """A target the stored spectra cannot certify (below their floor, or beyond a top-K list)."""


def _hidden_count(cut, prof, count):
    """How many Schmidt values the cut may hold beyond the ``count`` stored."""
    n = max(count, int(cut.get("bond_dimension") or 0), int(cut.get("schmidt_rank") or 0))
    dims = prof.local_dims
    if dims is not None and prof.kind != "mps":
        logs = np.log(np.asarray(dims, dtype=float))
        side = min(logs[:cut["position"]].sum(), logs[cut["position"]:].sum())
        n = max(n, int(min(np.exp(min(side, 60.0)), 2.0 ** 60)))
    return n - count


def _tails(cut, prof, where):
    """(w, u): w[k] the weight dropped when keeping the k largest values (k = 0..len),
    u[k] the bound on what w[k] may miss: each dropped value is known to +-floor,
    values below the floor and (for a top-K list) the unstored rest are unknown."""
    values = np.asarray(cut["schmidt_values"], dtype=float)
    w = values ** 2
    total = float(w.sum())
    if total > 1.0 + _NORM_SLACK:
        raise ValueError(f"{where}: the squared Schmidt values sum to {total:.12g} > 1; spectra "
                         "must be of the normalised state")
    floor = float(cut.get("resolution_floor", 0.0))
    top_k = len(values) < int(cut.get("schmidt_rank", len(values)))
    shortfall = max(1.0 - total, 0.0)
    # a complete list's shortfall below the slack is rounding; a top-K list's is weight
    unstored = shortfall if top_k or shortfall > _NORM_SLACK else 0.0
    tail = np.concatenate([np.cumsum(w[::-1])[::-1], [0.0]]) + unstored
    spread = 2.0 * values * floor + floor ** 2
    hidden = _hidden_count(cut, prof, len(values)) * floor ** 2
    rounding = _ROUNDING * (len(values) + 1) if top_k else 0.0
    unsure = np.concatenate([np.cumsum(spread[::-1])[::-1], [0.0]]) + hidden + rounding
    return tail, unsure


def _smallest_rank(tail, unsure, eps):
    ok = np.nonzero(tail[1:] + unsure[1:] <= eps)[0]
    return int(ok[0]) + 1 if len(ok) else None


def _pooled(tails, eps):
    """Drop the globally smallest weights while their sum (with its bound) stays <= eps."""
    items = []
    for i, (tail, unsure) in enumerate(tails):
        w = (tail[:-1] - tail[1:]) + (unsure[:-1] - unsure[1:])
        items += [(float(v), i) for v in w[1:]]
    items.sort()
    keep = [len(t) - 1 for t, _ in tails]
    dropped = sum(float(t[-1] + u[-1]) for t, u in tails)
    for v, i in items:
        if dropped + v > eps:
            break
        dropped += v
        keep[i] -= 1
    return keep


def _mps_cost(chis, dims, itemsize):
    bonds = [1, *chis, 1]
    memory = sum(bonds[i] * d * bonds[i + 1] for i, d in enumerate(dims)) * itemsize
    # QR/SVD of the (chi_left d) x chi_right site matrix: m n min(m, n)
    sweep = sum(bonds[i] * d * bonds[i + 1] * min(bonds[i] * d, bonds[i + 1])
                for i, d in enumerate(dims))
    return int(memory), int(sweep)


def bond_budget(source, *, target=None, total=None, split="equal", dtype=None, local_dim=None):
    """Smallest bond dimension per cut for an error target, and the cost of that MPS.

    Parameters
    ----------
    source : Profile, dict or path
        A profile with ``cuts[].schmidt_values``, or a checkpoint (profiled
        with all spectra).
    target : float, optional
        Per-cut target: at each cut keep the smallest chi whose discarded
        weight (sum of the dropped lambda^2) is <= `target`.
    total : float, optional
        Whole-state target for the sum of the per-cut discarded weights,
        which bounds the infidelity of successive truncation.  Exactly one
        of `target` and `total` is given.
    split : {"equal", "pooled"}
        How `total` is spread over the N-1 cuts: "equal" gives each cut
        ``total / (N - 1)``; "pooled" drops the globally smallest weights
        across all cuts while their sum stays <= `total`.
    dtype : str or numpy dtype, optional
        Element type for the memory estimate; default the document's
        ``dtype``, else float64.
    local_dim : int or sequence of int, optional
        Local dimensions when the document has no ``local_dims``.

    Returns
    -------
    BondBudget
        ``cuts`` (``position``, ``bond_dimension``, ``discarded_weight`` (an
        upper bound: ``resolved_weight``, the stored values dropped, plus
        ``unresolved_bound``), ``current_bond_dimension``,
        ``resolution_floor``), ``max_bond_dimension``, ``route`` and
        ``resolution_floor`` (the largest; Schmidt values are counted above
        it),
        ``discarded_weight_sum`` (the infidelity bound), ``target``,
        ``total``, ``split``, and the cost of the budget MPS against the
        current bonds: ``memory_bytes``, ``current_memory_bytes``,
        ``memory_ratio``, ``sweep_cost``, ``current_sweep_cost``,
        ``sweep_cost_ratio`` (None without local dimensions).

    Raises
    ------
    ValueError
        Neither or both targets, a target outside [0, 1), no spectra, or a
        spectrum whose squares sum above 1.
    ResolutionError
        A target the stored spectra cannot certify: below the weight that
        may hide under the resolution floor, or beyond a top-K list.

    Notes
    -----
    Cost O(sum of the spectrum lengths); "pooled" adds a sort of all
    weights.  The current bonds are ``cuts[].bond_dimension`` (the length
    of the stored spectrum where absent).  A stored top-K spectrum counts
    the weight it leaves out (1 - sum lambda^2, plus rounding) as
    discarded at every rank; a complete one's shortfall below 1e-8 is
    rounding.  Each stored value is known to within the cut's floor f, so a
    dropped value lambda may carry 2 lambda f + f^2 more, and each value
    the cut may hold under the floor (up to its bond dimension, or the
    smaller side's dimension of a state vector) up to f^2: a rank meets
    the target only when the dropped weight plus this bound does.  Sweep cost is
    modelled as sum_i m_i n_i min(m_i, n_i) with m_i = chi_{i-1} d_i,
    n_i = chi_i: the QR or SVD of each site matrix, O(d chi^3) per site.

    References
    ----------
    .. [1] I. V. Oseledets, SIAM J. Sci. Comput. 33, 2295 (2011), Thm 2.2:
           successive truncation of a tensor train with per-cut errors
           eps_k has squared error <= sum eps_k^2; Algorithm 1 uses the
           equal split of the budget.
    """
    if (target is None) == (total is None):
        raise ValueError("give exactly one of target (per cut) and total (whole state)")
    eps = float(target if target is not None else total)
    if not 0.0 <= eps < 1.0:
        raise ValueError(f"error target must be in [0, 1), found {eps!r}")
    if split not in SPLITS:
        raise ValueError(f"split (--split) must be one of {', '.join(SPLITS)}, found {split!r}")
    if dtype is not None:
        try:
            np.dtype(dtype)
        except TypeError:
            raise ValueError(f"dtype (--dtype) {dtype!r} is not a numpy dtype, e.g. float64 or "
                             "complex128") from None
    prof = as_profile(source, spectra=True)
    cuts = sorted(prof.cuts, key=lambda c: c["position"])
    where = prof.source or "profile"
    tails = [_tails(c, prof, f"{where}: cut {c['position']}") for c in cuts]
    route = prof.get("route")
    if target is not None or split == "equal":
        per_cut = eps if target is not None else eps / max(1, len(cuts))
        chis = []
        for c, (tail, unsure) in zip(cuts, tails):
            chi = _smallest_rank(tail, unsure, per_cut)
            if chi is None:
                raise ResolutionError(_unseen(where, c, tail, unsure, per_cut, route))
            chis.append(chi)
    else:
        chis = _pooled(tails, eps)
        left = sum(float(t[-1] + u[-1]) for t, u in tails)
        if left > eps:
            raise ResolutionError(f"{where}: the stored spectra cannot resolve weight below "
                                  f"{left:.3g} (values under the floor or left out of a top-K "
                                  f"list) > total {eps:.3g}; {_hint(route)}")
    current = [int(c.get("bond_dimension", len(c["schmidt_values"]))) for c in cuts]
    out_cuts = [{"position": int(c["position"]), "bond_dimension": chi,
                 "discarded_weight": float(tail[chi] + unsure[chi]),
                 "resolved_weight": float(tail[chi]), "unresolved_bound": float(unsure[chi]),
                 "current_bond_dimension": cur,
                 "resolution_floor": float(c.get("resolution_floor", 0.0))}
                for c, (tail, unsure), chi, cur in zip(cuts, tails, chis, current)]
    out = {
        "target": None if target is None else eps,
        "total": None if total is None else eps,
        "split": None if total is None else split,
        "cuts": out_cuts,
        "max_bond_dimension": max(chis, default=1),
        "discarded_weight_sum": float(sum(c["discarded_weight"] for c in out_cuts)),
        "route": route,
        "resolution_floor": max((c["resolution_floor"] for c in out_cuts), default=0.0),
    }
    out.update(_costs(prof, cuts, chis, current, dtype, local_dim))
    return BondBudget(**out)


def _hint(route):
    if route == "gram":
        return "profile with --accurate (svd route), whose floor is lower, or raise the target"
    return "rerun `bondscope profile --spectrum` (all values) or raise the target"


def _unseen(where, cut, tail, unsure, eps, route):
    k = len(tail) - 1
    floor = float(cut.get("resolution_floor", 0.0))
    return (f"{where}: cut {cut['position']}: target {eps:.3g} is below what the {k} stored "
            f"Schmidt values can certify (weight left out {tail[-1]:.3g}, unresolved under the "
            f"floor {floor:.3g}: up to {unsure[-1]:.3g}); {_hint(route)}")


def _costs(prof, cuts, chis, current, dtype, local_dim):
    sites = prof.sites
    dims = prof.local_dims
    if dims is None and local_dim is not None:
        dims = [int(local_dim)] * sites if np.isscalar(local_dim) else [int(d) for d in local_dim]
    dtype = np.dtype(dtype if dtype is not None else prof.get("dtype", "float64"))
    out = {"dtype": dtype.name, "local_dims": dims}
    keys = ("memory_bytes", "current_memory_bytes", "memory_ratio", "sweep_cost",
            "current_sweep_cost", "sweep_cost_ratio")
    if dims is None:
        return {**out, **dict.fromkeys(keys)}
    if len(dims) != sites:
        raise ValueError(f"{len(dims)} local dimensions for {sites} sites")
    if [c["position"] for c in cuts] != list(range(1, sites)):
        raise ValueError(f"the cost of an MPS needs every cut 1..{sites - 1}; the profile has "
                         f"{len(cuts)} cuts")
    mem, sweep = _mps_cost(chis, dims, dtype.itemsize)
    mem0, sweep0 = _mps_cost(current, dims, dtype.itemsize)
    return {**out, "memory_bytes": mem, "current_memory_bytes": mem0,
            "memory_ratio": mem / mem0, "sweep_cost": sweep, "current_sweep_cost": sweep0,
            "sweep_cost_ratio": sweep / sweep0}
