"""The main job: checkpoint -> source -> sweep -> Profile document."""

import math
import os
import sys
import warnings
from contextlib import nullcontext
from pathlib import Path

import numpy as np

from ._document import FORMAT, VERSION, Profile, parse_log_base
from ._estimate import check_memory, estimate
from ._measure import discarded_weight, entropy_measures, kept_rank

__all__ = ["profile", "inspect", "open_any", "renyi_orders", "UnnormalisedStateWarning"]

# Relative deviation of the norm from 1 above which the user is told, and its
# floor in units of the stored precision's eps (a float32 state is normalised to ~1e-7).
_NORM_TOLERANCE = 1e-8
_NORM_EPS_UNITS = 100


class UnnormalisedStateWarning(UserWarning):
    """The stored state was not normalised; the normalised state was profiled."""


def renyi_orders(renyi):
    """Rényi orders as the keys they are written under ("2", "0.5", "inf"), validated."""
    if isinstance(renyi, (str, int, float)):
        renyi = [renyi]
    out = []
    for a in renyi:
        key = a.strip() if isinstance(a, str) else (str(int(a)) if float(a).is_integer()
                                                     else repr(float(a)))
        try:
            ok = float(key) >= 0
        except ValueError:
            ok = False
        if not ok:
            raise ValueError(f"Renyi order {a!r} is not a number >= 0 or 'inf'")
        out.append(key)
    return out


def _base(base):
    """(label written to the document, value) of a log base: ("e", e), (2, 2.0), ..."""
    try:
        value = parse_log_base("e" if base is None else base)
    except TypeError:
        raise ValueError(f"log base {base!r} is neither 'e' nor a number") from None
    if value == math.e:
        return "e", value
    return (int(value) if value.is_integer() else value), value


def _check_truncation(bond_dim, weight_tol):
    if bond_dim is not None and (int(bond_dim) != bond_dim or bond_dim < 1):
        raise ValueError(f"bond dimension must be an integer >= 1, found {bond_dim!r}")
    if weight_tol is not None and not 0 <= weight_tol < 1:
        raise ValueError(f"weight tolerance must be in [0, 1), found {weight_tol!r}")


def open_any(source, *, state=None, tensors=None, local_dim=None, axes=None,
             precision="promote"):
    """A validated source from a checkpoint path, a state vector or a list of site tensors."""
    from ._source import amplitudes_from_array, chain_from_arrays

    if isinstance(source, (str, os.PathLike)):
        from ._checkpoint import open_source

        return open_source(source, state=state, tensors=tensors, local_dim=local_dim,
                           axes=axes, precision=precision)
    if state is not None or tensors is not None:
        raise ValueError("state= and tensors= name datasets in a checkpoint file; "
                         "pass arrays directly instead")
    if isinstance(source, np.ndarray):
        return amplitudes_from_array(source, local_dim, precision)
    if isinstance(source, (list, tuple)):
        return chain_from_arrays(list(source), axes, precision)
    raise TypeError(f"cannot profile a {type(source).__name__}; pass a checkpoint path, a "
                    "state vector (ndarray) or a list of site tensors")


def _progress(total, enabled, desc):
    if not enabled or not sys.stderr.isatty():
        return nullcontext(None)
    try:
        from tqdm import tqdm
    except ImportError:
        return nullcontext(None)
    return tqdm(total=total, desc=desc, unit="step", delay=1.0, leave=False, file=sys.stderr)


def _threads(threads):
    if threads is None:
        return nullcontext()
    if threads < 1:
        raise ValueError(f"threads must be >= 1, found {threads}")
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=threads)


def profile(source, *, state=None, tensors=None, local_dim=None, axes=None, renyi=(),
            base="e", spectrum=None, bond_dim=None, weight_tol=None, route="auto",
            scratch=None, max_memory=None, threads=None, precision="promote",
            progress=False):
    """Entanglement profile of a state: spectra and entropies at every cut.

    Parameters
    ----------
    source : str, Path, ndarray or list of ndarray
        An HDF5 checkpoint; a state vector (1-D of length prod(d_i), or shaped
        (d_1, ..., d_N)); or site tensors shaped (left, phys, right) (or in the
        order ``axes``), with bonds of 1 (or rank 2) at the ends.
    state, tensors, local_dim, axes
        Checkpoint layout; see :func:`bondscope.open_source`.
    renyi : sequence of str or float
        Rényi orders, e.g. ``("0.5", "2", "inf")``; keys of ``cuts[].renyi`` as written.
    base : "e" or float
        Logarithm base of all entropies (2 for bits).
    spectrum : None, True or int
        Store the Schmidt values above each cut's resolution floor (True), or
        the K largest of them (int).
    bond_dim, weight_tol : int, float, optional
        Truncation to report: per cut the discarded weight of truncating that
        cut alone; for the state the exact infidelity of successive truncation
        and the bound sum of discarded weights.
    route : {"auto", "gram", "svd"}
        State-vector route (see :func:`bondscope._sweep.amplitude_spectra`).
    scratch : str, optional
        Directory for spilled bond matrices (MPS).
    max_memory : int, optional
        Refuse when the estimate exceeds this many bytes (default: available memory).
    threads : int, optional
        BLAS/LAPACK threads for the duration of the call.
    precision : {"promote", "stored"}
        Compute single-precision data in double (default) or as stored.
    progress : bool
        Show a progress bar on a terminal's stderr.

    Returns
    -------
    Profile

    Raises
    ------
    CheckpointError
        The checkpoint or arrays are not a valid state (see :func:`open_source`),
        NaN/Inf values, zero norm.
    MemoryLimitError
        The pre-flight estimate exceeds the memory limit; nothing is read.
    ValueError, TypeError
        Malformed options.

    Warns
    -----
    UnnormalisedStateWarning
        The state's norm differs from 1; the normalised state is profiled.

    Notes
    -----
    MPS: O(N d chi^3) time, memory of a few site tensors (see
    :func:`bondscope._sweep.chain_spectra`).  State vectors: see
    :func:`bondscope._sweep.amplitude_spectra`.
    """
    from ._sweep import amplitude_spectra, chain_spectra, choose_route

    orders = renyi_orders(renyi)
    base_label, base_value = _base(base)
    _check_truncation(bond_dim, weight_tol)
    if spectrum is not None and spectrum is not False and spectrum is not True:
        if int(spectrum) != spectrum or spectrum < 1:
            raise ValueError(f"spectrum must be True or a count K >= 1, found {spectrum!r}")
    truncating = bond_dim is not None or weight_tol is not None
    with open_any(source, state=state, tensors=tensors, local_dim=local_dim, axes=axes,
                  precision=precision) as src:
        if src.kind == "state-vector":
            route = choose_route(src.size, route)
        check_memory(estimate(src, route, truncating), max_memory)
        steps = 2 * src.sites - 1 if src.kind == "mps" else src.sites - 1
        with _threads(threads), _progress(steps, progress, "profile") as bar:
            tick = bar.update if bar is not None else None
            if src.kind == "mps":
                result = chain_spectra(src, bond_dim=bond_dim, weight_tol=weight_tol,
                                       scratch=scratch, tick=tick)
                bonds = src.bond_dims
            else:
                result = amplitude_spectra(src, route=route, bond_dim=bond_dim,
                                           weight_tol=weight_tol, tick=tick)
                bonds = None
        stored_eps = float(np.finfo(src.dtype if src.dtype.kind in "fc" else np.float64).eps)
        if abs(result.norm - 1.0) > max(_NORM_TOLERANCE, _NORM_EPS_UNITS * stored_eps):
            warnings.warn(f"{src.name}: state norm is {result.norm:.12g}; profiled the "
                          "normalised state", UnnormalisedStateWarning, stacklevel=2)
        doc = {"format": FORMAT, "version": VERSION, "source": src.name, "kind": src.kind,
               "sites": src.sites, "local_dims": src.local_dims, "log_base": base_label,
               "norm": result.norm, "route": result.route, "dtype": str(src.dtype),
               "precision": str(src.compute_dtype)}
        from . import __version__
        doc["bondscope_version"] = __version__
        cuts, bound = [], 0.0
        for i, (s, floor) in enumerate(zip(result.spectra, result.floors)):
            m = entropy_measures(s, renyi=orders, base=base_value, floor=floor)
            cut = {"position": i + 1,
                   "bond_dimension": int(bonds[i]) if bonds else m["schmidt_rank"],
                   "schmidt_rank": m["schmidt_rank"], "entropy": m["entropy"],
                   "renyi": m["renyi"], "resolution_floor": floor}
            if truncating:
                keep = min(kept_rank(s, bond_dim, weight_tol), m["schmidt_rank"])
                cut["kept"] = keep
                cut["discarded_weight"] = discarded_weight(s, keep)
                bound += cut["discarded_weight"]
            if spectrum is not None and spectrum is not False:
                resolved = s[:m["schmidt_rank"]]
                k = resolved.size if spectrum is True else int(spectrum)
                cut["schmidt_values"] = resolved[:k].tolist()
            cuts.append(cut)
        if truncating:
            doc["truncation"] = {"bond_dim": bond_dim, "weight_tol": weight_tol,
                                 "infidelity": result.infidelity, "bound": bound}
        doc["cuts"] = cuts
    return Profile(doc)


def inspect(source, *, state=None, tensors=None, local_dim=None, axes=None, route="auto",
            precision="promote"):
    """What a checkpoint holds and what profiling it will cost, without computing spectra.

    Returns
    -------
    dict
        ``kind``, ``source``, ``sites``, ``local_dims``, ``bond_dims`` (MPS),
        ``max_bond_dim``, ``dtype``, ``data_bytes``, ``file_bytes``, ``route``
        (state vectors), ``estimate`` (memory_bytes, flops, seconds) and
        ``available_memory``.

    Raises
    ------
    CheckpointError, ValueError
        As :func:`profile`, for the layout.
    """
    from ._estimate import available_memory

    with open_any(source, state=state, tensors=tensors, local_dim=local_dim, axes=axes,
                  precision=precision) as src:
        info = {"kind": src.kind, "source": src.name, "sites": src.sites,
                "local_dims": src.local_dims, "dtype": str(src.dtype),
                "data_bytes": src.nbytes}
        if isinstance(source, (str, os.PathLike)):
            info["file_bytes"] = Path(source).stat().st_size
        if src.kind == "mps":
            info["bond_dims"] = src.bond_dims
            info["max_bond_dim"] = max(src.bond_dims)
            info["axes"] = ",".join(src.axes)
            info["site_labels"] = [src.labels[0], src.labels[-1]]
            est = estimate(src)
        else:
            from ._sweep import choose_route

            info["route"] = choose_route(src.size, route)
            est = estimate(src, info["route"])
        info["estimate"] = est.to_dict()
        info["available_memory"] = available_memory()
    return info
