"""The Profile document: round trips, minimal external documents, schema errors."""

import json
import os
import warnings

import numpy as np
import pytest

import bondscope
from bondscope._document import FORMAT, VERSION
from builders import random_chain


@pytest.fixture(scope="module")
def prof():
    tensors = random_chain(np.random.default_rng(8), [2] * 7, [2, 4, 8, 8, 4, 2],
                           np.complex128)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", bondscope.UnnormalisedStateWarning)
        return bondscope.profile(tensors, renyi=["0.5", "2", "inf"], spectrum=True, bond_dim=3)


@pytest.mark.parametrize("suffix", [".json", ".h5", ".csv"])
def test_round_trip(tmp_path, prof, suffix):
    path = prof.save(tmp_path / f"p{suffix}")
    back = bondscope.load_profile(path)
    assert back.to_dict() == prof.to_dict()
    assert back.renyi_orders == ["0.5", "2", "inf"]
    assert [p.name for p in tmp_path.iterdir()] == [f"p{suffix}"]  # no temporary left
    mask = os.umask(0)
    os.umask(mask)
    assert path.stat().st_mode & 0o777 == 0o666 & ~mask    # ordinary permissions, not 0600


def test_json_contract(prof):
    doc = json.loads(prof.to_json())
    assert doc["format"] == FORMAT and doc["version"] == VERSION == 1
    assert {"source", "kind", "sites", "local_dims", "log_base", "norm", "truncation",
            "cuts"} <= set(doc)
    assert set(doc["truncation"]) == {"bond_dim", "weight_tol", "infidelity", "bound"}
    cut = doc["cuts"][0]
    assert {"position", "bond_dimension", "schmidt_rank", "entropy", "renyi",
            "resolution_floor", "discarded_weight", "schmidt_values"} <= set(cut)
    assert [c["position"] for c in doc["cuts"]] == list(range(1, 7))


def _minimal(**over):
    doc = {"format": FORMAT, "version": 1, "sites": 4, "log_base": 2, "kind": "other-code",
           "cuts": [{"position": p, "entropy": e} for p, e in [(1, 0.5), (2, 1.0), (3, 0.5)]]}
    doc.update(over)
    return doc


def test_minimal_external_document(tmp_path):
    path = tmp_path / "ext.json"
    path.write_text(json.dumps(_minimal()))
    p = bondscope.load_profile(path)
    assert p.log_base == 2 and p.kind == "other-code" and p.spectra is None
    np.testing.assert_array_equal(p.entropies, [0.5, 1.0, 0.5])
    assert p.renyi_orders == []


BAD = [
    # (document change, message fragment)
    ({"format": "something-else"}, "format is 'something-else'"),
    ({"version": 99}, "version 99 is not supported"),
    ({"log_base": "ten"}, "log_base 'ten'"),
    ({"log_base": 1}, "log_base must be a finite number > 1"),
    ({"sites": 0}, "sites must be an integer in 1..10000000"),
    ({"cuts": [{"position": 9, "entropy": 0.1}]}, "position 9 is not in 1..3"),
    ({"cuts": [{"position": 1}]}, "needs at least 'position' and 'entropy'"),
    ({"cuts": "none"}, "cuts must be a list"),
]


@pytest.mark.parametrize("change, fragment", BAD)
def test_schema_errors(tmp_path, change, fragment):
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(_minimal(**change)))
    with pytest.raises(bondscope.CheckpointError, match=fragment.replace(".", r"\.")
                       .replace("(", r"\(").replace(")", r"\)")):
        bondscope.load_profile(path)


def test_missing_field_and_bad_json(tmp_path):
    doc = _minimal()
    del doc["kind"]
    (tmp_path / "a.json").write_text(json.dumps(doc))
    with pytest.raises(bondscope.CheckpointError, match="missing top-level field 'kind'"):
        bondscope.load_profile(tmp_path / "a.json")
    (tmp_path / "b.json").write_text("{not json")
    with pytest.raises(bondscope.CheckpointError, match="not a JSON profile"):
        bondscope.load_profile(tmp_path / "b.json")
    with pytest.raises(ValueError, match="unknown profile format '.txt'"):
        bondscope.load_profile(tmp_path / "c.txt")


def test_h5_output_never_overwrites_a_checkpoint(tmp_path, prof):
    import h5py

    other = tmp_path / "checkpoint.h5"
    with h5py.File(other, "w") as f:
        f["x"] = np.ones(3)
    with pytest.raises(OSError, match="not a bondscope results file"):
        prof.save(other)
    with pytest.raises(ValueError, match="refusing to write over the checkpoint"):
        prof.save(tmp_path / "checkpoint.h5", protect=[other])
    with h5py.File(other) as f:
        assert list(f) == ["x"]
