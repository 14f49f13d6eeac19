"""Block-sparse checkpoints: every form gives the dense file's spectra; bad files, one line."""

import h5py
import numpy as np
import pytest

import blockdata
from builders import contract
from reference import charges as ref

from bondscope import CheckpointError
from bondscope._blocksparse import find_block_layouts, open_blocks
from bondscope._charges import parse_charges
from bondscope._checkpoint import open_source
from bondscope._kernels.sectors import charge_spectra

QUBIT = np.array([[0], [1]])
ORBITAL = np.array([[0, 0], [1, 1], [1, -1], [2, 0]])
PERMUTED = ("phys", "right", "left")


def _chain(table=QUBIT, moduli=(0,), total=(3,), n=6, dtype=np.float64, seed=0):
    rng = np.random.default_rng(seed)
    tensors, labels = ref.random_symmetric_chain(rng, [table] * n, moduli, total, 3, dtype)
    return tensors, labels, [table] * n


def _text(table):
    return ";".join(",".join(str(int(v)) for v in col) for col in table.T)


GOOD = [
    # (id, writer, writer options, open options, table, moduli, total, dtype)
    ("blocks, attributes", blockdata.write_blocks, {}, {}, QUBIT, (0,), (3,), np.float64),
    ("blocks, companion table", blockdata.write_blocks, {"table": True}, {}, QUBIT, (0,),
     (3,), np.float64),
    ("blocks, permuted axes inferred", blockdata.write_blocks, {"axes": PERMUTED}, {},
     QUBIT, (0,), (3,), np.float64),
    ("blocks, rank-2 ends", blockdata.write_blocks, {"rank2_ends": True}, {}, QUBIT, (0,),
     (3,), np.complex128),
    ("blocks, leftward flow with the flag", blockdata.write_blocks, {"flow": "leftward"},
     {"flow": "leftward"}, QUBIT, (0,), (3,), np.float64),
    ("blocks, bond charges offset by 5", blockdata.write_blocks, {"shift": 5}, {}, QUBIT,
     (0,), (3,), np.float64),
    ("blocks, numbered from 1", blockdata.write_blocks, {"start": 1}, {}, QUBIT, (0,), (3,),
     np.float64),
    ("blocks, two quantities (N, 2Sz)", blockdata.write_blocks, {}, {}, ORBITAL, (0, 0),
     (4, 0), np.complex128),
    ("blocks, charges only from --charges", blockdata.write_blocks, {"local": False},
     {"charges": "0,1"}, QUBIT, (0,), (3,), np.float64),
    ("packed", blockdata.write_packed, {}, {}, QUBIT, (0,), (3,), np.float64),
    ("packed, gaps, permuted axes given", blockdata.write_packed,
     {"gap": 3, "axes": PERMUTED}, {"axes": "phys,right,left"}, QUBIT, (0,), (3,),
     np.complex128),
    ("packed, parity, leftward", blockdata.write_packed, {"flow": "leftward"},
     {"flow": "leftward", "modulus": 2}, QUBIT, (2,), (1,), np.float64),
    ("labelled", blockdata.write_labelled, {}, {}, QUBIT, (0,), (3,), np.float64),
    ("labelled, permuted axes, two quantities", blockdata.write_labelled,
     {"axes": PERMUTED}, {}, ORBITAL, (0, 0), (4, 0), np.float64),
    ("labelled, leftward flow, offset", blockdata.write_labelled,
     {"flow": "leftward", "shift": -2}, {"flow": "leftward"}, QUBIT, (0,), (3,), np.float64),
]


@pytest.mark.parametrize("name, writer, wopts, oopts, table, moduli, total, dtype", GOOD,
                         ids=[g[0] for g in GOOD])
def test_forms_equal_dense(tmp_path, name, writer, wopts, oopts, table, moduli, total, dtype):
    n = 5 if table is ORBITAL else 6
    tensors, labels, tables = _chain(table, moduli, total, n, dtype)
    path = writer(tmp_path / "blocks.h5", tensors, labels, tables, **wopts)
    dense = blockdata.write_dense(tmp_path / "dense.h5", tensors)
    oopts = dict(oopts)
    if "modulus" in oopts:
        oopts["charges"] = _text(table)
    with open_blocks(path, **oopts) as src, open_source(dense) as plain:
        charges = parse_charges(_text(table), oopts.get("modulus")).bind(plain.local_dims)
        got = charge_spectra(src, src.charges)
        want = charge_spectra(plain, charges)
        assert got.route == "block-sweep" and got.total_charge == tuple(total)
        assert got.total_charge == want.total_charge
        ref.assert_same_sectors(got, want, atol=1e-13)
        # the assembled dense tensors are the same state (bond indices reordered)
        psi = contract([src.tensor(i) for i in range(src.sites)])
        np.testing.assert_allclose(psi, contract(tensors), atol=1e-13)
        assert src.bond_dims == [t.shape[2] for t in tensors[:-1]]


def _good(tmp_path, writer=blockdata.write_blocks, **opts):
    tensors, labels, tables = _chain()
    return writer(tmp_path / "bad.h5", tensors, labels, tables, **opts)


def _drop_attr(f):
    del f["/state/site2/b0"].attrs["charge_right"]


def _break_rule(f):
    f["/state/site2/b0"].attrs["charge_right"] = f["/state/site2/b0"].attrs["charge_right"] + 1


def _duplicate(f):
    g = f["/state/site2"]
    d = g.create_dataset("zz", data=g["b0"][()])
    for k, v in g["b0"].attrs.items():
        d.attrs[k] = v


def _doubled(axis):
    """Mutation: block b0 of site 2 twice as long along ``axis``, its charges kept."""
    def mutate(f):
        g = f["/state/site2"]
        attrs, data = dict(g["b0"].attrs), g["b0"][()]
        del g["b0"]
        d = g.create_dataset("b0", data=np.concatenate([data, data], axis=axis))
        for k, v in attrs.items():
            d.attrs[k] = v
    return mutate


def _table_names_missing(f):
    f["/state/site1/block_charges"].attrs["blocks"] = np.array(
        ["b0", "nope"] + [f"b{k}" for k in range(2, f["/state/site1/block_charges"].shape[0])],
        dtype=h5py.string_dtype())


def _overlap(f):
    index = f["/state/site3/block_index"][()]
    index[1, 0] = index[0, 0] + 1
    f["/state/site3/block_index"][...] = index


def _beyond(f):
    index = f["/state/site3/block_index"][()]
    index[-1, 0] = f["/state/site3/data"].shape[0]
    f["/state/site3/block_index"][...] = index


def _columns(f):
    index = f["/state/site3/block_index"][()]
    del f["/state/site3/block_index"]
    f["/state/site3"].create_dataset("block_index", data=index[:, :5])


def _packed_dims(f):
    for site in range(1, 5):
        index = f[f"/state/site{site}/block_index"][()]
        left = index[:, 4]
        for k in range(len(index)):
            if index[k, 1] > 1 and np.count_nonzero(left == left[k]) > 1:
                index[k, 1] -= 1           # n_left of one block, not of its sector's others
                f[f"/state/site{site}/block_index"][...] = index
                return
    raise AssertionError("no block to shrink")


def _label_length(f):
    lab = f["/state/site2/charges_right"][()]
    del f["/state/site2/charges_right"]
    f["/state/site2"].create_dataset("charges_right", data=lab[:-1])


def _label_mismatch(f):
    lab = f["/state/site3/charges_left"][()]
    f["/state/site3/charges_left"][...] = lab[::-1]


def _off_block(f):
    t = f["/state/site2/tensor"][()]
    left = f["/state/site2/charges_left"][()].reshape(-1)
    right = f["/state/site2/charges_right"][()].reshape(-1)
    a, b = np.nonzero(right[None, :] != left[:, None])          # phys 0: q_r must be q_l
    t[a[0], 0, b[0]] = 0.5
    f["/state/site2/tensor"][...] = t


def _no_labels(f):
    del f["/state/site1/charges_phys"]


def _no_site(f):
    del f["/state/site3"]


def _nan(f):
    d = f["/state/site4/b0"]
    a = d[()]
    a.flat[0] = np.nan
    d[...] = a


BAD = [
    # (id, writer options, mutation, open options, message fragment, at read time)
    ("missing charge attribute", {}, _drop_attr, {}, "block b0 has no charges", False),
    ("conservation broken", {}, _break_rule, {}, "break q_right = q_left + q_phys", False),
    ("leftward file without the flag", {"flow": "leftward"}, None, {},
     "pass --charge-flow leftward", False),
    ("duplicate block charges", {}, _duplicate, {}, "have the same charges", False),
    ("left dim disagrees between blocks", {}, _doubled(0), {}, "another block on that bond",
     False),
    ("phys leg vs local basis", {}, _doubled(1), {}, "the local basis has", False),
    ("companion table names a missing block", {"table": True}, _table_names_missing, {},
     "which is not a dataset", False),
    ("packed: overlapping offsets", {"writer": blockdata.write_packed}, _overlap, {},
     "overlap in data", False),
    ("packed: block beyond the data", {"writer": blockdata.write_packed}, _beyond, {},
     "beyond data's length", False),
    ("packed: index columns", {"writer": blockdata.write_packed}, _columns, {},
     "block_index has shape", False),
    ("packed: shape disagrees with the sector", {"writer": blockdata.write_packed},
     _packed_dims, {}, "another block on that bond", False),
    ("labelled: label count vs leg", {"writer": blockdata.write_labelled}, _label_length, {},
     "differs from site 2's charges_right", False),
    ("labelled: bond labels differ", {"writer": blockdata.write_labelled}, _label_mismatch,
     {}, "charges_left differs", False),
    ("labelled: entry outside the blocks", {"writer": blockdata.write_labelled}, _off_block,
     {}, "entries outside the charge blocks must be exactly zero", True),
    ("labelled: missing charges_phys", {"writer": blockdata.write_labelled}, _no_labels, {},
     "no charges_phys dataset", False),
    ("no stored local charges, none given", {"local": False}, None, {},
     "give them with --charges", False),
    ("stored local charges differ", {}, None, {"charges": "1,0"}, "differ from the given",
     False),
    ("wrong number of quantities", {}, None, {"charges": "0,1;0,1"}, "differ from the given",
     False),
    ("a site group missing", {}, _no_site, {}, "site 3 of /state/site{site} is missing",
     False),
    ("NaN in a block", {}, _nan, {}, "NaN or Inf", True),
]


@pytest.mark.parametrize("name, wopts, mutate, oopts, fragment, at_read", BAD,
                         ids=[b[0] for b in BAD])
def test_malformed(tmp_path, name, wopts, mutate, oopts, fragment, at_read):
    wopts = dict(wopts)
    path = _good(tmp_path, wopts.pop("writer", blockdata.write_blocks), **wopts)
    if mutate is not None:
        with h5py.File(path, "a") as f:
            mutate(f)
    with pytest.raises(CheckpointError) as err:
        src = open_blocks(path, pattern="/state/site{site}", **oopts)
        assert at_read, "opened a malformed file"
        with src:
            charge_spectra(src, src.charges)
    msg = str(err.value)
    assert fragment in msg and "\n" not in msg and str(path) in msg


@pytest.mark.parametrize("writer, form", [
    (blockdata.write_blocks, "blocks"),       # attribute charges
    (blockdata.write_packed, "packed"),
    (blockdata.write_labelled, "labelled"),
])
def test_detection(tmp_path, writer, form):
    path = _good(tmp_path, writer)
    with h5py.File(path, "r") as f:
        assert find_block_layouts(f) == [("/state/site{site}", form)]
    with open_blocks(path) as src:                       # found without flags
        assert src.sites == 6


def test_several_layouts_need_a_pattern(tmp_path):
    tensors, labels, tables = _chain()
    path = blockdata.write_blocks(tmp_path / "two.h5", tensors, labels, tables)
    blockdata.write_packed(path, tensors, labels, tables, pattern="/other/site{site}")
    with pytest.raises(CheckpointError, match="2 block-sparse layouts found.*--blocks"):
        open_blocks(path)
    with open_blocks(path, pattern="/other/site{site}") as src:
        assert src.first_charge == (0,) and src.last_charge == (3,)


@pytest.mark.parametrize("option, value, fragment", [
    ("form", "sparse", "block form 'sparse' is not one of"),     # unknown form
    ("flow", "up", "charge flow 'up' is not one of"),             # unknown flow
])
def test_bad_options(tmp_path, option, value, fragment):
    with pytest.raises(ValueError, match=fragment):
        open_blocks(_good(tmp_path), **{option: value})


def test_reads_one_site_at_a_time(tmp_path, monkeypatch):
    """blocks(i) reads only site i's datasets (streaming)."""
    import bondscope._blocksparse as bs

    path = _good(tmp_path)
    seen = []
    real = bs._reader

    def spy(dset, dtype):
        seen.append(dset.name)
        return real(dset, dtype)
    monkeypatch.setattr(bs, "_reader", spy)
    with open_blocks(path) as src:
        assert seen == []                                # opening reads no tensor data
        src.blocks(2)
    assert seen and all(name.startswith("/state/site2/") for name in seen)
