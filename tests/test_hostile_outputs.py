"""Hostile and odd inputs to batch, saved profiles and every output: good and hostile rows
side by side, each hostile one answered by a one-line error, a note or a neutral cell."""

import csv
import json
import os
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
from builders import random_chain, write_chain

import bondscope
from bondscope import CheckpointError, ProfileOptions
from bondscope._batch.records import fingerprint
from bondscope._batch.run import run_batch
from bondscope._cli import main
from bondscope._files import STALE_SECONDS, atomic_write, csv_cell, remove_stale_parts
from bondscope._runinfo import MAX_VALUE_CHARS, run_attributes
from bondscope._text import visible

FORMULA = ("=", "+", "-", "@", "\t", "\r")
ESC_NAME = "esc\x1b]0;owned\x07\x1b[2J.h5"  # sets the terminal title, clears the screen
RTL_NAME = "run\u202eh5.exe.h5"  # reads as "runexe.5h.h5" on screen


def chain(seed, sites=8, chi=4):
    rng = np.random.default_rng(seed)
    bonds = [min(chi, 2 ** min(i + 1, sites - 1 - i)) for i in range(sites - 1)]
    return random_chain(rng, [2] * sites, bonds)


def checkpoint(path, seed=0, bond=4, libver=None, **attrs):
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with h5py.File(path, "w", libver=libver) as f:  # "latest": large attributes fit
        f.attrs.update(attrs)
    write_chain(path, chain(seed, chi=bond))
    return path


def one_line_error(capsys):
    err = capsys.readouterr().err
    errors = [line for line in err.splitlines() if line.startswith("error: ")]
    assert len(errors) == 1 and "Traceback" not in err, err
    return errors[0]


# --- CSV cells: spreadsheet formulas neutralised, numbers left alone --------------------------

@pytest.mark.parametrize("cell, written", [
    ("=HYPERLINK(\"http://x\")", "'=HYPERLINK(\"http://x\")"),  # formula (OWASP CSV injection)
    ("+cmd|' /C calc'!A0", "'+cmd|' /C calc'!A0"),  # DDE through a leading +
    ("-2+3+cmd", "'-2+3+cmd"),  # a leading - that is not a number
    ("@SUM(A1:A9)", "'@SUM(A1:A9)"),  # @ function call
    ("\t=1", "'\t=1"),  # tab before a formula
    ("-0.25", "-0.25"),  # a negative number stays a number
    ("+1e-3", "+1e-3"),  # so does a signed exponent
    ("-inf", "-inf"),  # and a float Python reads
    ("chi16/run.h5", "chi16/run.h5"),  # ordinary text
    (-1.5, -1.5),  # not text at all
    ("", ""),  # empty cell
])
def test_csv_cell(cell, written):
    assert csv_cell(cell) == written


# --- names on the terminal: escapes and reordering shown, never obeyed -----------------------

@pytest.mark.parametrize("name, shown", [
    ("plain.h5", "plain.h5"),  # ordinary name unchanged
    (ESC_NAME, "esc<U+001B>]0;owned<U+0007><U+001B>[2J.h5"),  # OSC title and ANSI clear
    (RTL_NAME, "run<U+202E>h5.exe.h5"),  # right-to-left override
    ("zero\u200bwidth.h5", "zero<U+200B>width.h5"),  # invisible zero-width space
    ("caf\u00e9 \u03c7=8.h5", "caf\u00e9 \u03c7=8.h5"),  # printable non-ASCII kept
])
def test_profile_prints_names_visibly(tmp_path, capsys, name, shown):
    path = checkpoint(tmp_path / name, 3)  # random tensors: an unnormalised state, a warning
    assert main(["profile", str(path)]) == 0
    out, err = capsys.readouterr()
    for stream in (out, err):
        assert "\x1b" not in stream and "\u202e" not in stream and "\x07" not in stream
    assert visible(str(path)) in out and shown in out
    assert err.startswith("warning: ") and shown in err  # the norm warning names the file


@pytest.mark.parametrize("name", [ESC_NAME, RTL_NAME, "plain.h5"])
def test_errors_print_names_visibly(tmp_path, capsys, name):
    path = tmp_path / name
    path.write_bytes(b"not hdf5 at all")
    assert main(["profile", str(path)]) == 3
    line = one_line_error(capsys)
    assert visible(name) in line and "\x1b" not in line and "\u202e" not in line


# --- saved profiles: every defect a one-line error naming the file (exit 3) -----------------

def _json_doc(tmp_path, name, edit):
    doc = bondscope.profile(checkpoint(tmp_path / "ck.h5", 1), spectrum=True).to_dict()
    path = tmp_path / name
    text = edit(doc) if callable(edit) else edit
    path.write_text(text if isinstance(text, str) else json.dumps(text))
    return path


def _h5_doc(tmp_path, name, edit):
    path = tmp_path / name
    bondscope.profile(checkpoint(tmp_path / "ck.h5", 1), spectrum=True).save(path)
    with h5py.File(path, "a") as f:
        edit(f["bondscope_profile"])
    return path


def _csv_doc(tmp_path, name, edit):
    path = tmp_path / name
    bondscope.profile(checkpoint(tmp_path / "ck.h5", 1), spectrum=True).save(path)
    path.write_text(edit(path.read_text()))
    return path


def _offsets(group):
    del group["schmidt_offsets"]
    group["schmidt_offsets"] = np.array([0, 5, 99999])


SAVED = [
    # (writer, name, edit, exit status, words in the error)
    (_json_doc, "good.json", lambda d: d, 0, None),  # an ordinary saved profile
    (_json_doc, "deep.json", '{"a":' * 100000 + "1" + "}" * 100000, 3,
     "nested too deeply"),  # RecursionError in the JSON parser
    (_json_doc, "dims0.json", lambda d: dict(d, local_dims=[0] * 8), 3,
     "local_dims must be 8 integers >= 1"),  # ZeroDivisionError further on
    (_json_doc, "dims_short.json", lambda d: dict(d, local_dims=[2, 2]), 3,
     "local_dims must be 8 integers"),  # one per site, not two
    (_json_doc, "huge.json", lambda d: dict(d, sites=10**12), 3,
     "sites must be an integer in 1.."),  # MemoryError in budget
    (_json_doc, "float_sites.json", lambda d: dict(d, sites=8.0), 3,
     "sites must be an integer"),  # a float is not a site count
    (_h5_doc, "good.h5", lambda g: None, 0, None),  # an ordinary results file
    (_h5_doc, "offsets.h5", _offsets, 3, "schmidt_offsets must be"),  # IndexError before
    (_h5_doc, "noheader.h5", lambda g: g.attrs.__delitem__("header_json"), 3,
     "lacks its header_json attribute"),  # KeyError from h5py before
    (_h5_doc, "nopos.h5", lambda g: g.__delitem__("position"), 3,
     "lacks its position dataset"),  # a column missing
    (_h5_doc, "badheader.h5", lambda g: g.attrs.__setitem__("header_json", "{oops"), 3,
     "is damaged"),  # header not JSON
    (_csv_doc, "good.csv", lambda t: t, 0, None),  # an ordinary CSV profile
    (_csv_doc, "cell.csv", lambda t: t.replace("\n1,", "\nabc,", 1), 3,
     "data row 1, column 'position': 'abc' is not an integer"),  # bad integer cell
    (_csv_doc, "entropy.csv", lambda t: t.replace(t.splitlines()[2].split(",")[3], "x=1", 1),
     3, "is not a number"),  # bad float cell
    (_csv_doc, "header.csv", lambda t: "# {broken\n" + t.split("\n", 1)[1], 3,
     "header line is not JSON"),  # damaged header line
]


@pytest.mark.parametrize("writer, name, edit, status, words", SAVED)
@pytest.mark.parametrize("verb", [["budget", "--total", "1e-6"], ["profile"]])
def test_saved_profile_defects(tmp_path, capsys, writer, name, edit, status, words, verb):
    path = writer(tmp_path, name, edit)
    assert main([verb[0], str(path), *verb[1:]]) == status
    if status:
        line = one_line_error(capsys)
        assert name in line and words in line
        assert "Error:" not in line  # no Python exception name: a message, not a crash


# --- profile on a saved profile, a directory, several files ---------------------------------

@pytest.mark.parametrize("given, status, words", [
    (["ck.h5"], 0, "max S ="),  # a checkpoint is profiled
    (["saved.json"], 0, "max S ="),  # a saved profile is shown again, not "not an HDF5 file"
    (["saved.h5"], 0, "max S ="),  # also an .h5 results file
    (["scan"], 2, "is a directory; to profile the checkpoints in it use `bondscope batch"),
    (["ck.h5", "scan/b.h5"], 2, "profile takes one checkpoint, found 2"),  # several files
])
def test_profile_inputs(tmp_path, capsys, monkeypatch, given, status, words):
    monkeypatch.chdir(tmp_path)
    prof = bondscope.profile(checkpoint("ck.h5", 2))
    prof.save("saved.json")
    prof.save("saved.h5")
    checkpoint("scan/b.h5", 3)
    assert main(["profile", *given]) == status
    captured = capsys.readouterr()
    assert words in (captured.out if status == 0 else captured.err)
    if given[0].startswith("saved"):
        assert f"{prof.entropies[3]:.10f}" in captured.out


# --- virtual datasets and external links ----------------------------------------------------

def _vds(tmp_path, source_name="amps.h5", dataset="psi", source_dataset="psi"):
    psi = chain(4)
    from builders import contract

    amps = contract(psi)
    with h5py.File(tmp_path / "amps.h5", "w") as f:
        f["psi"] = amps
    layout = h5py.VirtualLayout(shape=amps.shape, dtype="f8")
    layout[:] = h5py.VirtualSource(source_name, source_dataset, shape=amps.shape)
    with h5py.File(tmp_path / "state.h5", "w") as f:
        f.create_virtual_dataset(dataset, layout, fillvalue=0.0)
    return tmp_path / "state.h5", tmp_path / "amps.h5"


@pytest.mark.parametrize("change, words", [
    (None, None),  # source present: profiled like the source file itself
    ("remove", "source file"),  # would read as fill value: S = 0 with exit 0 before
    ("rename-dataset", "source dataset psi is not in"),  # the file is there, the data not
    ("garbage", "is not a readable HDF5 file"),  # the source is not HDF5
])
def test_virtual_dataset_sources(tmp_path, capsys, change, words):
    state, source = _vds(tmp_path)
    expected = bondscope.profile(source).entropies
    if change == "remove":
        source.unlink()
    elif change == "rename-dataset":
        with h5py.File(source, "a") as f:
            f.move("psi", "other")
    elif change == "garbage":
        source.write_bytes(b"x" * 64)
    if words is None:
        # same numbers as the source file's own dataset (common practice: a VDS is a view)
        np.testing.assert_allclose(bondscope.profile(state).entropies, expected, atol=1e-12)
        return
    with pytest.raises(CheckpointError, match="virtual dataset /psi") as err:
        bondscope.profile(state)
    assert words in str(err.value) and "fill value" in str(err.value)
    assert main(["profile", str(state)]) == 3
    assert str(source) in one_line_error(capsys)


@pytest.mark.parametrize("missing", [False, True])
def test_block_sparse_checkpoint_with_a_virtual_dataset(tmp_path, missing):
    import blockdata

    from bondscope._blocksparse import open_blocks

    path = blockdata.example_files(tmp_path)["blocks"]
    layout = h5py.VirtualLayout(shape=(4,), dtype="f8")
    layout[:] = h5py.VirtualSource("notes.h5", "x", shape=(4,))
    with h5py.File(path, "a") as f:
        f.create_virtual_dataset("notes", layout, fillvalue=0.0)
    if not missing:
        with h5py.File(tmp_path / "notes.h5", "w") as f:
            f["x"] = np.zeros(4)
        with open_blocks(path, charges="0,1") as src:
            assert src.sites == 8  # the block-sparse chain itself is read as ever
        return
    with pytest.raises(CheckpointError, match="virtual dataset /notes: source file"):
        open_blocks(path, charges="0,1")


@pytest.mark.parametrize("link, edit, same", [
    ("vds", None, True),  # nothing changed: the result is still valid
    ("vds", "rewrite-source", False),  # the VDS source changed: redo (was skipped before)
    ("external", "rewrite-source", False),  # an externally linked file changed: redo
    ("external", None, True),  # external link untouched
])
def test_fingerprint_covers_linked_files(tmp_path, link, edit, same):
    if link == "vds":
        path, source = _vds(tmp_path)
    else:
        source = checkpoint(tmp_path / "target.h5", 5)
        path = tmp_path / "links.h5"
        with h5py.File(path, "w") as f:
            f["psi"] = h5py.ExternalLink("target.h5", "/psi")
    before, _ = fingerprint(path)
    assert [s[0] for s in before["linked"]] == [str(source)]
    if edit:
        stamp = os.stat(source).st_mtime_ns
        with h5py.File(source, "a") as f:
            f.attrs["touched"] = 1
        os.utime(source, ns=(stamp + 10**9, stamp + 10**9))
    after, _ = fingerprint(path)
    assert (before == after) is same
    plain = checkpoint(tmp_path / "plain.h5", 6)
    assert "linked" not in fingerprint(plain)[0]  # ordinary files keep their old fingerprint


# --- batch: one run over hostile names and attributes ---------------------------------------

@pytest.fixture(scope="module")
def hostile_batch(tmp_path_factory):
    root = tmp_path_factory.mktemp("hostile")
    scan = root / "scan"
    big = np.arange(20000, dtype=float)  # a 160 KB attribute (dense attribute storage)
    for name, seed, bond, attrs in [
        ("=cmd.h5", 1, 4, {"chi": 8, "label": "=HYPERLINK(\"http://x\")"}),
        ("+sum.h5", 2, 4, {"chi": 16, "label": "@SUM(A1)", "time_unit": "-cmd"}),
        ("chi4.h5", 3, 4, {"chi": 4, "label": "=HYPERLINK(\"http://x\")"}),
        ("bigattr.h5", 4, 4, {"time": big, "chi": "x" * 5000}),
        (RTL_NAME, 5, 4, {}),
        ("page.html", 6, 4, {}),  # a checkpoint named like a report page
    ]:
        checkpoint(scan / name, seed, bond, libver="latest", **attrs)
    (scan / ESC_NAME).write_bytes(b"garbage, not HDF5")
    cwd = os.getcwd()
    os.chdir(scan)
    try:
        summary = run_batch(sorted(os.listdir(".")), root / "out", workers=1, threads=1,
                            group_attr="label", bond_dim_attr="chi")
    finally:
        os.chdir(cwd)
    return summary, {r["source"]: r for r in summary.rows}


def _cells(path):
    with open(path, newline="", encoding="utf-8") as f:
        return [cell for r in csv.reader(f) for cell in r]


@pytest.mark.parametrize("source, column, value", [
    ("=cmd.h5", "source", "=cmd.h5"),  # rows keep the true name; only the CSV cell is quoted
    ("=cmd.h5", "bond_dim", 8),  # user-named attribute (--bond-dim-attr chi)
    ("=cmd.h5", "bond_dim_from", "chi"),  # and where it came from
    (RTL_NAME, "bond_dim", 4),  # no attribute: the largest stored bond dimension
    (RTL_NAME, "bond_dim_from", "stored"),
    ("bigattr.h5", "time", None),  # a 20000-element time is not copied
    ("bigattr.h5", "bond_dim", 4),  # nor a 5000-character chi: the stored one instead
    ("bigattr.h5", "status", "done"),  # odd metadata is never fatal
    (ESC_NAME, "status", "failed"),  # garbage bytes: a failed row
])
def test_batch_rows(hostile_batch, source, column, value):
    assert hostile_batch[1][source][column] == value


def test_batch_csv_has_no_formula_cells(hostile_batch):
    summary, _ = hostile_batch
    cells = _cells(summary.files["csv"])
    assert "'=cmd.h5" in cells and "'+sum.h5" in cells and "'@SUM(A1)" in cells
    assert "'-cmd" in cells  # an attribute value starting with -
    for cell in cells:
        if cell.startswith(FORMULA):
            float(cell)  # only numbers may start with a formula character


def test_batch_output_is_capped(hostile_batch):
    summary, rows = hostile_batch
    record = json.loads((summary.out / rows["bigattr.h5"]["profile"]).read_text())["batch"]
    assert record["attrs"] == {}
    assert any("'time': 20000 elements, not copied" in w for w in record["warnings"])
    assert any("'chi': 5002 characters" in w for w in record["warnings"])
    # the whole result directory stays small (160 KB attribute; 200 MB were written before)
    total = sum(p.stat().st_size for p in summary.out.rglob("*") if p.is_file())
    assert total < 100 * MAX_VALUE_CHARS * len(rows)


def test_batch_series_ordered_numerically(hostile_batch):
    summary, _ = hostile_batch
    series = json.loads(summary.files["series"].read_text())["series"]
    members = series["=HYPERLINK(\"http://x\")"]
    assert [m["bond_dim"] for m in members] == [4, 8]  # chi4 before chi8, by number


def test_batch_exit_and_terminal(hostile_batch, tmp_path, capsys):
    summary, _ = hostile_batch
    assert summary.exit_status == 5 and summary.failed == 1  # 5: some checkpoints failed
    scan = summary.out.parent / "scan"
    code = main(["batch", str(scan / ESC_NAME), str(scan / "chi4.h5"), "--out",
                 str(tmp_path / "out"), "--quiet", "--workers", "1"])
    out, err = capsys.readouterr()
    assert code == 5 and "2 checkpoints: 1 done, 0 skipped, 1 failed" in out
    assert "\x1b" not in err and visible(ESC_NAME) in err


# --- batch: a checkpoint that never finishes -------------------------------------------------

@pytest.mark.parametrize("limit, error", [
    (0, "must be a number of seconds > 0"),  # zero
    (-1, "must be a number of seconds > 0"),  # negative
    (float("inf"), "must be a number of seconds > 0"),  # unbounded is no limit
    (True, "must be a number of seconds > 0"),  # a bool is not a number of seconds
])
def test_time_limit_values(tmp_path, limit, error):
    checkpoint(tmp_path / "a.h5")
    with pytest.raises(ValueError, match=error):
        run_batch(tmp_path / "a.h5", tmp_path / "out", time_limit=limit)
    with pytest.raises(ValueError, match="local pool"):
        run_batch(tmp_path / "a.h5", tmp_path / "out", time_limit=5, scheduler="tcp://x:1")


_STALL_HOOK = """
import os
if os.environ.get("BONDSCOPE_TEST_STALLED"):
    import time
    from pathlib import Path
    from bondscope._batch import worker

    _original = worker.profile_one

    def profile_one(task):
        if Path(task["path"]).name == os.environ["BONDSCOPE_TEST_STALLED"]:
            time.sleep(3600)
        return _original(task)

    worker.profile_one = profile_one
"""


def test_stuck_checkpoint_is_a_failed_row(tmp_path, monkeypatch):
    # a worker that never returns (a hung read): injected through sitecustomize, since
    # the loader refuses the FIFOs that would otherwise hang
    hooks = tmp_path / "hooks"
    hooks.mkdir()
    (hooks / "sitecustomize.py").write_text(_STALL_HOOK)
    paths = [str(hooks), os.environ.get("PYTHONPATH", "")]
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join(p for p in paths if p))
    monkeypatch.setenv("BONDSCOPE_TEST_STALLED", "stuck.h5")
    checkpoint(tmp_path / "good.h5")
    checkpoint(tmp_path / "stuck.h5")
    summary = run_batch([tmp_path / "good.h5", tmp_path / "stuck.h5"], tmp_path / "out",
                        workers=1, threads=1, time_limit=1.0)
    status = {Path(r["source"]).name: (r["status"], r["error"]) for r in summary.rows}
    assert status["good.h5"] == ("done", None)
    assert status["stuck.h5"][0] == "failed"
    assert status["stuck.h5"][1].startswith("TimeLimit: still running after the time limit")


def hung_reads(tmp_path, monkeypatch, block_alarm=False):
    """Worker processes whose reads of files named stuck*.h5 never return (a hung network
    file system), from a sitecustomize module they import at start-up; with
    ``block_alarm`` they never see their alarm either (uninterruptible code)."""
    site = tmp_path / "site"
    site.mkdir()
    code = ["import builtins, os, signal, time", "_open = builtins.open",
            "def _hung(file, *args, **kwargs):",
            "    if os.path.basename(str(file)).startswith('stuck'):",
            "        time.sleep(3600)",
            "    return _open(file, *args, **kwargs)",
            "builtins.open = _hung"]
    if block_alarm:
        code.append("signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGALRM})")
    (site / "sitecustomize.py").write_text("\n".join(code) + "\n")
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join(filter(None, [
        str(site), os.environ.get("PYTHONPATH")])))


def test_stuck_read_is_stopped_by_its_worker(tmp_path, monkeypatch):
    # a read that never returns, inside the profiling: the worker's own alarm stops it
    hung_reads(tmp_path, monkeypatch)
    good, stuck = checkpoint(tmp_path / "good.h5"), checkpoint(tmp_path / "stuck.h5")
    summary = run_batch([good, stuck], tmp_path / "out", workers=1, threads=1, time_limit=1.0)
    status = {Path(r["source"]).name: (r["status"], r["error"]) for r in summary.rows}
    assert status["good.h5"] == ("done", None)
    assert status["stuck.h5"][0] == "failed"
    assert status["stuck.h5"][1].startswith("TimeLimit: still running after the time limit")


# --- output files: temporary files, errors, concurrent writers ------------------------------

def test_stale_parts_by_name_and_age(tmp_path):
    target = tmp_path / "p.json"
    old = time.time() - STALE_SECONDS - 60
    files = {
        ".p.json.abcd1234.part": (old, False),  # ours, of a killed writer: removed
        ".p.json.live5678.part": (time.time(), True),  # ours, a live writer's: kept
        ".q.json.abcd1234.part": (old, True),  # ours, but of another target: kept here
        "p.json.part": (old, True),  # not our name pattern: never touched
        ".p.json.toolongname.part": (old, True),  # nor this
    }
    for name, (mtime, _) in files.items():
        (tmp_path / name).write_text("x")
        os.utime(tmp_path / name, (mtime, mtime))
    atomic_write(target, lambda tmp: Path(tmp).write_text("{}"))
    for name, (_, kept) in files.items():
        assert (tmp_path / name).exists() is kept, name
    assert remove_stale_parts(tmp_path) == 1  # the other target's stale file, directory-wide


def test_concurrent_batch_keeps_the_other_ones_files(tmp_path):
    checkpoint(tmp_path / "scan" / "a.h5")
    profiles = tmp_path / "out" / "profiles"
    profiles.mkdir(parents=True)
    other = profiles / ".a-0123456789.json.k2j4h6g8.part"  # another batch writing now
    other.write_text("partial")
    summary = run_batch(tmp_path / "scan", tmp_path / "out", workers=1, threads=1)
    assert summary.done == 1 and other.exists()


def test_fsync_before_publishing(tmp_path, monkeypatch):
    calls = []
    real_fsync, real_replace = os.fsync, os.replace
    monkeypatch.setattr(os, "fsync", lambda fd: (calls.append("fsync"), real_fsync(fd))[1])
    monkeypatch.setattr(os, "replace", lambda a, b: (calls.append("rename"), real_replace(a, b))[1])
    atomic_write(tmp_path / "x.json", lambda tmp: Path(tmp).write_text("{}"))
    assert calls[:2] == ["fsync", "rename"]  # the data reaches the disk before the name


@pytest.mark.parametrize("fault", [
    "replace",  # a read-only directory refuses the rename
    "mkstemp",  # or the temporary file itself
    "parent-is-file",  # the output's folder is a file
])
def test_output_errors_name_the_users_path(tmp_path, monkeypatch, capsys, fault):
    target = tmp_path / "results" / "p.json"
    if fault == "parent-is-file":
        (tmp_path / "results").write_text("a file")
    else:
        target.parent.mkdir()

        def refuse(*args, **kwargs):
            raise PermissionError(13, "Permission denied", str(target.parent / ".p.json.x.part"))
        monkeypatch.setattr(os if fault == "replace" else __import__("tempfile"), fault, refuse)
    ck = checkpoint(tmp_path / "ck.h5")
    assert main(["profile", str(ck), "-o", str(target), "--quiet"]) == 3
    line = one_line_error(capsys)
    assert str(target) in line and ".part" not in line
    assert not any(p.name.endswith(".part") for p in tmp_path.rglob("*"))


# --- run metadata: attribute names chosen once, checked once --------------------------------

@pytest.mark.parametrize("options, found", [
    ({}, {"bond_dim": 7, "time": 0.5}),  # default names
    ({"bond_dim_attr": "chi"}, {"bond_dim": 32, "time": 0.5}),  # the user's name
    ({"time_attr": "t", "weight_attr": "trunc_err"},
     {"bond_dim": 7, "time": 2.5, "max_discarded_weight": 1e-9}),  # several
    ({"bond_dim_attr": "absent"}, {"time": 0.5}),  # a name not present: nothing
])
def test_run_attribute_names(tmp_path, options, found):
    from bondscope._runinfo import attribute_names

    path = checkpoint(tmp_path / "ck.h5", bond_dim=7, chi=32, time=0.5, t=2.5,
                      trunc_err=1e-9)
    got = run_attributes(path, rename=attribute_names(ProfileOptions(**options)))
    assert {k: got[k] for k in found} == found and set(found) <= set(got)


@pytest.mark.parametrize("rename, meta", [
    (None, {"time": 0.5}),  # default names: no max_discarded_weight attribute
    ({"max_discarded_weight": "trunc_err", "time": "t"},
     {"time": 2.5, "max_discarded_weight": 1e-9}),  # the batch's names reach the comparison
    ({"time": "label"}, {}),  # a text time is left out
])
def test_series_comparison_reads_the_batch_names(tmp_path, rename, meta):
    from bondscope._analyses.comparison import checkpoint_meta

    path = checkpoint(tmp_path / "ck.h5", time=0.5, t=2.5, trunc_err=1e-9, label="x")
    assert checkpoint_meta(path, rename) == meta


@pytest.mark.parametrize("kwargs, error", [
    ({"bond_dim_attr": 16}, TypeError),  # a number is not an attribute name
    ({"bond_dim_atr": "chi"}, TypeError),  # misspelt: unknown option
])
def test_run_attribute_option_errors(kwargs, error):
    with pytest.raises(error, match="bond_dim_at"):
        ProfileOptions.from_kwargs(**kwargs)


def test_run_attribute_names_do_not_change_resume():
    # the names decide only the rows' metadata, read afresh each run; results stay valid
    assert ProfileOptions(bond_dim_attr="chi").recorded() == ProfileOptions().recorded()


# --- already handled on main (report and figure items of the same issue): verified here ------

@pytest.fixture
def plot_inputs(tmp_path):
    names = {"math": checkpoint(tmp_path / "$\\foo$.h5", 7),
             "odd": checkpoint(tmp_path / "odd.h5", 8, boundary=[1, 2], time=[0.5, 1.0]),
             "pdf": checkpoint(tmp_path / "ck.pdf", 9)}
    return tmp_path, names


@pytest.mark.parametrize("case, status, words", [
    ("math", 0, "figure written to"),  # a name with $...$ is text, not mathematics
    ("odd", 0, "'boundary' = [1, 2] ignored"),  # odd metadata is a warning, not fatal
    ("pdf", 2, "refusing to write over"),  # plot ck.pdf -o ck.pdf never overwrites the input
])
def test_plot_inputs_verified(plot_inputs, capsys, case, status, words):
    root, names = plot_inputs
    source = names[case]
    output = source if case == "pdf" else root / f"{case}.png"
    before = source.read_bytes()
    assert main(["plot", str(source), "--kind", "entropy", "-o", str(output)]) == status
    captured = capsys.readouterr()
    assert words in captured.out + captured.err
    assert source.read_bytes() == before


def test_report_and_shards_verified(hostile_batch, tmp_path, capsys):
    from bondscope._figures._gather import read_results

    summary, rows = hostile_batch
    shard = summary.out / "summary.shard-0-of-2.json"
    shard.write_text(summary.files["json"].read_text())  # a shard beside the final run
    try:
        index = read_results(summary.out)
        assert sorted(r["key"] for r in index.rows) == sorted(r["key"] for r in rows.values())
    finally:
        shard.unlink()
    target = summary.out.parent / "scan" / "page.html"
    before = target.read_bytes()
    assert main(["report", str(summary.out), "-o", str(target)]) == 2  # never over an input
    assert "refusing to write over" in capsys.readouterr().err
    assert target.read_bytes() == before


@pytest.mark.slow
def test_unstoppable_checkpoint_is_killed(tmp_path, monkeypatch):
    # the pool kills workers that do not stop at their alarm, after the hard limit; the
    # checkpoints of the other workers killed with them are given out again
    hung_reads(tmp_path, monkeypatch, block_alarm=True)
    paths = [checkpoint(tmp_path / n) for n in ("a.h5", "stuck.h5", "b.h5")]
    summary = run_batch(paths, tmp_path / "out", workers=2, threads=1, time_limit=1.0)
    status = {Path(r["source"]).name: r["status"] for r in summary.rows}
    assert status == {"a.h5": "done", "stuck.h5": "failed", "b.h5": "done"}
    failed = next(r for r in summary.rows if r["status"] == "failed")
    assert failed["error"].startswith("TimeLimit: ")
