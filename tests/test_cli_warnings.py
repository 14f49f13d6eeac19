"""Every verb shows a warning as one 'warning:' line on stderr, and --quiet silences it."""

import h5py
import numpy as np
import pytest

from bondscope._cli import main
from reference import freefermion, spin


@pytest.fixture(scope="module")
def unnormalised(tmp_path_factory):
    """Two ground states of the XX chain (L = 8) stored with norm 2: the profile warns."""
    root = tmp_path_factory.mktemp("warn")
    psi = spin.ground_state(spin.xx(8))[1]
    paths = []
    for name, scale in (("a_chi1.h5", 2.0), ("b_chi2.h5", 2.0)):
        with h5py.File(root / name, "w") as f:
            f["psi"] = scale * psi
        paths.append(str(root / name))
    return paths


VERBS = [
    ["fit"],                              # the scaling fit
    ["budget", "--target", "1e-3"],       # the bond budget
    ["compare", "SECOND"],                # two runs of one system
    ["plot", "-o", "OUT", "--no-fit"],    # a figure
]


@pytest.mark.parametrize("verb", VERBS)
@pytest.mark.parametrize("quiet", [False, True])
def test_one_warning_line_or_none(verb, quiet, unnormalised, tmp_path, capsys):
    args = [verb[0], unnormalised[0]] + [unnormalised[1] if a == "SECOND" else
                                         str(tmp_path / "f.png") if a == "OUT" else a
                                         for a in verb[1:]]
    assert main(args + (["--quiet"] if quiet else [])) == 0
    err = capsys.readouterr().err
    if quiet:
        assert err == ""
        return
    lines = err.strip().splitlines()
    assert lines and all(line.startswith("warning: ") for line in lines)
    assert any("state norm is 2" in line for line in lines)
    assert "Warning" not in err and ".py:" not in err     # no Python source lines


def test_fit_flags_print_as_warnings(tmp_path, capsys):
    # an entropy falling with ln x: the unphysical c is a warning line, the verdict says why
    L = 60
    S = 2.0 - np.array(freefermion.xx_entropies(L, "open"))
    doc = {"format": "bondscope-profile", "version": 1, "sites": L, "log_base": "e",
           "kind": "mps", "cuts": [{"position": l, "entropy": float(s)}
                                   for l, s in enumerate(S, 1)]}
    path = tmp_path / "falling.json"
    path.write_text(__import__("json").dumps(doc))
    assert main(["fit", str(path)]) == 0
    out, err = capsys.readouterr()
    assert "scaling law     inconclusive" in out and "central charge  " not in out
    assert err.startswith("warning: unphysical central charge")
