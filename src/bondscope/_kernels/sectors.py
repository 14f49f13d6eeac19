"""Charge-resolved Schmidt spectra at every cut, and their measures.

For a state that is an eigenstate of a conserved total charge Q = Q_A + Q_B
(a sum of one-site charges), the reduced density matrix of the left block A
commutes with Q_A, so its spectrum splits into sectors q of the left
block's charge: p(q) is the sector's weight and S(q) the entropy of its
normalised spectrum.  The total entropy splits exactly as

    S = S_num + S_conf,   S_num = -sum_q p(q) ln p(q),   S_conf = sum_q p(q) S(q)

(the number and configurational entropies).  Routes, chosen by
:func:`charge_spectra`:

* ``sector-svd`` (state vectors): each cut's matrix, rows grouped by the
  left charge q and columns by the right charge Q - q; one SVD per block.
* ``block-sweep`` (MPS whose bond indices carry known charges, or dense
  tensors whose non-zero pattern is block structured): the QR/LQ sweeps
  run sector by sector (:mod:`.blocksweep`).
* ``charge-sweep`` (dense MPS in any gauge): the QR sweep carries the left
  block's charge and block-diagonalises each cut's bond matrix
  (:mod:`.labelsweep`).

A state that is not an eigenstate of the total charge is refused.

References
----------
A. Lukin et al., Science 364, 256 (2019) -- number and configurational entropy;
N. Laflorencie and S. Rachel, J. Stat. Mech. P11013 (2014) -- the
charge-resolved spectrum and the split S = S_num + S_conf.
"""

import math

import numpy as np

from .._errors import CheckpointError
from .._measure import resolution_floor, spectrum_measures
from .._source import source_eps
from .balance import SweepScales
from .blocksweep import charge_groups
from .conditioning import GaugeLedger, warn_large_floor

__all__ = ["SectorResult", "add_sector_fields", "charge_spectra", "sector_measures",
           "leak_tolerance", "sector_document", "block_estimate", "CHARGE_SWEEP_WORK"]

# A state whose weight outside its dominant total charge is at most this many
# eps of its stored precision counts as an eigenstate (as the norm check does).
_LEAK_EPS_UNITS = 100
# The sweeps keep the bond matrices of this many bonds in memory (and spill the rest),
# up to the store's byte budget: block-sparse bonds are small, so they spill sooner.
_KEEP_BONDS = 16
# Work of the any-gauge charge sweep relative to the plain sweeps, counted: the plain
# right-to-left sweep, and per site the product R A, its product with L (d chi^3 more),
# one SVD with vectors per sector and the projection onto the kept vectors; and its
# extra tensor-sized arrays (the sector rows of R A, their products with L, the vectors).
CHARGE_SWEEP_WORK = 3.0
CHARGE_SWEEP_TENSORS = 3
# Memory of the block-wise sweeps beyond their arrays: the sector threads' BLAS
# buffers and interpreter state (measured: the estimate's shortfall against the peak
# of scripts/bench_sectors.py at L = 64, chi = 1024).
_BLOCK_OVERHEAD = 8 * 2**20


class SectorResult:
    """Charge-resolved spectra of every cut.

    Attributes
    ----------
    spectra : list of ndarray
        Per cut, every Schmidt value of the normalised state, descending.
    floors : list of float
        Per cut, the resolution floor of those values.
    sectors : list of list of (tuple, ndarray)
        Per cut, (left-block charge key, that sector's Schmidt values of the
        normalised state, descending), sorted by key.
    total_charge : tuple
        Key of the state's total charge.
    leak : float
        Weight outside the total charge (and, for the charge sweep, the
        largest weight dropped at a cut as rounding), relative; folded into
        the floors as sqrt(leak).
    norm : float
    route : str
    infidelity : None
        Truncation is not tracked by these routes.
    norm_exponent : int
        The state's norm is ``norm * 2**norm_exponent`` (the scale the sweeps removed).
    """

    def __init__(self, sectors, floors, total_charge, leak, norm, route, norm_exponent=0):
        self.sectors, self.floors = sectors, floors
        self.total_charge, self.leak, self.norm, self.route = total_charge, leak, norm, route
        self.infidelity, self.norm_exponent = None, norm_exponent
        self.spectra = [np.sort(np.concatenate([v for _, v in cut]))[::-1] if cut
                        else np.zeros(1) for cut in sectors]


def leak_tolerance(dtype):
    """Largest relative weight outside the total charge accepted for this stored dtype."""
    dtype = np.dtype(dtype)
    eps = np.finfo(dtype if dtype.kind in "fc" else np.float64).eps
    return _LEAK_EPS_UNITS * float(eps)


def _refuse(name, totals, charges, tol):
    """Raise unless one total charge holds all but at most ``tol`` of the weight."""
    weight = sum(totals.values())
    if not weight > 0:
        raise CheckpointError(f"{name}: the state has zero norm")
    ranked = sorted(totals.items(), key=lambda kv: -kv[1])
    dominant, outside = ranked[0][0], sum(w for _, w in ranked[1:]) / weight
    if outside > tol:
        other, w = ranked[1]
        raise CheckpointError(
            f"{name}: not an eigenstate of the total charge: weight {outside:.3g} lies "
            f"outside the dominant total charge {charges.text(dominant)} (the largest, "
            f"{w / weight:.3g}, at total charge {charges.text(other)}); check the local "
            "charges (--charges), or profile without them")
    return dominant, outside


def _normalised_cuts(raw, name):
    """Sector values divided by each cut's total norm; (cuts, norm of the first cut)."""
    out, norm = [], None
    for cut in raw:
        total = math.sqrt(sum(float(np.vdot(v, v).real) for _, v in cut))
        if not total > 0:
            raise CheckpointError(f"{name}: the state has zero norm")
        norm = total if norm is None else norm
        out.append([(q, v / total) for q, v in cut])
    return out, norm


def _state_totals(psi, charges, dims):
    """Weight of the state per total charge, from the first cut's rows."""
    right = charge_groups(charges.block(range(1, len(dims))))
    mat = psi.reshape(dims[0], -1)
    totals = {}
    for s in range(dims[0]):
        row = np.abs(mat[s]) ** 2
        for q, cols in right.items():
            key = charges.key(charges.add(charges.sites[0][s], q))
            totals[key] = totals.get(key, 0.0) + float(row[cols].sum())
    return totals


def amplitude_sectors(src, charges, *, leak_tol=None, tick=None):
    """Charge-resolved spectra at every cut of a state vector (route ``sector-svd``).

    Parameters
    ----------
    src : AmplitudeSource
    charges : ChainCharges
        Local charges bound to ``src.local_dims``.
    leak_tol : float, optional
        Largest weight outside the dominant total charge accepted (default
        :func:`leak_tolerance` of the stored dtype).
    tick : callable, optional
        Called once per cut.

    Returns
    -------
    SectorResult
        Route ``sector-svd``.

    Raises
    ------
    CheckpointError
        Zero norm, or the state is not an eigenstate of the total charge.

    Notes
    -----
    Per cut, the rows of the (left, right) matrix are grouped by left
    charge q and the columns by right charge; only the blocks (q, Q - q)
    hold amplitudes, and their singular values are the sector spectra.
    Cost per cut sum_q m_q n_q min(m_q, n_q), far below one SVD of the
    whole matrix; memory: the state, one block and the charges of one cut's
    basis states (int64, left plus right dimension per quantity).  Values
    are resolved as by the ``svd`` route: eps times the larger matrix side
    times lambda_max.
    """
    psi = src.amplitudes()
    dims = src.local_dims
    tol = leak_tolerance(src.dtype) if leak_tol is None else leak_tol
    total, leak = _refuse(src.name, _state_totals(psi, charges, dims), charges, tol)
    from scipy.linalg import svdvals

    raw, sizes = [], []
    left = np.zeros((1, charges.quantities), dtype=np.int64)
    for pos in range(1, len(dims)):
        left = charges.add(left[:, None, :], charges.sites[pos - 1][None, :, :]) \
            .reshape(-1, charges.quantities)
        mat = psi.reshape(left.shape[0], -1)
        right = charge_groups(charges.block(range(pos, len(dims))))
        cut = []
        for q, rows in charge_groups(left).items():
            cols = right.get(charges.key(charges.sub(total, q)))
            if cols is not None:
                block = mat[np.ix_(rows, cols)]
                cut.append((q, svdvals(block, overwrite_a=True, check_finite=False)))
        raw.append(cut)
        sizes.append(max(mat.shape))
        if tick:
            tick()
    cuts, _ = _normalised_cuts(raw, src.name)
    norm = math.sqrt(float(np.vdot(psi, psi).real))
    result = SectorResult(cuts, [], total, leak, norm, "sector-svd")
    eps = float(np.finfo(src.compute_dtype).eps)
    result.floors = [max(resolution_floor(s, "svd", n, eps=eps, data_eps=source_eps(src)),
                         math.sqrt(leak))
                     for s, n in zip(result.spectra, sizes)]
    return result


def _store_budget(src):
    """Bytes of bond matrices kept in memory: those of _KEEP_BONDS bonds, at most STORE_BYTES."""
    from .store import STORE_BYTES

    if hasattr(src, "bond_sectors"):
        largest = max(sum(d * d for d in sectors.values()) for sectors in src.bond_sectors)
    else:
        largest = max(src.bond_dims) ** 2
    return min(STORE_BYTES, _KEEP_BONDS * largest * src.compute_dtype.itemsize)


def block_estimate(src):
    """(memory bytes, flops, detail) of the block-wise sweeps of a block source.

    Per site: its blocks as stored and as computed, and for each of the
    (two) sectors in flight its stacked matrix; the bond store's resident
    part; work 2 * 2 rows_q chi_q^2 per sector, site and sweep plus 10 chi_q^3
    per sector and cut; a fixed allowance for the sector threads' BLAS
    buffers.
    """
    from .store import resident_bytes

    item = np.dtype(src.compute_dtype).itemsize
    stored = np.dtype(src.dtype).itemsize
    site_bytes, sector_bytes, flops, bond_bytes = 0, 0, 0.0, []
    for i in range(src.sites):
        left, right = src.bond_sectors[i], src.bond_sectors[i + 1]
        counts = {}
        for row in src.charges.sites[i]:
            counts[src.charges.key(row)] = counts.get(src.charges.key(row), 0) + 1
        rows = {}
        entries = 0
        for ql, k in left.items():
            for qp, d in counts.items():
                qr = src.charges.key(src.charges.add(ql, qp))
                if qr in right:
                    entries += k * d * right[qr]
                    rows[qr] = rows.get(qr, 0) + k * d
        site_bytes = max(site_bytes, entries * (item + stored))
        for qr, m in rows.items():
            c = right[qr]
            sector_bytes = max(sector_bytes, m * c * item)
            flops += 2 * 2 * m * c * c + 10 * c ** 3
        if i < src.sites - 1:
            bond_bytes.append(sum(d * d for d in right.values()) * item)
    store = resident_bytes(bond_bytes, _store_budget(src))
    memory = 2 * site_bytes + 2 * 2 * sector_bytes + store + _BLOCK_OVERHEAD
    return memory, flops, {"largest_site_blocks_bytes": site_bytes,
                           "largest_sector_matrix_bytes": sector_bytes}


def chain_sectors(src, charges, *, scratch=None, leak_tol=None, tick=None, route="auto"):
    """Charge-resolved spectra at every cut of an MPS in any gauge.

    Parameters
    ----------
    src : ChainSource or a block source
        A block source (one with ``blocks(i)``, ``first_charge`` and
        ``last_charge``) is swept block-wise; a dense one block-wise when its
        non-zero pattern is block structured, else by the charge sweep.
    charges : ChainCharges
        Local charges bound to ``src``'s sites.
    scratch : str, optional
        Directory for spilled bond matrices.
    leak_tol : float, optional
        As for :func:`amplitude_sectors`.
    tick : callable, optional
        Called once per site tensor processed.
    route : {"auto", "charge-sweep"}
        ``"charge-sweep"`` skips the block-wise attempt on a dense chain.

    Returns
    -------
    SectorResult

    Raises
    ------
    CheckpointError
        The state has zero norm or is not an eigenstate of the total charge.

    Notes
    -----
    Block-wise: cost sum_q chi_q^3 per site and sweep instead of chi^3 (see
    :func:`.blocksweep.block_chain`).  A dense chain is first tried
    block-wise, inferring the bond charges from its non-zero pattern as the
    right-to-left sweep reads it; at the first tensor whose pattern admits no
    charges (at once, for a gauge that mixes charges) the sweep restarts
    with the charge sweep (:func:`.labelsweep.labelled_chain`): exact labels
    on an orthonormal basis, one SVD per sector block at each cut.  Memory in every route:
    a few site tensors plus the bond matrices in a store that keeps those of
    16 bonds (at most 32 MiB) in memory and spills the rest to ``scratch``,
    independent of N.  Floors: eps times n = d max(chi_left, chi_right) of the
    site left of the cut times lambda_max, and at least eps sqrt(n) times the
    cut's conditioning factor (:class:`.conditioning.GaugeLedger`: the rounding
    of every product along both sweeps, which a gauge far from canonical
    enlarges as cond(G)^2 and which stays in the state once made); the charge
    sweep accepts a weight outside the total charge up to the square of that
    rounding, and folds it into the floors as sqrt(leak).
    """
    from .blocksweep import NotBlockStructured, block_chain, dense_blocks
    from .labelsweep import labelled_chain
    from .store import BondStore

    tick = tick or (lambda: None)
    n, dtype = src.sites, src.compute_dtype
    tol = leak_tolerance(src.dtype) if leak_tol is None else leak_tol
    budget, ledger, totals = _store_budget(src), GaugeLedger(n), None
    scales = SweepScales(n, src.name, src.labels)
    if hasattr(src, "blocks"):
        with BondStore(scratch, budget) as store:
            raw, first, last = block_chain(
                ((i, src.blocks(i)) for i in range(n - 1, -1, -1)),
                ((i, src.blocks(i)) for i in range(n)),
                lambda: src.first_charge, lambda: src.last_charge, n, store, tick, dtype,
                ledger, scales)
        route, leak = "block-sweep", 0.0
    else:
        try:
            if route == "charge-sweep":
                raise NotBlockStructured
            leftward, rightward, bonds = dense_blocks(src, charges)
            with BondStore(scratch, budget) as store:
                raw, first, last = block_chain(
                    leftward, rightward, lambda: charges.key(bonds[0][0]),
                    lambda: charges.key(bonds[n][0]), n, store, tick, dtype, ledger,
                    scales)
            route, leak = "block-sweep", 0.0
        except NotBlockStructured:
            ledger, scales = GaugeLedger(n), SweepScales(n, src.name, src.labels)
            with BondStore(scratch, budget) as store:
                raw, dropped, totals = labelled_chain(src, charges, store, tick, ledger,
                                                      scales)
            route = "charge-sweep"
    if route == "block-sweep":
        raw = [sorted((charges.key(charges.sub(q, first)), v) for q, v in cut)
               for cut in raw]
        total = charges.key(charges.sub(last, first))
    cuts, norm = _normalised_cuts(raw, src.name)
    # the first cut's values: R_1 L_1, or R_0 A_0 L_1 in the charge sweep
    removed = scales.exponent(int(route == "block-sweep"), 1)
    scales.rescale(ledger, removed)
    eps = source_eps(src)
    sizes = [max(src.shapes[i][0], src.shapes[i][2]) * src.shapes[i][1] for i in range(n - 1)]
    rounding = eps * np.sqrt(sizes) * ledger.factors(norm)
    if totals is not None:
        # rounding leaks weight out of the total charge: up to the square of its bound
        total, outside = _refuse(src.name, totals, charges, max(tol, float(rounding.max()) ** 2))
        leak = outside + dropped
    result = SectorResult(cuts, [], total, leak, norm, route, removed)
    result.floors = [max(resolution_floor(s, "svd", size, eps=eps), float(g), math.sqrt(leak))
                     for s, size, g in zip(result.spectra, sizes, rounding)]
    warn_large_floor(rounding, eps, src.name)
    return result


def charge_spectra(src, charges, *, scratch=None, leak_tol=None, tick=None, route="auto"):
    """Charge-resolved Schmidt spectra at every cut of a state vector or an MPS.

    Dispatches to :func:`amplitude_sectors` (state vectors) or
    :func:`chain_sectors` (MPS, any gauge); see those for parameters, cost
    and memory.

    Raises
    ------
    CheckpointError
        Zero norm, or the state is not an eigenstate of the total charge.
    """
    if src.kind == "state-vector":
        return amplitude_sectors(src, charges, leak_tol=leak_tol, tick=tick)
    return chain_sectors(src, charges, scratch=scratch, leak_tol=leak_tol, tick=tick,
                         route=route)


def sector_measures(sectors, floor, charges, *, renyi=(), base=math.e):
    """Per-sector and split measures of one cut.

    Parameters
    ----------
    sectors : list of (tuple, ndarray)
        (left-block charge key, Schmidt values of the normalised state).
    floor : float
        The cut's resolution floor (on the normalised state's values).
    charges : ChainCharges
    renyi : sequence of str
        Rényi orders as written.
    base : float
        Logarithm base.

    Returns
    -------
    dict
        ``sectors``: list, one per sector with a value above the floor, of
        ``charge`` (int, or list for several quantities), ``probability``
        p(q), ``entropy`` S(q) and ``renyi`` of the sector's normalised
        spectrum, ``schmidt_rank`` (values above the sector's floor),
        ``resolution_floor`` (the cut's floor over sqrt(p(q)): the sector's
        values are normalised within the sector) and ``values`` (the
        sector's normalised values above that floor, descending);
        ``number_entropy`` -sum p ln p, ``configurational_entropy``
        sum p S(q); ``charge_mean`` and ``charge_variance`` of the left
        block (None for a Z_M quantity, whose mean and variance depend on
        how its values are represented); per quantity a list when several.

    Notes
    -----
    The entropies use the values above the floor, as the whole cut's do, so
    number + configurational entropy equals the cut's entropy to within the
    weight under the floor (at most the unresolved count times floor^2).
    Sectors without a value above the floor are not listed; their weight is
    below rank times floor^2.
    """
    scale = 1.0 / math.log(base)
    listed, number, conf = [], 0.0, 0.0
    probs, keys = [], []
    for q, v in sectors:
        p = float(np.vdot(v, v).real)
        if not v.size or not p > 0:
            continue
        s_floor = floor / math.sqrt(p)
        normed = v / math.sqrt(p)
        m = spectrum_measures(normed, renyi, base, s_floor)
        number -= p * math.log(p)
        conf += p * m["entropy"] / scale
        probs.append(p)
        keys.append(q)
        if v[0] <= floor:
            continue
        listed.append({"charge": charges.label(q), "probability": p,
                       "entropy": m["entropy"] + 0.0,          # never -0.0
                       "renyi": {k: v + 0.0 for k, v in m["renyi"].items()},
                       "schmidt_rank": m["schmidt_rank"],
                       "resolution_floor": s_floor, "values": normed[normed > s_floor]})
    probs = np.array(probs)
    karr = np.array(keys, dtype=np.float64).reshape(len(keys), -1)
    means, variances = [], []
    for j, cyclic in enumerate(charges.cyclic):
        if cyclic or not probs.size:
            means.append(None)
            variances.append(None)
            continue
        mean = float(probs @ karr[:, j] / probs.sum())
        means.append(mean)
        variances.append(float(probs @ (karr[:, j] - mean) ** 2 / probs.sum()))
    one = charges.quantities == 1
    return {"sectors": listed, "number_entropy": max(number, 0.0) * scale,
            "configurational_entropy": max(conf, 0.0) * scale,
            "charge_mean": means[0] if one else means,
            "charge_variance": variances[0] if one else variances}


def add_sector_fields(cuts, sectors_per_cut, floors, charges, opts):
    """Extend each cut's entry with its :func:`sector_measures` (``schmidt_values`` per
    sector with ``opts.spectrum``)."""
    for cut, sectors, floor in zip(cuts, sectors_per_cut, floors):
        m = sector_measures(sectors, floor, charges, renyi=opts.renyi, base=opts.base_value)
        for sec in m["sectors"]:
            values = sec.pop("values")
            if opts.spectrum:
                k = values.size if opts.spectrum is True else opts.spectrum
                sec["schmidt_values"] = values[:k].tolist()
        cut.update(m)


def sector_document(result, charges, opts, cuts):
    """Add the charge-resolved fields to each cut's document entry; return the top-level
    ``charges`` field.

    Parameters
    ----------
    result : SectorResult
    charges : ChainCharges
    opts : ProfileOptions
        ``renyi``, ``base_value`` and ``spectrum`` are used.
    cuts : list of dict
        The per-cut entries, extended in place with ``sectors``,
        ``number_entropy``, ``configurational_entropy``, ``charge_mean`` and
        ``charge_variance`` (docs/profile-schema.md).
    """
    add_sector_fields(cuts, result.sectors, result.floors, charges, opts)
    return {"local": charges.spec_text(), "moduli": list(charges.moduli),
            "quantities": charges.quantities, "total": charges.label(result.total_charge),
            "outside_weight": result.leak}
