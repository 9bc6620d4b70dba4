"""Fault injection on real processes and real file systems: kill -9, signals, corrupted blocks, full disk,
concurrent sweeps, shards, and the status report.

Every fault is followed by a rerun whose integer tables must equal those of an uninterrupted run, and
every block must hold exactly the members the plan counted (nothing lost, nothing counted twice).
"""
from __future__ import annotations

import json
import os
import random
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from cfsweep import frequency_table, open_run, sweep
from cfsweep.cli import main
from cfsweep.errors import RunIntegrityError, UsageError
from cfsweep.reduce import merge_run
from cfsweep.status import SESSION_GAP_S, run_status
from cfsweep.store import LOCK_FILE

from reference import cf_fraction

# Small sweeps (a second or two each); kill windows come from a measured uninterrupted subprocess run.
PARAMS = dict(max_den=4000, cap=8, words=3, blocks=8)  # blocks of some milliseconds even with a fast kernel
BUSY = dict(max_den=2000, cap=8, words=3, blocks=16)  # long enough for a second process to meet it
INT_COLUMNS = ["family", "word", "k", "count", "positions"]


def integer_table(run):
    t = frequency_table(run)
    return t.select(INT_COLUMNS).to_pylist(), merge_run(run.store).lengths.to_pylist()


def sweep_cmd(out, params, *extra):
    cmd = [sys.executable, "-m", "cfsweep", "sweep", "--out", str(out), "--quiet"]
    for key, value in params.items():
        cmd += [f"--{key.replace('_', '-')}", str(value)]
    return cmd + list(extra)


def temp_files(run_dir: Path) -> list[Path]:
    return [p for p in Path(run_dir).rglob("*.tmp")]


def assert_blocks_exact(run_dir: Path):
    """Every block complete, its record's members equal to the plan's count, the total Q(Q-1)/2."""
    store = open_run(run_dir).store
    q = store.params["max_den"]
    for block in store.plan:
        record = store.read_record(block["id"])
        assert record["members"] == block["expected_members"], block["id"]
    # all p/q with 1 <= p < q <= Q: sum of (q - 1) = Q(Q-1)/2
    assert sum(store.read_record(b["id"])["members"] for b in store.plan) == q * (q - 1) // 2


def wait_for(predicate, timeout=60.0, step=0.01):
    deadline = time.time() + timeout
    while time.time() < deadline:
        if predicate():
            return True
        time.sleep(step)
    return False


def done_count(run_dir: Path) -> int:
    blocks = Path(run_dir) / "blocks"
    return len(list(blocks.glob("*.done.json"))) if blocks.is_dir() else 0


def holder_pid(lock_path: Path):
    try:
        text = lock_path.read_text()
    except FileNotFoundError:
        return None
    fields = dict(part.split("=", 1) for part in text.split() if "=" in part)
    return int(fields["pid"]) if "pid" in fields else None


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    base = tmp_path_factory.mktemp("ref")
    return {
        "small": integer_table(sweep(out=base / "small", **PARAMS)),
        "busy": integer_table(sweep(out=base / "busy", **BUSY)),
    }


# -- kill -9 --------------------------------------------------------------------------------------------
def test_kill9_at_ten_seeded_moments_then_rerun(tmp_path, reference, capsys):
    # Timing of an uninterrupted run sets the scale of the moments (measured, never asserted on).
    t0 = time.perf_counter()
    proc = subprocess.Popen(sweep_cmd(tmp_path / "timing", PARAMS), stdout=subprocess.DEVNULL)
    wait_for(lambda: done_count(tmp_path / "timing") >= 1)
    startup = time.perf_counter() - t0
    proc.wait()
    per_block = (time.perf_counter() - t0 - startup) / max(1, PARAMS["blocks"] - 1)
    # A moment is (blocks completed first, then a fraction of a block's time); 0 blocks means a moment
    # in the start-up (imports, manifest creation). Progress-relative, so the load of the machine does
    # not push the kills past the end of the run.
    rng = random.Random(20250607)
    moments = [(rng.randrange(PARAMS["blocks"] - 1), rng.random()) for _ in range(10)]
    mid_run = 0
    for i, (after_blocks, fraction) in enumerate(moments):
        out = tmp_path / f"k{i}"
        proc = subprocess.Popen(sweep_cmd(out, PARAMS), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        if after_blocks == 0:
            time.sleep(fraction * startup)
        else:
            wait_for(lambda: done_count(out) >= after_blocks or proc.poll() is not None)
            time.sleep(fraction * per_block)
        if proc.poll() is None:
            proc.send_signal(signal.SIGKILL)
            mid_run += done_count(out) < PARAMS["blocks"]
        proc.wait()
        rerun = sweep(out=out, **PARAMS)
        assert integer_table(rerun) == reference["small"], f"kill {i}"
        assert_blocks_exact(out)
        assert temp_files(out) == [], f"kill {i}"
        assert (out / LOCK_FILE).read_text() == ""  # the rerun's holder line is cleared at its end
    with capsys.disabled():
        print(f"\nkill -9 moments {moments}: {mid_run} of 10 landed before the run was complete")
    assert mid_run >= 7, f"only {mid_run} of 10 kills hit a running sweep"


# -- signals --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM])
def test_sigint_sigterm_stop_cleanly_and_resume(tmp_path, reference, signum):
    out = tmp_path / "r"
    proc = subprocess.Popen(sweep_cmd(out, BUSY), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    assert wait_for(lambda: done_count(out) >= 3), "sweep did not start"
    manifest = (out / "manifest.json").read_bytes()
    os.kill(proc.pid, signum)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert err.count("\n") == 1 and "interrupted" in err and "rerun the same command" in err
    assert temp_files(out) == []
    assert (out / "manifest.json").read_bytes() == manifest
    assert (out / LOCK_FILE).read_text() == ""
    states = {s.state for s in open_run(out).statuses()}
    assert states <= {"complete", "missing"}  # nothing half-written
    assert "missing" in states, "the signal came too late to test anything"
    assert integer_table(sweep(out=out, **BUSY)) == reference["busy"]
    assert_blocks_exact(out)


# -- corrupted blocks -----------------------------------------------------------------------------------
def test_corrupted_foreign_and_unrecorded_blocks_named_and_recomputed(tmp_path, reference, capsys):
    run = sweep(out=tmp_path / "r", **PARAMS)
    other = sweep(out=tmp_path / "other", **dict(PARAMS, family="reduced"))  # same block ids, other params
    blocks = run.path / "blocks"
    f1 = blocks / "000001.words.parquet"
    f1.write_bytes(f1.read_bytes()[: f1.stat().st_size // 2])  # truncated
    f2 = blocks / "000002.denominators.parquet"
    data = bytearray(f2.read_bytes())
    data[len(data) // 3] ^= 0x5A  # flipped bits, same size
    f2.write_bytes(bytes(data))
    for path in (other.path / "blocks").glob("000003.*"):  # a whole block of another parameter set
        shutil.copy(path, blocks / path.name)
    shutil.copy(other.path / "blocks" / "000004.lengths.parquet", blocks / "000004.lengths.parquet")
    (blocks / "000005.done.json").unlink()  # missing completion record

    status = run_status(run.path)
    reasons = {b["id"]: b["reason"] for b in status["bad_blocks"]}
    assert set(reasons) == {"000001", "000002", "000003", "000004", "000005"}
    assert "000001.words.parquet has" in reasons["000001"] and "bytes, expected" in reasons["000001"]
    assert "000002.denominators.parquet does not match its recorded sha256" == reasons["000002"]
    assert "another parameter set" in reasons["000003"]
    assert "000004.lengths.parquet" in reasons["000004"]
    assert "without a completion record" in reasons["000005"]
    assert status["blocks"] == {"total": 8, "complete": 3, "missing": 0, "bad": 5}
    assert not status["complete"]

    assert main(["status", str(run.path)]) == 0
    text = capsys.readouterr().out
    for bid in reasons:
        assert f"bad: {bid}: {reasons[bid]}" in text

    with pytest.raises(RunIntegrityError) as info:
        frequency_table(open_run(run.path))
    for bid in reasons:
        assert bid in str(info.value)

    assert integer_table(sweep(out=run.path, **PARAMS)) == reference["small"]
    assert_blocks_exact(run.path)
    assert run_status(run.path)["blocks"]["complete"] == 8


# -- full disk ------------------------------------------------------------------------------------------
@pytest.fixture
def small_fs(tmp_path):
    """A real 2 MiB tmpfs; skipped where mounting is not permitted."""
    mount_point = tmp_path / "fs"
    mount_point.mkdir()
    proc = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=2m", "tmpfs", str(mount_point)],
                          capture_output=True, text=True)
    if proc.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs here (needs root): {proc.stderr.strip()}")
    try:
        yield mount_point
    finally:
        subprocess.run(["umount", "-l", str(mount_point)], check=False)


def fill(mount_point: Path, leave_free: int, name: str = "filler") -> Path:
    """Fill the file system with one new file until about ``leave_free`` bytes remain."""
    filler = mount_point / name
    st = os.statvfs(mount_point)
    free = st.f_bavail * st.f_frsize
    with open(filler, "wb") as fh:
        fh.write(b"\0" * max(0, free - leave_free))
    return filler


def test_full_disk_stops_with_one_line_and_loses_nothing(small_fs, reference, capsys):
    out = small_fs / "run"
    filler = fill(small_fs, 120 * 1024)  # room for a few of the 8 blocks only
    args = ["sweep", "--out", str(out), "--quiet"] + sum(
        ([f"--{k.replace('_', '-')}", str(v)] for k, v in PARAMS.items()), [])
    assert main(args) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no space left" in err and "rerun the same command" in err
    statuses = open_run(out).statuses()
    complete = {s.block_id for s in statuses if s.state == "complete"}
    assert 0 < len(complete) < PARAMS["blocks"], "the disk filled too early or too late to test anything"
    assert f"{len(complete)} of {PARAMS['blocks']} blocks are complete and kept" in err
    assert {s.state for s in statuses} == {"complete", "missing"}  # the failed block was cleaned away
    assert temp_files(out) == []
    kept = {bid: (out / "blocks" / f"{bid}.done.json").read_bytes() for bid in complete}

    # Completely full: even the holder line cannot be written; still one line and exit 1, nothing lost.
    filler2 = fill(small_fs, 0, name="filler2")
    assert main(args) == 1
    assert "no space left" in capsys.readouterr().err
    filler2.unlink()

    filler.unlink()
    assert main(args) == 0
    for bid, record in kept.items():  # completed blocks were kept as they were, not recomputed
        assert (out / "blocks" / f"{bid}.done.json").read_bytes() == record
    assert integer_table(open_run(out)) == reference["small"]
    assert_blocks_exact(out)


def test_full_disk_before_the_manifest(small_fs, reference, capsys):
    out = small_fs / "run"
    filler = fill(small_fs, 0)
    args = ["sweep", "--out", str(out), "--quiet"] + sum(
        ([f"--{k.replace('_', '-')}", str(v)] for k, v in PARAMS.items()), [])
    assert main(args) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no space left" in err
    filler.unlink()
    assert main(args) == 0  # the leftovers of the failed creation do not block the directory
    assert integer_table(open_run(out)) == reference["small"]


# -- concurrent sweeps ----------------------------------------------------------------------------------
def test_second_sweep_of_a_busy_run_is_refused_naming_the_pid(tmp_path, reference, capsys):
    out = tmp_path / "r"
    proc = subprocess.Popen(sweep_cmd(out, BUSY), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    assert wait_for(lambda: holder_pid(out / LOCK_FILE) == proc.pid and done_count(out) >= 1), "no lock seen"
    args = ["sweep", "--out", str(out), "--quiet"] + sum(
        ([f"--{k.replace('_', '-')}", str(v)] for k, v in BUSY.items()), [])
    assert main(args) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and f"pid {proc.pid}" in err and "busy" in err
    with pytest.raises(UsageError, match=f"pid {proc.pid}"):
        sweep(out=out, shard="0/2", **BUSY)  # a shard job may not join a whole-run sweep either
    running = run_status(out)["running"]
    assert [h["pid"] for h in running] == [proc.pid]
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, err
    assert integer_table(open_run(out)) == reference["busy"]
    assert_blocks_exact(out)
    assert run_status(out)["running"] == []


def test_shards_run_side_by_side(tmp_path, reference):
    out = tmp_path / "r"
    procs = [subprocess.Popen(sweep_cmd(out, BUSY, "--shard", f"{i}/2"), stdout=subprocess.DEVNULL,
                              stderr=subprocess.PIPE, text=True) for i in range(2)]
    shard_locks = [out / "locks" / f"shard-{i}-of-2.lock" for i in range(2)]
    assert wait_for(lambda: all(holder_pid(p) == pr.pid for p, pr in zip(shard_locks, procs))), \
        "the two shard jobs were never running at the same time"
    for proc in procs:
        _, err = proc.communicate(timeout=120)
        assert proc.returncode == 0, err
    assert integer_table(open_run(out)) == reference["busy"]
    assert_blocks_exact(out)


HOLD_LOCK = """
import sys
from cfsweep.store import sweep_lock
with sweep_lock(sys.argv[1], (int(sys.argv[2]), int(sys.argv[3]))):
    print("held", flush=True)
    sys.stdin.read()  # until the test closes our stdin
"""


def test_same_shard_twice_and_whole_run_beside_shards_refused(tmp_path, reference):
    out = tmp_path / "r"
    sweep(out=out, shard="0/2", **PARAMS)  # the run exists; shard 1/2 is still to do
    holder = subprocess.Popen([sys.executable, "-c", HOLD_LOCK, str(out), "1", "2"], stdin=subprocess.PIPE,
                              stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "held"
        with pytest.raises(UsageError, match=f"shard 1/2 is already running \\(pid {holder.pid} on "):
            sweep(out=out, shard="1/2", **PARAMS)
        with pytest.raises(UsageError, match=f"1 shard job\\(s\\) \\(1/2: pid {holder.pid} on "):
            sweep(out=out, **PARAMS)
        sweep(out=out, shard="0/2", **PARAMS)  # another shard may run beside it
        assert [h["pid"] for h in run_status(out)["running"]] == [holder.pid]
    finally:
        holder.stdin.close()
        assert holder.wait(timeout=30) == 0
    assert run_status(out)["running"] == []
    assert integer_table(sweep(out=out, **PARAMS)) == reference["small"]  # now free again
    assert_blocks_exact(out)


# -- shards ---------------------------------------------------------------------------------------------
def twin_partial_quotients(q_lo, q_hi):
    """Partial quotients of all p/q, q_lo <= q <= q_hi, from the Fraction-based expansion."""
    return sum(len(cf_fraction(p, q)) for q in range(q_lo, q_hi + 1) for p in range(1, q))


def test_shards_status_and_refusal_until_complete(tmp_path, reference, capsys):
    out = tmp_path / "r"
    small = dict(max_den=300, cap=6, words=2, blocks=7)
    sweep(out=out, shard="1/3", **small)
    plan = open_run(out).store.plan
    mine = [b for b in plan if b["index"] % 3 == 1]

    status = run_status(out)
    assert status["missing_blocks"] == [b["id"] for b in plan if b["index"] % 3 != 1]
    assert status["blocks"] == {"total": 7, "complete": len(mine), "missing": 7 - len(mine), "bad": 0}
    # Outside checks: fractions by the formula sum(q - 1); partial quotients by the Fraction twin.
    assert status["fractions"] == {"done": sum(q - 1 for b in mine for q in range(b["q_lo"], b["q_hi"] + 1)),
                                   "expected": 300 * 299 // 2}
    assert status["partial_quotients"]["done"] == sum(twin_partial_quotients(b["q_lo"], b["q_hi"]) for b in mine)
    total_pq = twin_partial_quotients(2, 300)
    assert abs(status["partial_quotients"]["expected_estimate"] / total_pq - 1) < 0.02  # an estimate
    records = [json.loads((out / "blocks" / f"{b['id']}.done.json").read_text()) for b in mine]
    kernel = sum(r["kernel_seconds"] for r in records)
    assert status["kernel_pq_per_second"] == pytest.approx(status["partial_quotients"]["done"] / kernel, rel=1e-12)
    # One session (no gap > SESSION_GAP_S): wall time from the first block's start to the last finish.
    assert max(r["finished_unix"] for r in records) - min(r["finished_unix"] for r in records) < SESSION_GAP_S
    wall = max(r["finished_unix"] for r in records) - min(r["finished_unix"] - r["kernel_seconds"] for r in records)
    assert status["session"]["pq_per_second"] == pytest.approx(status["partial_quotients"]["done"] / wall, rel=1e-9)
    remaining = status["partial_quotients"]["expected_estimate"] - status["partial_quotients"]["done"]
    assert status["eta_seconds"] == pytest.approx(remaining / status["session"]["pq_per_second"], rel=1e-9)

    assert main(["table", str(out)]) == 1
    err = capsys.readouterr().err
    assert "incomplete" in err and all(bid in err for bid in status["missing_blocks"])
    assert main(["status", str(out), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["missing_blocks"] == status["missing_blocks"]

    for i in (0, 2):
        assert main(["sweep", "--max-den", "300", "--cap", "6", "--words", "2", "--blocks", "7", "--quiet",
                     "--shard", f"{i}/3", "--out", str(out)]) == 0
    capsys.readouterr()
    full = run_status(out)
    assert full["complete"] and full["eta_seconds"] == 0.0
    assert full["partial_quotients"]["done"] == total_pq
    whole = sweep(out=tmp_path / "whole", **small)
    assert integer_table(open_run(out)) == integer_table(whole)


@pytest.mark.parametrize("shard,needle", [
    ("3/3", "allowed: 0 <= I <= 2"),
    ("-1/4", "allowed: 0 <= I <= 3"),
    ("1/0", "allowed: 1 <= N <= 1000000"),
    ("a/b", "not of the form I/N"),
    ("2", "not of the form I/N"),
])
def test_bad_shard_one_line_exit_2_nothing_written(tmp_path, capsys, shard, needle):
    out = tmp_path / "never"
    assert main(["sweep", "--max-den", "50", f"--shard={shard}", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert needle in err and shard in err and err.count("\n") == 1
    assert not out.exists()


def test_status_of_a_non_run_is_a_usage_error(tmp_path, capsys):
    assert main(["status", str(tmp_path)]) == 2
    assert "not a cfsweep run directory" in capsys.readouterr().err
