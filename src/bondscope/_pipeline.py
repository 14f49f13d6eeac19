"""The main job: checkpoint -> source -> sweep -> Profile document."""

import os
import sys
import warnings
from contextlib import nullcontext
from pathlib import Path

import numpy as np

from ._document import FORMAT, VERSION, Profile
from ._estimate import check_memory, estimate
from ._exponent import norm_text, stored_norm
from ._measure import discarded_weight, floor_errors, kept_rank, spectrum_measures
from ._options import ProfileOptions

__all__ = ["profile", "inspect", "open_any", "UnnormalisedStateWarning"]

# Relative deviation of the norm from 1 above which the user is told: the worst-case
# rounding of 10^4 single-precision updates, n eps (Higham, Accuracy and Stability of
# Numerical Algorithms, 2nd ed., sec. 3.1), about 1.2e-3; a time evolution that never
# renormalises drifts by less (1.00005 is ordinary), a state never normalised far more.
# The norm itself is always recorded (the document's ``norm``).
NORM_TOLERANCE = 1e4 * float(np.finfo(np.float32).eps)


class UnnormalisedStateWarning(UserWarning):
    """The stored state was not normalised; the normalised state was profiled."""


def open_any(source, options):
    """A validated source from a checkpoint path, a state vector or a list of site tensors."""
    from ._source import amplitudes_from_array

    if isinstance(source, (str, os.PathLike)):
        from ._blocksparse import has_block_layout, open_blocks
        from ._checkpoint import open_source

        dense = options.state is not None or options.tensors is not None
        if options.blocks or options.block_form or (not dense and has_block_layout(source)):
            return open_blocks(source, pattern=options.blocks, form=options.block_form,
                               charges=options.charges, modulus=options.modulus,
                               axes=options.axes, flow=options.charge_flow,
                               precision=options.precision)
        return open_source(source, precision=options.precision, **options.layout)
    if options.state is not None or options.tensors is not None:
        raise ValueError("state= and tensors= name datasets in a checkpoint file; "
                         "pass arrays directly instead")
    if isinstance(source, np.ndarray):
        return amplitudes_from_array(source, options.local_dim, options.precision)
    if isinstance(source, (list, tuple)):
        from ._cellsource import tensors_source

        return tensors_source(list(source), options.axes, options.precision, options.unit_cell)
    raise TypeError(f"cannot profile a {type(source).__name__}; pass a checkpoint path, a "
                    "state vector (ndarray) or a list of site tensors")


def _progress(total, enabled, desc):
    if not enabled or not sys.stderr.isatty():
        return nullcontext(None)
    from tqdm import tqdm

    return tqdm(total=total, desc=desc, unit="step", delay=1.0, leave=False, file=sys.stderr)


def _threads(threads):
    if threads is None:
        return nullcontext()
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=threads)


def _chain_kernel(src, opts, tick):
    from ._kernels.chain import chain_spectra

    result = chain_spectra(src, bond_dim=opts.bond_dim, weight_tol=opts.weight_tol,
                           scratch=opts.scratch, tick=tick)
    return result, src.bond_dims


def _amplitude_kernel(src, opts, tick):
    from ._kernels.amplitudes import amplitude_spectra

    result = amplitude_spectra(src, route=opts.route, bond_dim=opts.bond_dim,
                               weight_tol=opts.weight_tol, tick=tick)
    return result, None


def _charge_kernel(src, opts, tick):
    from ._kernels.sectors import charge_spectra

    result = charge_spectra(src, _bound_charges(src, opts), scratch=opts.scratch, tick=tick)
    return result, src.bond_dims if src.kind == "mps" else None


def _mixed_kernel(src, opts, tick):
    from ._kernels.mixedprofile import mixed_spectra

    return mixed_spectra(src, opts, tick), src.bond_dims


def _bound_charges(src, opts):
    if hasattr(src, "blocks"):
        return src.charges
    from ._charges import parse_charges
    from ._options import option_label

    return parse_charges(opts.charges, opts.modulus).bind(
        src.local_dims, getattr(src, "labels", None), where=option_label("charges"))


def _cell_kernel(src, opts, tick):
    from ._kernels.cell import cell_spectra

    return cell_spectra(src, maxiter=opts.transfer_iterations, tick=tick), src.bond_dims


def _charged_cell_kernel(src, opts, tick):
    from ._kernels.cellcharges import charged_cell_spectra

    result = charged_cell_spectra(src, _bound_charges(src, opts),
                                  maxiter=opts.transfer_iterations, tick=tick)
    return result, src.bond_dims


# source kind -> (kernel, progress steps); a kernel returns (SweepResult, stored bonds or None)
KERNELS = {
    "mps": (_chain_kernel, lambda src: 2 * src.sites - 1),
    "state-vector": (_amplitude_kernel, lambda src: src.sites - 1),
    "density-matrix": (_mixed_kernel, lambda src: 4 * src.sites - 2),
    "purified": (_mixed_kernel, lambda src: 5 * src.sites - 3),
    "unit-cell": (_cell_kernel, lambda src: src.sites + 3),
}
# with local charges (or a block-sparse source): charge-resolved spectra
CHARGE_KERNELS = {
    "mps": (_charge_kernel, lambda src: 2 * src.sites),
    "state-vector": (_charge_kernel, lambda src: src.sites - 1),
    "unit-cell": (_charged_cell_kernel, lambda src: src.sites + 3),
}


def _route(src, opts):
    """The state-vector route resolved for this source (None for other kinds)."""
    if src.kind != "state-vector":
        return None
    from ._kernels.amplitudes import choose_route

    return choose_route(src.size, opts.route)


def profile(source, options=None, *, progress=False, **kwargs):
    """Entanglement profile of a state: spectra and entropies at every cut.

    Parameters
    ----------
    source : str, Path, ndarray or list of ndarray
        An HDF5 checkpoint; a state vector (1-D of length prod(d_i), or shaped
        (d_1, ..., d_N)); or site tensors shaped (left, phys, right) (or in the
        order ``axes``), with bonds of 1 (or rank 2) at the ends; or rank-4 site
        tensors of a mixed state with ``axes`` left,ket,bra,right (a density
        matrix) or left,phys,ancilla,right (a purification), see docs/mixed.md.
    options : ProfileOptions, optional
        Layout, measures and resources; keywords override its fields.
    progress : bool
        Show a progress bar on a terminal's stderr.
    **kwargs
        Any field of :class:`~bondscope.ProfileOptions`: ``state``, ``tensors``,
        ``local_dim``, ``axes``, ``renyi``, ``base``, ``spectrum``, ``bond_dim``,
        ``weight_tol``, ``route``, ``precision``, ``scratch``, ``max_memory``,
        ``threads``, ``charges``, ``disentangle`` (purifications).

    Returns
    -------
    Profile

    Raises
    ------
    CheckpointError
        The checkpoint or arrays are not a valid state (see :func:`open_source`),
        NaN/Inf values, zero norm; a rank-4 family that is not a density matrix
        (not Hermitian, trace zero or negative) or a purification of zero norm.
    MemoryLimitError
        The pre-flight estimate exceeds the memory limit; nothing is read.
    TypeError
        An unknown option.
    ValueError
        A malformed option.

    Warns
    -----
    UnnormalisedStateWarning
        The norm differs from 1 by more than 1.2e-3 (accumulated single-precision
        rounding, see ``NORM_TOLERANCE``); the normalised state is profiled.
    ResolutionWarning
        An ill-conditioned stored gauge leaves the values resolved only above
        sqrt(eps), or a Rényi order is too sensitive to the floor to be reported
        at some cuts (the document's ``floor_errors``).

    Notes
    -----
    MPS: O(N d chi^3) time, memory of a few site tensors (see
    :func:`bondscope._kernels.chain.chain_spectra`).  State vectors: see
    :func:`bondscope._kernels.amplitudes.amplitude_spectra`.

    Examples
    --------
    >>> import numpy as np, bondscope
    >>> bell = np.array([1.0, 0.0, 0.0, 1.0]) / np.sqrt(2)
    >>> p = bondscope.profile(bell, base=2)
    >>> p.entropies.round(12).tolist(), p.schmidt_ranks.tolist()
    ([1.0], [2])

    A density matrix as an MPO: two qubits at infinite temperature.

    >>> rho = [np.eye(2).reshape(1, 2, 2, 1) / 2] * 2
    >>> m = bondscope.profile(rho, axes="left,ket,bra,right", base=2)
    >>> m["purity"], m.column("renyi2_left").round(12).tolist()
    (0.25, [1.0])
    """
    opts = ProfileOptions.from_kwargs(options, **kwargs)
    with open_any(source, opts) as src:
        route = _route(src, opts)
        charged = opts.charges is not None or hasattr(src, "blocks")
        _check_kind(src, opts, charged)
        check_memory(estimate(src, route, opts.truncating, charged, opts.disentangle),
                     opts.max_memory)
        kernel, steps = (CHARGE_KERNELS if charged else KERNELS)[src.kind]
        if route is not None:
            opts = opts.replace(route=route)
        with _threads(opts.threads), _progress(steps(src), progress, "profile") as bar:
            result, bonds = kernel(src, opts, bar.update if bar is not None else None)
        # past the double range: norm = mantissa x 2^norm_exponent (bondscope._exponent)
        norm = stored_norm(result.norm, getattr(src, "scale_exponent", 0)
                           + getattr(result, "norm_exponent", 0))
        if norm[1]:
            warnings.warn(f"{src.name}: state norm is {norm_text(*norm)}; profiled the "
                          "normalised state", UnnormalisedStateWarning, stacklevel=2)
        else:
            _warn_norm(src, norm[0])
        doc = _document(src, opts, result, bonds)
        doc["norm"] = norm[0]
        if norm[1]:
            doc["norm_exponent"] = norm[1]
    _warn_sensitive(doc)
    return Profile(doc)


def _warn_sensitive(doc):
    from ._measure import ResolutionWarning

    for order, cuts in doc["floor_errors"]["floor_sensitive"].items():
        if cuts:
            warnings.warn(f"{doc['source']}: Renyi order {order} is too sensitive to the "
                          f"resolution floor at {len(cuts)} of {len(doc['cuts'])} cuts "
                          "(values under the floor could move it; see floor_errors)",
                          ResolutionWarning, stacklevel=3)


def _check_kind(src, opts, charged):
    """Options that do not apply to this kind of source (ValueError)."""
    from ._options import option_label

    if opts.disentangle and src.kind != "purified":
        raise ValueError(f"{option_label('disentangle')} applies to purifications (axes "
                         f"left,phys,ancilla,right); {src.name} is a {src.kind}")
    if charged and src.kind not in CHARGE_KERNELS:
        raise ValueError(f"{option_label('charges')} is not available for a {src.kind} "
                         f"({src.name}); profile without charges")


def _warn_norm(src, norm):
    if abs(norm - 1.0) > NORM_TOLERANCE:
        warnings.warn(f"{src.name}: state norm is {norm:.12g}; profiled the "
                      "normalised state", UnnormalisedStateWarning, stacklevel=3)


def _document(src, opts, result, bonds):
    from . import __version__

    doc = {"format": FORMAT, "version": VERSION, "source": src.name, "kind": src.kind,
           "sites": src.sites, "local_dims": src.local_dims, "log_base": opts.base,
           "norm": result.norm, "route": result.route, "dtype": str(src.dtype),
           "precision": str(src.compute_dtype), "bondscope_version": __version__}
    from ._source import source_eps

    # gram floors come from weights resolved to floor^2, unless coarser data set them
    weights = result.route == "gram" and source_eps(src) <= np.finfo(src.compute_dtype).eps
    cuts, bound, bounds = [], 0.0, []
    for i, (s, floor) in enumerate(zip(result.spectra, result.floors)):
        m = spectrum_measures(s, opts.renyi, opts.base_value, floor, weights=weights)
        cut = {"position": i + 1,
               "bond_dimension": int(bonds[i]) if bonds else m["schmidt_rank"],
               "schmidt_rank": m["schmidt_rank"], "entropy": m["entropy"],
               "renyi": m["renyi"], "resolution_floor": floor}
        bounds.append(m)
        if opts.truncating:
            keep = min(kept_rank(s, opts.bond_dim, opts.weight_tol), m["schmidt_rank"])
            cut["kept"] = keep
            cut["discarded_weight"] = discarded_weight(s, keep)
            bound += cut["discarded_weight"]
        if opts.spectrum:
            resolved = s[:m["schmidt_rank"]]
            k = resolved.size if opts.spectrum is True else opts.spectrum
            cut["schmidt_values"] = resolved[:k].tolist()
        cuts.append(cut)
    if hasattr(result, "cell"):
        doc.update(result.cell)
    if opts.truncating:
        doc["truncation"] = {"bond_dim": opts.bond_dim, "weight_tol": opts.weight_tol,
                             "infidelity": result.infidelity, "bound": bound}
    if hasattr(result, "cell_sectors"):
        from ._kernels.cellcharges import cell_sector_document

        doc["charges"] = cell_sector_document(result, _bound_charges(src, opts), opts, cuts)
    if hasattr(result, "sectors"):
        from ._kernels.sectors import sector_document

        doc["charges"] = sector_document(result, _bound_charges(src, opts), opts, cuts)
    doc["floor_errors"] = floor_errors(bounds, opts.renyi)
    if hasattr(result, "renyi2"):
        from ._kernels.mixedprofile import mixed_document

        mixed_document(doc, cuts, result, src, opts)
    doc["cuts"] = cuts
    return doc


def inspect(source, options=None, **kwargs):
    """What a checkpoint holds and what profiling it will cost, without computing spectra.

    Parameters
    ----------
    source : str, Path, ndarray or list of ndarray
        As :func:`profile`.
    options : ProfileOptions, optional
    **kwargs
        Fields of :class:`~bondscope.ProfileOptions` (the layout, ``route``,
        ``precision`` and ``bond_dim``/``weight_tol`` matter here).

    Returns
    -------
    dict
        ``kind``, ``source``, ``sites``, ``local_dims``, ``bond_dims`` (MPS),
        ``max_bond_dim``, ``dtype``, ``data_bytes``, ``file_bytes``, ``route``
        (state vectors), ``estimate`` (memory_bytes, flops, seconds),
        ``mutual_estimate`` (the same for :func:`bondscope.mutual_information`
        without reordering; dense sources) and ``available_memory``.

    Raises
    ------
    CheckpointError, ValueError, TypeError
        As :func:`profile`, for the layout and options.
    """
    from ._estimate import available_memory

    opts = ProfileOptions.from_kwargs(options, **kwargs)
    with open_any(source, opts) as src:
        info = {"kind": src.kind, "source": src.name, "sites": src.sites,
                "local_dims": src.local_dims, "dtype": str(src.dtype),
                "data_bytes": src.nbytes}
        if isinstance(source, (str, os.PathLike)):
            info["file_bytes"] = Path(source).stat().st_size
        route = _route(src, opts)
        if src.kind == "unit-cell":
            info["unit_cell"] = src.detection
        if src.kind != "state-vector":
            info["bond_dims"] = src.bond_dims
            info["max_bond_dim"] = max(src.bond_dims)
            info["axes"] = ",".join(src.axes)
            info["site_labels"] = [src.labels[0], src.labels[-1]]
        if route is not None:
            info["route"] = route
        info["estimate"] = estimate(src, route, opts.truncating, opts.charges is not None,
                                    opts.disentangle).to_dict()
        if not hasattr(src, "blocks") and src.kind in ("mps", "state-vector"):
            from ._kernels.pairtasks import pair_estimate

            info["mutual_estimate"] = pair_estimate(src).to_dict()
        info["available_memory"] = available_memory()
    return info
