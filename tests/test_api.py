"""The public API: its index, its lazy exports, and the Examples in docstrings."""

import doctest
import importlib
import pkgutil
import re

import pytest

import bondscope

# every module of the package, so an Example anywhere is run
MODULES = sorted(m.name for m in pkgutil.walk_packages(bondscope.__path__, "bondscope.")
                 if m.name != "bondscope.__main__")


def test_api_index_lists_every_export():
    # the docstring of bondscope/__init__.py is the API index: one "name -- text" line each
    listed = set(re.findall(r"^(\w+)[ \t]+--[ \t]", bondscope.__doc__, flags=re.MULTILINE))
    exported = set(bondscope.__all__) - {"__version__"}
    assert listed == exported


@pytest.mark.parametrize("name", sorted(set(bondscope.__all__) - {"__version__"}))
def test_every_export_resolves(name):
    assert getattr(bondscope, name) is not None


@pytest.mark.parametrize("module", MODULES)
def test_docstring_examples_run(module):
    if module.startswith("bondscope._figures."):
        pytest.importorskip("matplotlib")
    mod = importlib.import_module(module)
    finder = doctest.DocTestFinder(exclude_empty=True)
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    for test in finder.find(mod, module):
        runner.run(test)
    result = runner.summarize(verbose=False)
    assert result.failed == 0, f"{result.failed} failing example(s) in {module}"


def _bell():
    import numpy as np

    return np.array([1.0, 0.0, 0.0, 1.0]) / np.sqrt(2)


UNKNOWN_OPTIONS = [
    # public function, its call with a misspelt or foreign option, the name reported
    ("profile", lambda: bondscope.profile(_bell(), bond_dimm=2), "bond_dimm"),
    ("inspect", lambda: bondscope.inspect(_bell(), bananas=3), "bananas"),
    ("run_batch", lambda: bondscope.run_batch([], "out", bananas=3), "bananas"),
    ("entropy_figure", lambda: bondscope.entropy_figure(bondscope.profile(_bell()), bananas=3),
     "bananas"),
    # a fit setting is a keyword of fit_scaling, given through fit={...}, not a profiling option
    ("entropy_figure fit", lambda: bondscope.entropy_figure(bondscope.profile(_bell()),
                                                          parity_exponent=0.5),
     "parity_exponent"),
    ("fit_scaling", lambda: bondscope.fit_scaling(bondscope.profile(_bell()), windw="1:1"),
     "windw"),
    # every figure function, and the fit settings of the entropy figure and the report
    ("entropy_figure fit={}", lambda: bondscope.entropy_figure(bondscope.profile(_bell()),
                                                             fit={"windw": "1:1"}), "windw"),
    ("spectrum_figure", lambda: bondscope.spectrum_figure(bondscope.profile(_bell()),
                                                          max_levle=3), "max_levle"),
    ("budget_figure", lambda: bondscope.budget_figure(bondscope.profile(_bell()), target=1e-4),
     "target"),
    ("heatmap_figure", lambda: bondscope.heatmap_figure(bondscope.profile(_bell()), bananas=3),
     "bananas"),
    ("convergence_figure", lambda: bondscope.convergence_figure(bondscope.profile(_bell()),
                                                                againts="bond"), "againts"),
    ("plot", lambda: bondscope.plot(bondscope.profile(_bell()), "entropy", bananas=3),
     "bananas"),
    ("write_report fit={}", lambda: bondscope.write_report("results", "r.html",
                                                           fit={"windw": "1:1"}), "windw"),
]


@pytest.mark.parametrize("name, call, reported", UNKNOWN_OPTIONS,
                         ids=[row[0] for row in UNKNOWN_OPTIONS])
def test_unknown_options_raise_type_error(name, call, reported):
    if "figure" in name:
        pytest.importorskip("matplotlib")
    with pytest.raises(TypeError, match=reported):
        call()


OPTION_VALUES = [
    # keywords, the parameter and flag the message names (None: valid)
    (dict(renyi=[2, "inf"], base=2, spectrum=4), None),
    (dict(bond_dim=0), "bond_dim (--bond-dim)"),
    (dict(weight_tol=1.5), "weight_tol (--weight-tol)"),
    (dict(route="fast"), "route (--route)"),
    (dict(renyi=[-1]), "--renyi"),
    (dict(base="ten"), "base (--base)"),
    (dict(tensors="/psi/T"), "tensors (--tensors)"),
    (dict(threads=0), "threads (--threads)"),
    (dict(state="/a", tensors="/b{site}"), "--state"),
]


@pytest.mark.parametrize("kwargs, named", OPTION_VALUES)
def test_profile_options_validate_once(kwargs, named):
    if named is None:
        opts = bondscope.ProfileOptions(**kwargs)
        assert opts.renyi == ("2", "inf") and opts.base == 2 and opts.spectrum == 4
        return
    with pytest.raises(ValueError) as err:
        bondscope.ProfileOptions(**kwargs)
    assert named in str(err.value)
