"""Invariance under splitting, resume after kill, corrupted blocks, outside Parquet readers, bad input."""
import os
import signal
import subprocess
import sys
import time

import duckdb
import numba
import polars as pl
import pytest

from cfsweep import frequency_table, open_run, sweep
from cfsweep.cli import main
from cfsweep.reduce import merge_run
from cfsweep.errors import RunIntegrityError
from cfsweep.stats import ratio_standard_error

INT_COLUMNS = ["family", "word", "k", "count", "positions"]


def integer_table(run):
    t = frequency_table(run)
    return t.select(INT_COLUMNS).to_pylist(), merge_run(run.store).lengths.to_pylist()


def test_identical_for_block_counts_and_threads(tmp_path):
    base = None
    for i, (blocks, threads) in enumerate([(1, 1), (3, 2), (17, 1), (40, 2)]):
        run = sweep(400, tmp_path / f"r{i}", family="reduced", cap=8, words=3, blocks=blocks,
                    threads=min(threads, numba.config.NUMBA_NUM_THREADS))
        got = integer_table(run)
        base = base or got
        assert got == base


def test_random_splits_by_min_den(tmp_path):
    # Two runs over [2, a] and [a+1, 500] sum to the run over [2, 500], for several a.
    whole = merge_run(sweep(500, tmp_path / "whole", cap=6, words=2, blocks=4).store)
    ref = {(w, k): c for w, k, c in zip(*(whole.words[c].to_pylist() for c in ("word", "k", "sum_c")))}
    for a in (2, 137, 499):
        parts = {}
        for lo, hi in ((2, a), (a + 1, 500)):
            if lo > hi:
                continue
            m = merge_run(sweep(hi, tmp_path / f"p{a}-{lo}", min_den=lo, cap=6, words=2, blocks=3).store)
            for w, k, c in zip(*(m.words[c].to_pylist() for c in ("word", "k", "sum_c"))):
                parts[(w, k)] = parts.get((w, k), 0) + c
        assert parts == ref


def test_standard_error_matches_direct_formula():
    # Independent twin: the delta-method variance computed from per-rational values in floats.
    import random
    rng = random.Random(3)
    cs = [rng.randint(0, 5) for _ in range(500)]
    ms = [c + rng.randint(0, 7) for c in cs]
    n, C, M = len(cs), sum(cs), sum(ms)
    f = C / M
    direct = (sum((c - f * m) ** 2 for c, m in zip(cs, ms)) / (n - 1) * n) ** 0.5 / M
    got = ratio_standard_error(n, C, sum(c * c for c in cs), sum(c * m for c, m in zip(cs, ms)), M,
                               sum(m * m for m in ms))
    assert got == pytest.approx(direct, rel=1e-12)


def test_duckdb_and_polars_read_block_files(tmp_path):
    run = sweep(300, tmp_path / "r", cap=10, words=2, blocks=6)
    table = frequency_table(run)
    assert main(["table", str(run.path)]) == 0
    blocks = str(run.path / "blocks" / "*.words.parquet")
    rows = duckdb.sql(f"SELECT word, sum(sum_c) AS c FROM '{blocks}' GROUP BY word").fetchall()
    assert dict(rows) == dict(zip(table["word"].to_pylist(), table["count"].to_pylist()))
    lengths = duckdb.sql(f"SELECT sum(rationals), sum(length * rationals) FROM "
                         f"'{run.path / 'blocks' / '*.lengths.parquet'}'").fetchall()[0]
    assert lengths == (300 * 299 // 2, sum(table.filter(table["k"].to_numpy() == 1)["count"].to_pylist()))
    freq = pl.read_parquet(run.path / "tables" / "frequency.parquet")
    assert freq["count"].to_list() == table["count"].to_pylist()
    den = pl.read_parquet(str(run.path / "blocks" / "*.denominators.parquet"))
    assert den["members"].sum() == 300 * 299 // 2


def test_truncated_and_foreign_blocks_detected_and_recomputed(tmp_path):
    run = sweep(300, tmp_path / "r", cap=6, words=2, blocks=5)
    good = integer_table(run)
    blocks = run.path / "blocks"
    # truncate one file, flip bytes in another, drop a completion record
    f1 = blocks / "000001.words.parquet"
    f1.write_bytes(f1.read_bytes()[:50])
    f2 = blocks / "000002.denominators.parquet"
    data = bytearray(f2.read_bytes())
    data[len(data) // 2] ^= 0xFF
    f2.write_bytes(bytes(data))
    (blocks / "000003.done.json").unlink()
    states = {s.block_id: s.state for s in open_run(run.path).statuses()}
    assert states == {"000000": "complete", "000001": "bad", "000002": "bad", "000003": "bad", "000004": "complete"}
    with pytest.raises(RunIntegrityError, match="000001"):
        frequency_table(open_run(run.path))
    assert main(["table", str(run.path)]) == 1
    rerun = sweep(300, tmp_path / "r", cap=6, words=2, blocks=5)
    assert integer_table(rerun) == good


def test_changed_parameters_refused(tmp_path, capsys):
    out = tmp_path / "r"
    assert main(["sweep", "--max-den", "50", "--out", str(out), "--quiet"]) == 0
    before = sorted(p.name for p in (out / "blocks").iterdir())
    assert main(["sweep", "--max-den", "60", "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "max_den: 50 -> 60" in err and err.count("\n") == 1
    assert sorted(p.name for p in (out / "blocks").iterdir()) == before


@pytest.mark.parametrize("args,needle", [
    (["--max-den", "1"], "2 <= --max-den"),
    (["--max-den", "-5"], "2 <= --max-den"),
    (["--max-den", "abc"], "'abc' is not an integer"),
    (["--max-den", "10", "--min-den", "20"], "2 <= --min-den <= 10"),
    (["--max-den", "10", "--cap", "1"], "2 <= --cap"),
    (["--max-den", "10", "--words", "0"], "1 <= --words"),
    (["--max-den", "10", "--cap", "300", "--words", "3"], "at most 16777216"),
    (["--max-den", "10", "--family", "odd"], "unknown term 'odd'"),
    (["--max-den", "10", "--threads", "0"], "1 <= --threads"),
])
def test_bad_input_one_line_exit_2_nothing_written(tmp_path, capsys, args, needle):
    out = tmp_path / "never"
    assert main(["sweep", *args, "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert needle in err and err.count("\n") == 1
    assert not out.exists()


def test_output_path_is_a_file(tmp_path, capsys):
    f = tmp_path / "file"
    f.write_text("keep me")
    assert main(["sweep", "--max-den", "10", "--out", str(f)]) == 2
    assert "is a file" in capsys.readouterr().err
    assert f.read_text() == "keep me"


def test_kill_and_resume_equals_uninterrupted(tmp_path):
    ref = integer_table(sweep(2500, tmp_path / "ref", family="all", cap=8, words=3, blocks=40, quiet=True))
    out = tmp_path / "killed"
    cmd = [sys.executable, "-m", "cfsweep", "sweep", "--max-den", "2500", "--cap", "8", "--words", "3",
           "--blocks", "40", "--out", str(out), "--quiet"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.time() + 120
    while time.time() < deadline:
        done = list((out / "blocks").glob("*.done.json")) if (out / "blocks").exists() else []
        if len(done) >= 3:
            break
        time.sleep(0.02)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    statuses = open_run(out).statuses()
    assert any(s.state != "complete" for s in statuses), "the kill came too late to test anything"
    rerun = sweep(2500, out, family="all", cap=8, words=3, blocks=40, quiet=True)
    assert integer_table(rerun) == ref
    assert not list((out / "blocks").glob(".*.tmp"))
