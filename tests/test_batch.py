"""Batch runs: engines agree, faults stay isolated, results survive SIGKILL and resume."""

import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
from scipy.linalg import svdvals

import bondscope
from bondscope._batch.inputs import collect_inputs, parse_shard, result_key
from bondscope._batch.run import run_batch
from bondscope._cli import main
from bench_batch import random_mps

ROOT = Path(__file__).resolve().parents[1]
# fields that differ between two runs of the same work
VOLATILE = ("status", "wall_seconds")


def write_checkpoint(path, tensors, **attrs):
    path.parent.mkdir(parents=True, exist_ok=True)
    with h5py.File(path, "w") as f:
        f.attrs.update(attrs)
        for i, t in enumerate(tensors):
            f[f"psi/T{i}"] = t
    return path


def state_vector(tensors):
    psi = np.ones((1, 1))
    for t in tensors:
        psi = np.tensordot(psi, t, axes=(1, 0)).reshape(-1, t.shape[2])
    return psi[:, 0]


def make_scan(root, seed=0):
    """Two series (folders J0.5, J1.0) of three times each: 8-10 sites, chi 4-8."""
    rng = np.random.default_rng(seed)
    paths = []
    for run in ("J0.5", "J1.0"):
        for step in range(3):
            tensors = random_mps(rng, sites=8 + step, chi=4 + 2 * step)
            paths.append(write_checkpoint(root / run / f"state_t{step}.h5", tensors,
                                          time=0.25 * step, bond_dim=4 + 2 * step, run=run))
    return paths


# Installed in every new Python process through PYTHONPATH: worker processes started
# after `doom(name)` kill themselves with SIGKILL when given the checkpoint `name`.
_DOOM_HOOK = """
import os
if os.environ.get("BONDSCOPE_TEST_DOOMED"):
    import signal
    from pathlib import Path
    from bondscope._batch import worker

    _original = worker.profile_one

    def profile_one(task):
        if Path(task["path"]).name == os.environ["BONDSCOPE_TEST_DOOMED"]:
            os.kill(os.getpid(), signal.SIGKILL)
        return _original(task)

    worker.profile_one = profile_one
"""


@pytest.fixture
def doom(tmp_path, monkeypatch):
    """doom(name): new worker processes die (SIGKILL) when given the checkpoint ``name``."""
    hooks = tmp_path / "hooks"
    hooks.mkdir()
    (hooks / "sitecustomize.py").write_text(_DOOM_HOOK)

    def arm(name):
        paths = [str(hooks), os.environ.get("PYTHONPATH", "")]
        monkeypatch.setenv("PYTHONPATH", os.pathsep.join(p for p in paths if p))
        monkeypatch.setenv("BONDSCOPE_TEST_DOOMED", name)
    return arm


def stable(row):
    return {k: v for k, v in row.items() if k not in VOLATILE}


def stored(out, row):
    """A result's profile document without its batch record."""
    doc = json.loads((out / row["profile"]).read_text())
    doc.pop("batch")
    return doc


@pytest.fixture(scope="module")
def pooled(tmp_path_factory):
    """The scan profiled once by a local pool of two workers."""
    root = tmp_path_factory.mktemp("pooled")
    paths = make_scan(root / "scan")
    summary = run_batch(root / "scan", root / "out", workers=2, renyi=["2"], bond_dim=4)
    return paths, summary


def test_pool_matches_serial_profile(pooled):
    paths, summary = pooled
    assert [r["status"] for r in summary.rows] == ["done"] * len(paths)
    for path, row in zip(paths, summary.rows):
        assert row["source"] == str(path)
        doc = stored(summary.out, row)
        serial = bondscope.profile(path, renyi=["2"], bond_dim=4).to_dict()
        assert [c["position"] for c in doc["cuts"]] == [c["position"] for c in serial["cuts"]]
        np.testing.assert_allclose([c["entropy"] for c in doc["cuts"]],
                                   [c["entropy"] for c in serial["cuts"]], rtol=1e-12)
        assert doc["truncation"]["infidelity"] == pytest.approx(
            serial["truncation"]["infidelity"], rel=1e-9, abs=1e-15)


def test_middle_entropy_matches_scipy_svd(pooled):
    # von Neumann entropy -sum p ln p of the squared Schmidt values, p from scipy's SVD
    # of the contracted state (Nielsen & Chuang 2000, Secs. 2.5 and 11.3)
    paths, summary = pooled
    for path, row in zip(paths, summary.rows):
        with h5py.File(path, "r") as f:
            tensors = [f[f"psi/T{i}"][()] for i in range(len(f["psi"]))]
        cut = len(tensors) // 2
        p = svdvals(state_vector(tensors).reshape(2 ** cut, -1)) ** 2
        p = p[p > 1e-300]
        assert row["middle_entropy"] == pytest.approx(-np.sum(p * np.log(p)), rel=1e-10)


def test_dask_cluster_matches_pool(pooled, tmp_path):
    distributed = pytest.importorskip("dask.distributed")
    paths, summary = pooled
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        remote = run_batch([p.parent for p in paths], tmp_path / "out", scheduler=client,
                           renyi=["2"], bond_dim=4)
    assert [r["status"] for r in remote.rows] == ["done"] * len(paths)
    assert [stable(r) for r in remote.rows] == [stable(r) for r in summary.rows]
    for mine, theirs in zip(remote.rows, summary.rows):
        assert stored(remote.out, mine) == stored(summary.out, theirs)


@pytest.mark.slow
def test_dask_worker_death_fails_only_its_checkpoint(tmp_path, doom):
    dask = pytest.importorskip("dask")
    distributed = pytest.importorskip("dask.distributed")
    rng = np.random.default_rng(13)
    for name in ("a.h5", "doomed.h5", "c.h5"):
        write_checkpoint(tmp_path / "scan" / name, random_mps(rng, 8, 4))
    doom("doomed.h5")
    # one task per worker thread, and no retry after a worker death: the first death
    # marks its one task failed
    config = {"distributed.scheduler.allowed-failures": 0,
              "distributed.scheduler.worker-saturation": 1.0}
    with dask.config.set(config), \
            distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                     dashboard_address=None) as cluster:
        summary = run_batch(tmp_path / "scan", tmp_path / "out",
                            scheduler=cluster.scheduler_address)
    status = {Path(r["source"]).name: r["status"] for r in summary.rows}
    assert status == {"a.h5": "done", "doomed.h5": "failed", "c.h5": "done"}
    assert next(r for r in summary.rows if r["status"] == "failed")["error"].startswith(
        "WorkerDied: ")


FAULTS = [
    # garbage bytes under an HDF5 name
    ("garbage.h5", "CheckpointError", "not an HDF5 file"),
    # the second half of a good checkpoint cut off (an interrupted copy)
    ("truncated.h5", "CheckpointError", "truncated"),
    # a zero-byte file
    ("empty.h5", "CheckpointError", "empty"),
    # HDF5 without a state or a chain in it
    ("nolayout.h5", "CheckpointError", "found no state-vector dataset"),
    # bond dimension 64: its estimate exceeds the batch's memory limit
    ("oversized.h5", "MemoryLimitError", "profiling needs about"),
]


@pytest.fixture(scope="module")
def faulty(tmp_path_factory):
    """Two good checkpoints among the faulty ones, profiled with a 100 kB memory limit."""
    root = tmp_path_factory.mktemp("faulty")
    rng = np.random.default_rng(7)
    for name in ("good_a.h5", "good_b.h5"):
        write_checkpoint(root / "scan" / name, random_mps(rng, 8, 4))
    (root / "scan" / "garbage.h5").write_bytes(rng.bytes(4096))
    data = write_checkpoint(root / "whole.h5", random_mps(rng, 8, 4)).read_bytes()
    (root / "scan" / "truncated.h5").write_bytes(data[:len(data) // 2])
    (root / "scan" / "empty.h5").write_bytes(b"")
    with h5py.File(root / "scan" / "nolayout.h5", "w") as f:
        f["counts"] = np.arange(5)
    write_checkpoint(root / "scan" / "oversized.h5", random_mps(rng, 14, 64))
    summary = run_batch(root / "scan", root / "out", workers=2, max_memory=100_000)
    return {Path(r["source"]).name: r for r in summary.rows}, summary


@pytest.mark.parametrize("name, kind, words", FAULTS)
def test_faulty_checkpoint_is_a_failed_row(faulty, name, kind, words):
    rows, summary = faulty
    row = rows[name]
    assert row["status"] == "failed"
    assert row["error"].startswith(f"{kind}: ") and words in row["error"]
    assert "\n" not in row["error"] and row["profile"] is None
    assert not (summary.out / "profiles" / f"{row['key']}.json").exists()


def test_faults_do_not_stop_the_batch(faulty):
    rows, summary = faulty
    assert rows["good_a.h5"]["status"] == rows["good_b.h5"]["status"] == "done"
    assert summary.exit_status == 5  # EXIT_SOME_FAILED, whatever the count
    written = json.loads(summary.files["json"].read_text())
    assert written["counts"] == {"done": 2, "skipped": 0, "failed": len(FAULTS)}


@pytest.mark.parametrize("workers, doomed", [
    (1, "c.h5"),  # the lone task in flight is the culprit at once
    (2, "c.h5"),  # both tasks in flight are retried alone; only the culprit dies again
    (2, "a.h5"),  # the very first task: a death before any success is not a start-up failure
])
def test_dead_worker_fails_only_its_checkpoint(tmp_path, doom, workers, doomed):
    rng = np.random.default_rng(11)
    names = ("a.h5", "b.h5", "c.h5", "d.h5")
    for name in names:
        write_checkpoint(tmp_path / "scan" / name, random_mps(rng, 8, 4))
    doom(doomed)
    summary = run_batch(tmp_path / "scan", tmp_path / "out", workers=workers)
    status = {Path(r["source"]).name: r["status"] for r in summary.rows}
    assert status == {n: "failed" if n == doomed else "done" for n in names}
    failed = next(r for r in summary.rows if r["status"] == "failed")
    assert failed["error"].startswith("WorkerDied: ")
    assert summary.exit_status == 5


def test_workers_that_cannot_start_stop_the_batch(tmp_path):
    write_checkpoint(tmp_path / "scan" / "a.h5", random_mps(np.random.default_rng(1), 8, 4))
    # spawned workers cannot re-import a main program read from standard input
    program = ("from bondscope._batch.run import run_batch\n"
               f"run_batch({str(tmp_path / 'scan')!r}, {str(tmp_path / 'out')!r}, workers=1)\n")
    done = subprocess.run([sys.executable, "-"], input=program, capture_output=True, text=True,
                          cwd=tmp_path, timeout=120)
    assert done.returncode == 1
    assert "RuntimeError: worker processes die on start-up" in done.stderr


def test_sigkill_mid_run_then_resume(tmp_path):
    rng = np.random.default_rng(5)
    n = 12
    for i in range(n):
        write_checkpoint(tmp_path / "scan" / f"step{i:02d}.h5", random_mps(rng, 16, 48))
    out = tmp_path / "out"
    argv = ["batch", str(tmp_path / "scan"), "--out", str(out), "--workers", "1", "--quiet"]
    proc = subprocess.Popen([sys.executable, "-m", "bondscope", *argv],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            start_new_session=True)
    deadline = time.monotonic() + 120
    profiles = out / "profiles"
    while not (profiles.is_dir() and any(profiles.glob("*.json"))):
        assert proc.poll() is None, proc.stderr.read().decode()
        assert time.monotonic() < deadline, "no result appeared within 120 s"
        time.sleep(0.002)
    os.killpg(proc.pid, signal.SIGKILL)  # the whole job, as a scheduler cancels it
    proc.wait()
    proc.stderr.close()
    before = {p.name: p.stat().st_mtime_ns for p in profiles.glob("*.json")}
    assert 1 <= len(before) < n
    for name in before:  # whatever was written is whole
        bondscope.load_profile(profiles / name)

    assert main(argv) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["counts"] == {"done": n - len(before), "skipped": len(before), "failed": 0}
    after = {p.name: p.stat().st_mtime_ns for p in profiles.glob("*.json")}
    keys = {f"{result_key(p)}.json" for p in (tmp_path / "scan").glob("*.h5")}
    assert set(after) == keys and len(os.listdir(profiles)) == n
    assert all(after[name] == mtime for name, mtime in before.items())


def test_equal_names_in_two_folders(tmp_path):
    rng = np.random.default_rng(2)
    for folder in ("a", "b"):
        write_checkpoint(tmp_path / folder / "state.h5", random_mps(rng, 8, 4))
    summary = run_batch([tmp_path / "a", tmp_path / "b"], tmp_path / "out", workers=1)
    keys = [r["key"] for r in summary.rows]
    assert len(set(keys)) == 2 and all(k.startswith("state-") for k in keys)
    for row in summary.rows:
        record = json.loads((summary.out / row["profile"]).read_text())["batch"]
        assert record["checkpoint"] == str(Path(row["source"]).resolve())
    first, second = (stored(summary.out, r) for r in summary.rows)
    assert first["cuts"] != second["cuts"]


@pytest.mark.parametrize("text, expected", [
    ("0/1", (0, 1)),  # one shard: everything
    ("3/4", (3, 4)),  # the last of four
    (" 1 / 2 ", (1, 2)),  # spaces allowed
    ((2, 5), (2, 5)),  # a pair, as from Python
    (None, None),  # no sharding
])
def test_parse_shard(text, expected):
    assert parse_shard(text) == expected


@pytest.mark.parametrize("text", [
    "2/2",  # I counts from 0
    "0/0",  # no shards
    "1",  # no N
    "-1/2",  # negative
    "a/b",  # not numbers
])
def test_parse_shard_rejects(text):
    with pytest.raises(ValueError, match="shard"):
        parse_shard(text)


@pytest.mark.parametrize("count", [
    2,  # even split of six
    4,  # uneven: shards of two and one
])
def test_shards_partition_the_inputs(tmp_path, count):
    make_scan(tmp_path / "scan")
    seen = []
    for index in range(count):
        part = run_batch(tmp_path / "scan", tmp_path / "out", workers=1,
                         shard=f"{index}/{count}")
        assert part.files["csv"].name == f"summary.shard-{index}-of-{count}.csv"
        seen += [r["source"] for r in part.rows]
    everything = [str(p) for p in collect_inputs(tmp_path / "scan")]
    assert sorted(seen) == everything and len(seen) == len(set(seen))
    merged = run_batch(tmp_path / "scan", tmp_path / "out", workers=1)
    assert merged.skipped == len(everything) and merged.files["csv"].name == "summary.csv"


RERUNS = [
    # same options: nothing recomputed
    ({}, None, 0),
    # BLAS threads do not change results
    ({"threads": 1}, None, 0),
    # an added measure changes every result
    ({"renyi": ["2", "inf"]}, None, 3),
    # force recomputes everything
    ({"force": True}, None, 3),
    # one checkpoint rewritten with other content
    ({}, "rewrite", 1),
    # one checkpoint touched: same content, newer mtime, so its fingerprint differs
    ({}, "touch", 1),
]


@pytest.mark.parametrize("changes, edit, redone", RERUNS)
def test_rerun_redoes_only_what_changed(tmp_path, changes, edit, redone):
    rng = np.random.default_rng(4)
    paths = [write_checkpoint(tmp_path / "scan" / f"c{i}.h5", random_mps(rng, 8, 4))
             for i in range(3)]
    run_batch(tmp_path / "scan", tmp_path / "out", workers=1)
    if edit == "rewrite":
        write_checkpoint(paths[1], random_mps(rng, 9, 4))
    elif edit == "touch":
        stat = paths[1].stat()
        os.utime(paths[1], ns=(stat.st_atime_ns, stat.st_mtime_ns + 10**9))
    again = run_batch(tmp_path / "scan", tmp_path / "out", workers=1, **changes)
    assert (again.done, again.skipped) == (redone, 3 - redone)
    if edit:
        assert [r["status"] for r in again.rows] == ["skipped", "done", "skipped"]


J05 = ["scan/J0.5/state_t0.h5", "scan/J0.5/state_t1.h5", "scan/J0.5/state_t2.h5"]
J10 = ["scan/J1.0/state_t0.h5", "scan/J1.0/state_t1.h5", "scan/J1.0/state_t2.h5"]
GROUPINGS = [
    # series from a root attribute
    ({"group_attr": "run"}, {"J0.5": J05, "J1.0": J10}),
    # series from the folder name
    ({"group_pattern": r"(J[0-9.]+)/"}, {"J0.5": J05, "J1.0": J10}),
    # series by time step across both folders; members ordered by time
    ({"group_pattern": r"_(t\d)\.h5$"}, {f"t{i}": [J05[i], J10[i]] for i in range(3)}),
]


@pytest.mark.parametrize("grouping, expected", GROUPINGS)
def test_series_index(pooled, tmp_path, monkeypatch, grouping, expected):
    paths, summary = pooled
    shutil.copytree(summary.out, tmp_path / "out")
    monkeypatch.chdir(summary.out.parent)
    again = run_batch("scan", tmp_path / "out", renyi=["2"], bond_dim=4, **grouping)
    assert again.skipped == len(paths)
    index = json.loads(again.files["series"].read_text())
    got = {k: [m["checkpoint"] for m in v] for k, v in index["series"].items()}
    assert got == expected
    for row in again.rows:
        assert row["series"] in expected and row["source"] in expected[row["series"]]
        assert row["time"] == pytest.approx(0.25 * int(row["source"][-4]))
    times = [m["time"] for m in index["series"][next(iter(expected))]]
    assert times == sorted(times)
    # each series carries the verdict of `bondscope compare` on its members, or the
    # reason it has none (the time steps of make_scan have 8, 9 and 10 sites)
    for name, members in index["series"].items():
        verdict = index["comparisons"][name]
        steps = {m["checkpoint"][-4] for m in members}
        if len(steps) == 1:
            assert sorted(verdict["runs"]) == sorted(Path(m["checkpoint"]).name
                                                     for m in members)
            assert isinstance(verdict["converged"], bool)
        else:
            assert "sites" in verdict["error"]


@pytest.mark.parametrize("args, words", [
    (["--shard", "2/2"], "0 <= I < N"),  # shard index out of range
    (["--workers", "0"], "integer >= 1"),  # no workers
    (["--group-pattern", "chi"], "has no (group)"),  # regex without a group
    (["--group-pattern", "("], "not a regular expression"),  # broken regex
    (["--workers", "2", "--scheduler", "tcp://127.0.0.1:1"], "not allowed"),  # two engines
    (["--renyi", "x"], "--renyi"),  # a malformed measure, refused before any work
])
def test_cli_usage_errors(pooled, tmp_path, capsys, args, words):
    paths, _ = pooled
    assert main(["batch", str(paths[0]), "--out", str(tmp_path / "out"), *args]) == 2
    assert words in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_cli_exit_status_says_some_failed(tmp_path, capsys):
    rng = np.random.default_rng(9)
    write_checkpoint(tmp_path / "scan" / "fine.h5", random_mps(rng, 8, 4))
    for name in ("bad1.h5", "bad2.h5"):
        (tmp_path / "scan" / name).write_bytes(rng.bytes(100))
    code = main(["batch", str(tmp_path / "scan"), "--out", str(tmp_path / "out"), "--quiet",
                 "--workers", "1"])
    captured = capsys.readouterr()
    assert code == 5  # not 2, which means a usage error
    assert captured.err.count("failed: ") == 2
    assert "3 checkpoints: 1 done, 0 skipped, 2 failed" in captured.out


@pytest.mark.parametrize("given, expected", [
    (["scan"], ["a.h5", "deep/b.hdf5"]),  # a directory, searched recursively
    (["scan/*.h5"], ["a.h5"]),  # a glob
    (["scan/**/*.hdf5"], ["deep/b.hdf5"]),  # a recursive glob
    (["scan/a.h5", "scan", "scan/a.h5"], ["a.h5", "deep/b.hdf5"]),  # duplicates once
    (["scan/notes.txt"], ["notes.txt"]),  # a named file, whatever its suffix
])
def test_collect_inputs(tmp_path, monkeypatch, given, expected):
    (tmp_path / "scan" / "deep").mkdir(parents=True)
    for name in ("a.h5", "deep/b.hdf5", "notes.txt"):
        (tmp_path / "scan" / name).write_bytes(b"")
    monkeypatch.chdir(tmp_path)
    found = collect_inputs(given)
    assert [p.relative_to("scan").as_posix() for p in found] == expected


@pytest.mark.parametrize("given", [
    ["missing.h5"],  # no such file
    ["scan/*.nothing"],  # a glob that matches nothing
])
def test_collect_inputs_rejects(tmp_path, monkeypatch, given):
    (tmp_path / "scan").mkdir()
    monkeypatch.chdir(tmp_path)
    with pytest.raises(OSError, match="no such file|no checkpoints found"):
        collect_inputs(given)


def test_slurm_array_script_splits_and_merges(tmp_path):
    make_scan(tmp_path / "scan")
    env = dict(os.environ, PATH=f"{Path(sys.executable).parent}{os.pathsep}{os.environ['PATH']}",
               INPUTS=str(tmp_path / "scan"), OUT=str(tmp_path / "out"),
               SLURM_ARRAY_TASK_COUNT="2", SLURM_CPUS_PER_TASK="1")
    script = ROOT / "scripts" / "slurm_batch.sh"
    for task in ("0", "1"):
        done = subprocess.run(["bash", str(script), "--renyi", "2"], capture_output=True,
                              text=True, env=dict(env, SLURM_ARRAY_TASK_ID=task), timeout=120)
        assert done.returncode == 0, done.stderr
    assert sorted(p.name for p in (tmp_path / "out").glob("summary.shard-*.csv")) == \
        ["summary.shard-0-of-2.csv", "summary.shard-1-of-2.csv"]
    assert len(list((tmp_path / "out" / "profiles").glob("*.json"))) == 6
