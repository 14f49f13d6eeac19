"""Budget targets against what the stored spectra can resolve: floors, top-K lists, routes."""

import functools

import h5py
import pytest

import bondscope
from bondscope._analyses.budget import ResolutionError, bond_budget
from bondscope._cli import main
from reference import freefermion, spin

L = 14


@functools.lru_cache(maxsize=None)
def exact_tails():
    """Per cut, the exact weights of the open XX ground state (Peschel, J. Phys. A 36, L205
    (2003)), descending; the tail after chi is their sum beyond chi.  Cuts past the middle
    take the mirror block (the open chain is reflection symmetric), whose correlation
    matrix has no rounding-level eigenvalues beyond the true rank."""
    return [freefermion.xx_spectrum(L, min(l, L - l), cutoff=0.0) for l in range(1, L)]


@pytest.fixture(scope="module")
def checkpoint(tmp_path_factory):
    path = tmp_path_factory.mktemp("xx") / "xx14.h5"
    with h5py.File(path, "w") as f:
        f["psi"] = spin.ground_state(spin.xx(L))[1]
    return path


@functools.lru_cache(maxsize=None)
def profiled(path, route, spectrum=True):
    return bondscope.profile(path, spectrum=spectrum, route=route)


# a target the route can see gives an honest bound; one below its floor is refused
ROUTES = [
    ("gram", 1e-8, None),               # well above the gram floor (~1e-14 in weight)
    ("gram", 1e-14, ResolutionError),   # the case that claimed "discarded weight 0"
    ("svd", 1e-14, None),               # the accurate route resolves it
    ("svd", 1e-16, None),
]


@pytest.mark.parametrize("route, target, error", ROUTES)
def test_target_against_the_route_floor(checkpoint, route, target, error):
    prof = profiled(str(checkpoint), route)
    if error is not None:
        with pytest.raises(error, match="--accurate"):
            bond_budget(prof, target=target)
        return
    res = bond_budget(prof, target=target)
    assert res["route"] == route
    for cut, w in zip(res["cuts"], exact_tails()):
        tail = float(w[cut["bond_dimension"]:].sum())
        # the reported weight bounds the true one and meets the target
        assert tail <= cut["discarded_weight"] * (1 + 1e-9) + 1e-30
        assert cut["discarded_weight"] <= target
        # and no smaller chi would have met the target (exact tails)
        smaller = float(w[cut["bond_dimension"] - 1:].sum())
        assert smaller > target or cut["unresolved_bound"] > 0


def test_top_k_list_cannot_claim_what_it_left_out(checkpoint):
    # top-8 values of the middle cut leave ~3e-5; a shortfall above rounding is weight
    prof = profiled(str(checkpoint), "svd", 8)
    with pytest.raises(ResolutionError, match="weight left out"):
        bond_budget(prof, target=1e-11)
    res = bond_budget(prof, target=1e-2)
    assert all(c["discarded_weight"] > 0 for c in res["cuts"] if c["bond_dimension"] == 8)


def test_budget_verb_switches_to_the_accurate_route(checkpoint, capsys):
    assert main(["budget", str(checkpoint), "--target", "1e-14", "--route", "gram",
                 "--json"]) == 0
    out, err = capsys.readouterr()
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("warning: ") and "svd" in lines[0]
    switched = __import__("json").loads(out)
    assert switched["route"] == "svd"
    assert switched == bond_budget(profiled(str(checkpoint), "svd"), target=1e-14).to_dict()
    assert main(["budget", str(checkpoint), "--target", "1e-14", "--route", "gram",
                 "--quiet"]) == 0
    assert capsys.readouterr().err == ""
