"""The mixed-state kernel of the pipeline and its Profile document fields.

For a density-matrix MPO the per-cut spectra are the operator-space Schmidt
values of rho / ||rho||_2 (the vectorised operator as an MPS with local
dimension d^2); for a purification they are the purification's own Schmidt
values (system and ancillas of the left block against the rest).  The
physical state's Rényi-2 quantities come from :mod:`.mixed`, the
disentangled entropies from :mod:`.disentangle`.
"""

import math

import numpy as np

from .._measure import discarded_weight, kept_rank, spectrum_measures

__all__ = ["mixed_spectra", "mixed_document", "CUT_MEANING"]

CUT_MEANING = {
    "density-matrix": "operator-space Schmidt decomposition of rho/||rho||_2",
    "purified": "the purification's cut: system and ancillas left of the cut against the rest",
}


def mixed_spectra(src, opts, tick):
    """Cut spectra, Rényi-2 results and (``opts.disentangle``) disentangled spectra.

    Returns
    -------
    SweepResult
        With attributes ``renyi2`` (:class:`~.mixed.Renyi2`) and
        ``disentangled`` (list of :class:`~.disentangle.Disentangled`, or None);
        ``norm`` is Tr rho for a density matrix, ||psi|| for a purification.

    Raises
    ------
    CheckpointError
        As :func:`~.mixed.renyi2_sweeps`.
    """
    from .chain import chain_spectra
    from .mixed import renyi2_sweeps

    renyi2 = renyi2_sweeps(src, scratch=opts.scratch, tick=tick)
    result = chain_spectra(src, bond_dim=opts.bond_dim, weight_tol=opts.weight_tol,
                           scratch=opts.scratch, tick=tick)
    result.renyi2 = renyi2
    # the sweep's norm is norm x 2^norm_exponent (balanced sweeps); the trace replaces it
    with np.errstate(over="ignore"):
        operator_norm = float(np.ldexp(result.norm, result.norm_exponent))
    result.operator_norm = operator_norm if src.kind == "density-matrix" else None
    result.norm = renyi2.trace if src.kind == "density-matrix" else math.sqrt(renyi2.trace)
    result.norm_exponent = 0
    result.disentangled = None
    if opts.disentangle:
        from .disentangle import disentangle_cuts

        result.disentangled, result.disentangle_sweeps, result.disentangle_settled = \
            disentangle_cuts(src, tick=tick)
    return result


def _disentangled_fields(cut, found, spectrum, opts):
    """Per-cut fields of one disentangled spectrum (never above the stored entropy)."""
    m = spectrum_measures(found.values, ("2",), opts.base_value, found.floor)
    values, floor = found.values, found.floor
    if m["entropy"] > cut["entropy"]:
        values, floor = spectrum, cut["resolution_floor"]
        m = spectrum_measures(values, ("2",), opts.base_value, floor)
    out = {"disentangled_entropy": m["entropy"], "disentangled_renyi2": m["renyi"]["2"],
           "disentangled_rank": m["schmidt_rank"], "disentangled_resolution_floor": floor,
           "disentangle_iterations": found.iterations,
           "disentangle_converged": found.converged}
    if opts.truncating:
        # the rank reaching the stored purification's error at this cut (or weight_tol)
        target = opts.weight_tol if opts.bond_dim is None else cut["discarded_weight"]
        keep = min(kept_rank(values, None, target), m["schmidt_rank"])
        out["disentangled_kept"] = keep
        out["disentangled_discarded_weight"] = discarded_weight(values, keep)
    return out


def mixed_document(doc, cuts, result, src, opts):
    """Add the mixed-state fields to a document under construction (in place).

    Per cut: ``renyi2_left``, ``renyi2_right``, ``mutual_information_2`` and
    their error bounds; with disentangling the ``disentangled_*`` fields.  Top
    level: ``purity``, ``renyi2_state``, ``cut_spectra`` and (density matrix)
    ``hilbert_schmidt_norm`` and ``hermiticity_defect``.
    """
    r2 = result.renyi2
    scale = 1.0 / math.log(opts.base_value)
    whole = -math.log(r2.purity)
    whole_err = r2.purity_error / r2.purity
    doc["purity"] = r2.purity
    doc["purity_error"] = r2.purity_error
    doc["renyi2_state"] = whole * scale
    doc["renyi2_state_error"] = whole_err * scale
    doc["cut_spectra"] = CUT_MEANING[src.kind]
    if src.kind == "density-matrix":
        doc["hilbert_schmidt_norm"] = result.operator_norm
        doc["hermiticity_defect"] = r2.hermiticity
    for i, cut in enumerate(cuts):
        a, b, err = r2.left[i], r2.right[i], r2.errors[i]
        cut["renyi2_left"] = a * scale
        cut["renyi2_right"] = b * scale
        cut["renyi2_error"] = err * scale
        cut["mutual_information_2"] = (a + b - whole) * scale
        cut["mutual_information_2_error"] = (2 * err + whole_err) * scale
    if result.disentangled is None:
        return
    for cut, found, spectrum in zip(cuts, result.disentangled, result.spectra):
        cut.update(_disentangled_fields(cut, found, spectrum, opts))
    from .disentangle import MAX_ITERATIONS, RANDOM_STARTS, SWEEPS, TOLERANCE

    doc["disentangle"] = {
        "window": "one purification: a gate on the two ancillas beside every cut, in sweeps",
        "objective": "renyi-2 by iterated polar decompositions",
        "random_starts": RANDOM_STARTS, "max_iterations": MAX_ITERATIONS,
        "tolerance": TOLERANCE, "sweeps": result.disentangle_sweeps, "max_sweeps": SWEEPS,
        "sweeps_converged": result.disentangle_settled,
        "converged_cuts": sum(bool(c["disentangle_converged"]) for c in cuts),
        "cuts": len(cuts)}
