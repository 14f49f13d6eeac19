"""bondscope: entanglement profiles of many-body states stored in checkpoints.

The stages, in the order data flows through them::

    checkpoint (HDF5, read-only) -> source -> kernels -> Profile document
        -> analyses (scaling fit, bond budget, comparison) -> outputs

Profiling
---------
profile          -- Profile of a checkpoint path, a state vector, a list of site tensors
                    or a unit cell of an infinite chain (unit_cell=, --unit-cell)
ProfileOptions   -- every profiling option (layout, measures, resources), validated once
inspect          -- what a checkpoint holds and what profiling it will cost, without spectra
open_source      -- the validated source (chain of site tensors, or amplitudes) of a checkpoint
Profile          -- the Profile document (entropies, spectra, to_json, save)
load_profile     -- read a saved profile (.json, .h5, .csv)
run_batch        -- profile many checkpoints into a results directory, resumably

Measures
--------
entropy_measures -- von Neumann and Rényi entropies, rank and levels of one spectrum

Figures and reports (the ``plot`` extra)
----------------------------------------
plot               -- draw one kind of figure (entropy, spectrum, budget, heatmap, convergence)
entropy_figure     -- S(l) per source with the central-charge fit and residuals
spectrum_figure    -- entanglement spectrum levels -ln lambda^2 at every cut
budget_figure      -- bond dimension needed per cut for target errors
heatmap_figure     -- S(l, t) over a time series of checkpoints
convergence_figure -- middle-cut entropy against discarded weight or 1/chi, extrapolated
mixed_figure       -- mixed states: physical S_2 and I_2 beside the stored form's cut entropy
cellscaling_figure -- unit cells: entropy against ln xi with the central-charge fit
mutual_figure      -- mutual-information matrix, I(r) with its fit, one-site entropies
ordering_figure    -- entanglement profile before and after the suggested site ordering
write_report       -- one self-contained HTML page for a batch results directory

Analyses
--------
fit_scaling          -- central charge, constant and scaling law (Calabrese-Cardy fit)
ScalingFit           -- the typed result of fit_scaling (law, c and its error parts, saturation)
bond_budget          -- smallest bond dimension per cut for an error target, and its cost
compare_profiles     -- per-cut differences, convergence and extrapolation over runs
spectrum_diagnostics -- entanglement gap and degeneracy pattern per cut
charge_equipartition -- sector entropies S(q) of a critical chain against equipartition
fit_cell_scaling     -- unit cells at growing bond dimension: central charge and kappa
mutual_information   -- one-site entropies, mutual-information matrix, decay, site ordering
MutualInformation    -- the mutual-information document (site_entropies, suggested_order, ...)
load_mutual          -- read a saved mutual-information document (.json)

Errors
------
CheckpointError  -- a checkpoint or profile that cannot be read as it stands
MemoryLimitError -- work refused by the pre-flight memory estimate
ConvergenceError -- an iterative eigensolver did not converge (a CheckpointError)
UnnormalisedStateWarning -- the stored state was not normalised (it is profiled normalised)
ResolutionError  -- a budget target below what the stored spectra can certify (a ValueError)
ResolutionWarning -- Schmidt values resolved far worse than the precision (ill-conditioned gauge)

Heavy dependencies (scipy, matplotlib, dask) are imported only when a
function that needs them runs.
"""

from importlib import import_module

from ._errors import CheckpointError, ConvergenceError, MemoryLimitError

__version__ = "0.1.0"

_LAZY = {
    "profile": "bondscope._pipeline",
    "ProfileOptions": "bondscope._options",
    "inspect": "bondscope._pipeline",
    "open_source": "bondscope._checkpoint",
    "Profile": "bondscope._document",
    "load_profile": "bondscope._document",
    "entropy_measures": "bondscope._measure",
    "UnnormalisedStateWarning": "bondscope._pipeline",
    "ResolutionWarning": "bondscope._measure",
    "run_batch": "bondscope._batch.run",
    "plot": "bondscope._figures._kinds",
    "entropy_figure": "bondscope._figures.entropy",
    "spectrum_figure": "bondscope._figures.spectrum",
    "budget_figure": "bondscope._figures.budget",
    "heatmap_figure": "bondscope._figures.heatmap",
    "convergence_figure": "bondscope._figures.convergence",
    "mixed_figure": "bondscope._figures.mixed",
    "write_report": "bondscope._report",
    "fit_scaling": "bondscope._analyses.scaling",
    "bond_budget": "bondscope._analyses.budget",
    "compare_profiles": "bondscope._analyses.comparison",
    "spectrum_diagnostics": "bondscope._analyses.diagnostics",
    "charge_equipartition": "bondscope._analyses.equipartition",
    "fit_cell_scaling": "bondscope._analyses.cellscaling",
    "cellscaling_figure": "bondscope._figures.cellscaling",
    "mutual_information": "bondscope._analyses.mutual",
    "MutualInformation": "bondscope._analyses.mutual",
    "load_mutual": "bondscope._analyses.mutual",
    "mutual_figure": "bondscope._figures.mutual",
    "ordering_figure": "bondscope._figures.ordering",
    "ScalingFit": "bondscope._analyses.scaling",
    "ResolutionError": "bondscope._analyses.budget",
}

__all__ = ["CheckpointError", "ConvergenceError", "MemoryLimitError", "__version__", *_LAZY]


def __getattr__(name):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'bondscope' has no attribute {name!r}")
    value = getattr(import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)
