"""Site-resolved entanglement: one-site entropies, mutual information, decay, ordering."""

import dataclasses
import json
import math
import os
from pathlib import Path

import numpy as np

from .._errors import CheckpointError
from .._results import Result

__all__ = [
    "FORMAT",
    "VERSION",
    "MutualInformation",
    "as_mutual",
    "audenaert",
    "load_mutual",
    "mutual_information",
]

FORMAT = "bondscope-mutual"
VERSION = 1
# |<P>| of a fermionic state must be this close to 1 (common practice)
_PARITY_SLACK = 1e-6


def audenaert(distance, dim):
    """Fannes-Audenaert bound on |S(rho) - S(sigma)| in nats for trace distance T.

    T ln(D - 1) + h(T), h the binary entropy (Audenaert, J. Phys. A 40, 8127
    (2007)); T = 1/2 ||rho - sigma||_1 <= 1 - 1/D.

    Examples
    --------
    >>> round(audenaert(0.0, 4), 12), round(audenaert(0.5, 2), 6)
    (0.0, 0.693147)
    """
    t = min(max(float(distance), 0.0), 1.0 - 1.0 / dim)
    if t <= 0:
        return 0.0
    h = -t * math.log(t) - (1 - t) * math.log(1 - t) if t < 1 else 0.0
    return t * math.log(max(dim - 1, 1)) + h


@dataclasses.dataclass(frozen=True, repr=False)
class MutualInformation(Result):
    """Site-resolved entanglement of a state (the ``bondscope mutual`` document).

    Sites are numbered 1..N in every field that names sites.  The JSON
    contract: ``site_entropies`` (length N), ``mutual_information`` (N x N,
    symmetric, zero diagonal) and ``suggested_order`` (a permutation of
    1..N).  See docs/mutual.md for every field.
    """

    format: str
    version: int
    source: str
    kind: str
    sites: int
    local_dims: list
    log_base: object
    parity: list
    total_parity: float
    site_entropies: list
    site_entropy_floors: list
    site_renyi: dict
    mutual_information: list
    mutual_information_floors: list
    gauge_growth: float
    decay: dict
    distances: list
    ordering: dict
    suggested_order: list
    selection: dict
    reordered: dict

    _shown = ("source", "kind", "sites", "total_parity", "gauge_growth", "suggested_order")

    def _summary(self):
        s = np.asarray(self.site_entropies)
        return (f"{self.source}, {self.sites} sites, max s_i {s.max():.4g}, decay "
                f"{self.decay['law']}, ordering {self.ordering['verdict']}")

    @property
    def matrix(self):
        """I(i, j) as an (N, N) array."""
        return np.asarray(self.mutual_information, dtype=float)

    def save(self, path, *, protect=()):
        """Write the document as JSON (whole or not at all); ValueError for another
        suffix or a ``path`` that is one of ``protect`` (the inputs)."""
        from .._files import atomic_write, refuse_overwrite

        path = Path(path)
        if path.suffix.lower() != ".json":
            raise ValueError(f"{path}: a mutual-information document is saved as .json")
        refuse_overwrite(path, protect, "an input")
        text = self.to_json(indent=1) + "\n"
        return atomic_write(path, lambda tmp: Path(tmp).write_text(text))

    @classmethod
    def from_dict(cls, doc, where="mutual information document"):
        """A result from its JSON document (checked for the contract fields)."""
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise CheckpointError(f"{where}: not a bondscope mutual-information document "
                                  f"(expected format {FORMAT!r})")
        names = [f.name for f in dataclasses.fields(cls)]
        missing = [k for k in names if k not in doc]
        if missing:
            raise CheckpointError(f"{where}: missing fields {', '.join(missing)}")
        n = doc["sites"]
        mi = np.asarray(doc["mutual_information"], dtype=float)
        if mi.shape != (n, n) or len(doc["site_entropies"]) != n or \
                sorted(doc["suggested_order"]) != list(range(1, n + 1)):
            raise CheckpointError(f"{where}: fields do not describe {n} sites (mutual_information "
                                  f"{mi.shape}, {len(doc['site_entropies'])} site entropies)")
        return cls(**{k: doc[k] for k in names})


def load_mutual(path):
    """Read a saved mutual-information document (.json)."""
    try:
        with open(path) as f:
            doc = json.load(f)
    except (OSError, ValueError) as exc:
        raise CheckpointError(f"{path}: cannot read a mutual-information document: "
                              f"{exc}") from None
    return MutualInformation.from_dict(doc, str(path))


def _is_document(path):
    if Path(path).suffix.lower() != ".json":
        return False
    try:
        with open(path) as f:
            head = f.read(4096)
    except OSError:
        return False
    return f'"format": "{FORMAT}"' in head or f'"format":"{FORMAT}"' in head


def as_mutual(source, options=None, **settings):
    """A MutualInformation from a result, its document, a saved document or a checkpoint."""
    if isinstance(source, MutualInformation):
        return source
    if isinstance(source, dict):
        return MutualInformation.from_dict(source)
    if isinstance(source, (str, os.PathLike)) and _is_document(source):
        return load_mutual(source)
    return mutual_information(source, options, **settings)


def _check_parity(src, parity):
    if parity is None:
        return
    labels = getattr(src, "labels", None) or list(range(1, src.sites + 1))
    for d, label in zip(src.local_dims, labels):
        if d != len(parity):
            raise ValueError(f"parity (--parity) lists {len(parity)} values but site {label} "
                             f"has local dimension {d}; give one 0/1 per local basis state")


def _entropies(values, floors_in, orders, base, dims):
    """(entropy, floor, renyi dict) of each spectrum of reduced-density eigenvalues."""
    from .._measure import spectrum_measures

    out = {}
    scale = math.log(base)
    for key, w in values.items():
        w = np.clip(np.asarray(w, dtype=float), 0.0, None)
        dim = dims[key]
        m = spectrum_measures(np.sqrt(w / w.sum()), orders, base, 0.0)
        floor = audenaert(0.5 * dim * dim * floors_in[key], dim) / scale
        out[key] = (m["entropy"], floor, m["renyi"])
    return out


def _selection(s, floors, fraction):
    """Stein & Reiher entropy-based selection: sites with s_i >= fraction * max s_i."""
    s, floors = np.asarray(s), np.asarray(floors)
    top = float(s.max())
    out = {"threshold_fraction": fraction, "threshold": fraction * top, "sites": [],
           "entropies": [], "borderline": []}
    if top <= floors.max():
        out["reason"] = "no site entropy exceeds its floor (a product state): nothing to select"
        return out
    ranked = [int(k) for k in np.argsort(-s, kind="stable")]
    threshold = fraction * top
    for k in ranked:
        if s[k] >= threshold - floors[k]:
            out["sites"].append(k + 1)
            out["entropies"].append(float(s[k]))
            if abs(s[k] - threshold) <= floors[k]:
                out["borderline"].append(k + 1)
    out["reason"] = f"{len(out['sites'])} of {len(s)} sites have s_i >= {fraction:g} x max s_i"
    return out


def mutual_information(source, options=None, *, select=0.1, reorder=True, swap_bond_dim=None,
                       budget_target=1e-8, workers=None, scheduler=None, progress=False,
                       **profiling):
    """One-site entropies, the mutual-information matrix, its decay and ordering advice.

    Parameters
    ----------
    source : str, Path, ndarray or list of ndarray
        An HDF5 checkpoint, a state vector or site tensors (as :func:`bondscope.profile`).
    options : ProfileOptions, optional
        Layout, ``renyi`` (one-site Rényi entropies), ``base``, ``parity``
        (fermion parity of each local basis state: the sites are then
        fermionic modes in Jordan-Wigner order), ``scratch``, ``threads``,
        ``max_memory``; keywords override its fields.
    select : float
        Orbital selection threshold, a fraction of the largest s_i.
    reorder : bool
        Profile the state in the suggested order when it differs from the current one.
    swap_bond_dim : int, optional
        Bond-dimension cap of the swap gates that reorder an MPS (default:
        its largest stored bond).
    budget_target : float
        Discarded weight per cut for the bond-dimension budgets before and after.
    workers : int, optional
        Local worker processes over first sites (MPS); default this process.
    scheduler : str or dask.distributed.Client, optional
        A Dask scheduler address (or client) to run the pairs on instead.
    progress : bool
        Show a progress bar on a terminal's stderr.
    **profiling
        Fields of :class:`~bondscope.ProfileOptions`.

    Returns
    -------
    MutualInformation

    Raises
    ------
    CheckpointError
        An unreadable source; with ``parity``, a state that mixes even and
        odd total parity (the fermionic matrices are then not defined).
    MemoryLimitError
        The pre-flight estimate exceeds the memory limit.
    ValueError, TypeError
        A bad option; ``parity`` whose length is not a site's local dimension.

    Notes
    -----
    s_i is the von Neumann entropy of rho_i and I(i, j) = s_i + s_j - s_ij.
    Without ``parity`` the sites are distinguishable (spins); with it, every
    two-site matrix includes the Jordan-Wigner string of the sites between,
    which gives the fermionic (orbital) mutual information; the two differ
    at non-adjacent sites whenever the string correlates with them.  Cost and
    memory: :func:`bondscope._kernels.environments.chain_densities` (MPS,
    O(N^2 d^3 chi^3)) and :func:`bondscope._kernels.partialtrace.state_densities`
    (state vectors).  Each value carries a floor: the entries' error bound
    passed through the Fannes-Audenaert inequality.  Sites selected follow
    Stein & Reiher, J. Chem. Theory Comput. 12, 1760 (2016); the ordering,
    Barcza et al., Phys. Rev. A 83, 012508 (2011).

    Examples
    --------
    >>> import numpy as np, bondscope
    >>> ghz = np.zeros(8); ghz[[0, 7]] = 2 ** -0.5
    >>> m = bondscope.mutual_information(ghz, base=2, reorder=False)
    >>> np.round(m.site_entropies, 12).tolist(), round(m.mutual_information[0][2], 12)
    ([1.0, 1.0, 1.0], 1.0)
    """
    from contextlib import nullcontext

    from .._estimate import check_memory
    from .._kernels.pairtasks import pair_estimate, pair_spectra
    from .._options import ProfileOptions
    from .._pipeline import _progress, _threads, open_any
    from .decay import distance_profile, fit_decay
    from .ordering import ordering_advice, reordered_profiles

    opts = ProfileOptions.from_kwargs(options, **profiling)
    if not 0 < select <= 1:
        raise ValueError(f"select (--select) must be a fraction in (0, 1], found {select!r}")
    if swap_bond_dim is not None and (isinstance(swap_bond_dim, bool) or
                                      int(swap_bond_dim) != swap_bond_dim or swap_bond_dim < 1):
        raise ValueError(f"swap_bond_dim (--swap-bond-dim) must be an integer >= 1, found "
                         f"{swap_bond_dim!r}")
    if workers is not None and (isinstance(workers, bool) or int(workers) != workers
                                or workers < 1):
        raise ValueError(f"workers (--workers) must be an integer >= 1, found {workers!r}")
    with open_any(source, opts) as src:
        if src.kind not in ("mps", "state-vector"):
            raise ValueError(f"{src.name}: mutual information of a {src.kind} source is not "
                             "supported; give an open chain (MPS) or a state vector")
        if hasattr(src, "blocks"):
            raise ValueError("mutual information of block-sparse checkpoints is not supported; "
                             "give a dense layout (--state or --tensors)")
        _check_parity(src, opts.parity)
        cap = None
        if reorder and src.kind == "mps":
            cap = swap_bond_dim or max(src.bond_dims)
        check_memory(pair_estimate(src, workers=workers, reorder_cap=cap), opts.max_memory)
        n = src.sites
        with _threads(opts.threads), _progress(n * (n - 1) // 2, progress, "mutual") as bar:
            dens = pair_spectra(src, source, opts, workers=workers, scheduler=scheduler,
                                tick=bar.update if bar is not None else None)
        if opts.parity is not None and abs(dens.total_parity) < 1 - _PARITY_SLACK:
            raise CheckpointError(
                f"{src.name}: the state mixes even and odd fermion parity (<P> = "
                f"{dens.total_parity:.6g}); fermionic mutual information needs a state of "
                "definite parity: check --parity, or leave it out for distinguishable sites")
        dims = dict(enumerate(src.local_dims))
        dims.update({(i, j): dims[i] * dims[j] for i in range(n) for j in range(i + 1, n)})
        ent = _entropies({**dens.one, **dens.two}, dens.errors, opts.renyi, opts.base_value,
                         dims)
        s = np.array([ent[i][0] for i in range(n)])
        fs = np.array([ent[i][1] for i in range(n)])
        mi, mf = np.zeros((n, n)), np.zeros((n, n))
        for i in range(n):
            for j in range(i + 1, n):
                mi[i, j] = mi[j, i] = max(s[i] + s[j] - ent[i, j][0], 0.0)
                mf[i, j] = mf[j, i] = fs[i] + fs[j] + ent[i, j][1]
        rows = distance_profile(mi, mf)
        advice = ordering_advice(mi, mf)
        order = [k - 1 for k in advice["suggested_order"]]
        reordered = None
        if reorder and order != list(range(n)):
            with _threads(opts.threads) if opts.threads else nullcontext():
                reordered = reordered_profiles(src, order, opts, cap=cap, target=budget_target)
        return MutualInformation(
            format=FORMAT, version=VERSION, source=src.name, kind=src.kind, sites=n,
            local_dims=list(src.local_dims), log_base=opts.base,
            parity=list(opts.parity) if opts.parity is not None else None,
            total_parity=dens.total_parity, site_entropies=s.tolist(),
            site_entropy_floors=fs.tolist(),
            site_renyi={k: [ent[i][2][k] for i in range(n)] for k in opts.renyi},
            mutual_information=mi.tolist(), mutual_information_floors=mf.tolist(),
            gauge_growth=float(dens.growth), decay=fit_decay(rows), distances=rows,
            ordering=advice, suggested_order=advice["suggested_order"],
            selection=_selection(s, fs, select), reordered=reordered)
