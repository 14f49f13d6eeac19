"""Properties of the entropy measures and the truncation rule on arbitrary spectra."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from bondscope import entropy_measures
from bondscope._measure import discarded_weight, kept_rank

spectra = arrays(np.float64, st.integers(1, 40),
                 elements=st.floats(1e-6, 1.0, allow_nan=False)).map(
    lambda a: np.sort(a)[::-1] / np.linalg.norm(a))


@settings(max_examples=200, deadline=None)
@given(spectra)
def test_renyi_ordering(values):
    # Renyi entropies are non-increasing in the order and bounded by ln(rank)
    # (Renyi, Proc. 4th Berkeley Symp. 1, 547 (1961))
    m = entropy_measures(values, renyi=["0", "0.5", "2", "inf"])
    r = m["renyi"]
    tol = 1e-12
    assert r["0"] + tol >= r["0.5"] >= m["entropy"] - tol
    assert m["entropy"] + tol >= r["2"] >= r["inf"] - tol
    assert r["0"] == pytest.approx(math.log(len(values)))
    assert r["2"] <= 2 * r["inf"] + tol       # S_2 <= 2 S_inf for any spectrum (common practice)


@settings(max_examples=200, deadline=None)
@given(spectra, st.floats(0.0, 0.5))
def test_kept_rank_is_minimal(values, tol):
    k = kept_rank(values, weight_tol=tol)
    assert discarded_weight(values, k) <= tol + 1e-15
    if k > 1:
        assert discarded_weight(values, k - 1) > tol


MEASURES = [
    # (Schmidt values, entropy in nats, rank) -- exact values
    ([1.0], 0.0, 1),                                   # product state
    ([2 ** -0.5] * 2, math.log(2), 2),                 # Bell pair
    ([0.5] * 4, math.log(4), 4),                       # two Bell pairs across the cut
    ([math.sqrt(0.9), math.sqrt(0.1)], -(0.9 * math.log(0.9) + 0.1 * math.log(0.1)), 2),
]


@pytest.mark.parametrize("values, entropy, rank", MEASURES)
def test_exact_values(values, entropy, rank):
    m = entropy_measures(np.array(values), renyi=["2"], base=math.e)
    assert m["entropy"] == pytest.approx(entropy, abs=1e-15)
    assert m["schmidt_rank"] == rank
    np.testing.assert_allclose(m["levels"], -np.log(np.square(values)), atol=1e-15)
    bits = entropy_measures(np.array(values), base=2)
    assert bits["entropy"] == pytest.approx(entropy / math.log(2), abs=1e-15)


def test_floor_excludes_unresolved_values():
    m = entropy_measures(np.array([0.8, 0.6, 1e-12]), floor=1e-9, renyi=["0"])
    assert m["schmidt_rank"] == 2 and m["renyi"]["0"] == pytest.approx(math.log(2))
    assert len(m["levels"]) == 2
