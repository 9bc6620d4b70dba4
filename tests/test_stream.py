"""The stream kernel and its Python API against the plain-Python Fraction twin (exact equality)."""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from cfsweep import stream as S
from cfsweep.cli_stream import main as cli_main
from cfsweep.cli_stream import parse_count
from cfsweep.errors import UsageError
from test_stream_support import FAMILIES, cf_fraction, reference_stream

OTHER_FAMILIES = ["reduced", "squarefree", "prime", "reduced,den=squarefree", "all,num=prime", "den=prime"]


def test_all_stream_begins_like_the_definition():
    # 1/2, 1/3, 2/3, 1/4, 2/4, 3/4, 1/5, 2/5 = [2], [3], [1,2], [4], [2], [1,3], [5], [2,2], ...
    # the same sequence is OEIS A072193.
    expected = [2, 3, 1, 2, 4, 2, 1, 3, 5, 2, 2, 1, 1, 2, 1, 4]
    assert S.stream_prefix("all", 16) == expected
    assert reference_stream("all", 16)[0] == expected


def test_all_first_million_terms_equal_the_fraction_twin():
    ref, cursors = reference_stream("all", 10 ** 6)
    got = np.concatenate(list(S.iter_stream("all", 10 ** 6, chunk_size=300_007)))
    assert got.dtype == np.int64 and got.shape == (10 ** 6,)
    assert np.array_equal(got, np.asarray(ref, np.int64))
    summary = S.analyse_stream("all", 10 ** 6, max_word_length=None)
    assert (summary.end_q, summary.end_p, summary.end_digits) == cursors[-1]
    assert summary.end_length == len(cf_fraction(summary.end_p, summary.end_q))


@pytest.mark.parametrize("family", OTHER_FAMILIES)
def test_family_streams_equal_the_fraction_twin(family):
    ref, cursors = reference_stream(family, 40_000)
    got = np.concatenate(list(S.iter_stream(family, 40_000, chunk_size=9_999)))
    assert got.tolist() == ref
    reader = S.StreamReader(family)
    reader.read(40_000)
    assert (reader.cursor.q, reader.cursor.p, reader.cursor.digits) == cursors[-1]


@pytest.mark.parametrize("family", ["prime", "reduced,den=squarefree", "all,num=prime"])
def test_membership_arrays_grow_without_changing_the_stream(family, monkeypatch):
    # A tiny first limit forces many doublings of the sieves while streaming.
    monkeypatch.setattr(S, "_INITIAL_DEN_LIMIT", 3)
    ref, _ = reference_stream(family, 20_000)
    assert np.concatenate(list(S.iter_stream(family, 20_000, chunk_size=777))).tolist() == ref


@settings(max_examples=40, deadline=None)
@given(family=st.sampled_from(sorted(FAMILIES)), chunk=st.integers(1, 400), terms=st.integers(1, 6000))
def test_chunk_size_does_not_change_the_stream(family, chunk, terms):
    ref, _ = reference_stream(family, terms)
    chunks = list(S.iter_stream(family, terms, chunk_size=chunk))
    assert all(c.shape[0] == chunk for c in chunks[:-1]) and 1 <= chunks[-1].shape[0] <= chunk
    assert np.concatenate(chunks).tolist() == ref


@settings(max_examples=40, deadline=None)
@given(family=st.sampled_from(sorted(FAMILIES)), split=st.integers(1, 5000), more=st.integers(1, 3000))
def test_resuming_from_a_cursor_continues_exactly(family, split, more):
    ref, cursors = reference_stream(family, split + more)
    reader = S.StreamReader(family)
    head = reader.read(split)
    cursor = reader.cursor
    assert (cursor.q, cursor.p, cursor.digits) == cursors[split - 1]
    tail = np.concatenate(list(S.iter_stream(family, more, chunk_size=97, start=cursor)))
    assert head.tolist() == ref[:split]
    assert tail.tolist() == ref[split:]


def test_integer_helper_and_endless_stream():
    ref, _ = reference_stream("all", 5000)
    assert list(S.iter_partial_quotients("all", 5000)) == ref
    endless = S.iter_stream("all", None, chunk_size=1000)
    assert np.concatenate([next(endless) for _ in range(5)]).tolist() == ref


@pytest.mark.parametrize("chunks", [(5, 4096), (100, 333_333)])
def test_parquet_files_identical_for_any_chunk_size(tmp_path, chunks):
    terms = 50_000
    ref, cursors = reference_stream("reduced", terms)
    metas = []
    for c in chunks:
        path = tmp_path / f"s{c}.parquet"
        summary = S.write_stream(path, "reduced", terms, chunk_size=c)
        f = pq.ParquetFile(path)
        assert f.metadata.num_row_groups == -(-terms // c)
        col = f.read().column(S.STREAM_COLUMN)
        assert col.type == "int64" and col.to_pylist() == ref
        meta = S.read_stream_metadata(path)
        assert meta.pop("chunk_size") == str(c)
        metas.append(meta)
        assert (summary.end_q, summary.end_p, summary.end_digits) == cursors[-1]
    q, p, d = cursors[-1]
    assert metas[0] == metas[1] == {
        "schema_version": "1", "family": "reduced", "terms": str(terms), "end_q": str(q), "end_p": str(p),
        "end_digits": str(d), "end_length": str(len(cf_fraction(p, q)))}
    assert sorted(os.listdir(tmp_path)) == sorted(f"s{c}.parquet" for c in chunks)


def test_failure_midway_leaves_no_file_and_keeps_an_existing_one(tmp_path, monkeypatch):
    path = tmp_path / "stream.parquet"
    S.write_stream(path, "all", 1000, chunk_size=100)
    before = path.read_bytes()
    real_read = S.StreamReader.read
    calls = {"n": 0}

    def failing_read(self, n):
        calls["n"] += 1
        if calls["n"] == 3:
            raise KeyboardInterrupt
        return real_read(self, n)

    monkeypatch.setattr(S.StreamReader, "read", failing_read)
    with pytest.raises(KeyboardInterrupt):
        S.write_stream(path, "all", 5000, chunk_size=100)
    assert path.read_bytes() == before
    with pytest.raises(KeyboardInterrupt):
        calls["n"] = 0
        S.write_stream(tmp_path / "new.parquet", "all", 5000, chunk_size=100)
    assert sorted(os.listdir(tmp_path)) == ["stream.parquet"]


@pytest.mark.parametrize("kwargs, words", [
    (dict(terms=0), ["terms 0", ">= 1"]),
    (dict(terms=-5), ["terms -5", ">= 1"]),
    (dict(terms=2.5), ["terms 2.5", ">= 1"]),
    (dict(terms=True), ["terms True"]),
    (dict(chunk_size=0), ["chunk_size 0", "1 <= chunk_size"]),
    (dict(family="cousins"), ["'cousins'", "allowed"]),
    (dict(max_word_length=0), ["words 0", "1 <= words <= 6"]),
    (dict(max_word_length=7), ["words 7", "1 <= words <= 6"]),
])
def test_bad_inputs_raise_usage_errors(kwargs, words):
    args = dict(family="all", terms=100)
    args.update(kwargs)
    with pytest.raises(UsageError) as info:
        S.analyse_stream(**args)
    for w in words:
        assert w in str(info.value)


def test_bad_paths_and_cursors(tmp_path):
    with pytest.raises(UsageError, match="is a directory"):
        S.write_stream(tmp_path, "all", 10)
    with pytest.raises(UsageError, match="does not exist"):
        S.write_stream(tmp_path / "missing" / "x.parquet", "all", 10)
    with pytest.raises(UsageError, match="digits 4 out of range 1..3"):
        S.StreamReader("all", S.StreamCursor(7, 4, 4))
    assert cf_fraction(4, 7) == [1, 1, 3]
    with pytest.raises(UsageError, match="not in family"):
        S.StreamReader("reduced", S.StreamCursor(6, 2, 1))
    with pytest.raises(UsageError, match="decimals 0"):
        S.decimals("all", 0)
    assert os.listdir(tmp_path) == []


def test_parse_count_is_exact():
    assert parse_count("1e10") == 10 ** 10
    assert parse_count("1_000_000") == 10 ** 6
    assert parse_count("2.5e3") == 2500
    for bad in ["1e-3", "1.5", "abc", "inf", "nan"]:
        with pytest.raises(UsageError, match="not a whole number"):
            parse_count(bad)


def test_cli_prints_the_end_position_and_table(capsys, tmp_path):
    out = tmp_path / "s.parquet"
    png = tmp_path / "d.png"
    code = cli_main(["stream", "--family", "prime", "--terms", "2e4", "--out", str(out), "--chunk-size", "5000",
                     "--discrepancy-png", str(png), "--decimals", "50", "--quiet"])
    assert code == 0
    text = capsys.readouterr().out
    ref, cursors = reference_stream("prime", 20_000)
    q, p, d = cursors[-1]
    assert f"ends in {p}/{q} (denominator {q}, numerator {p}), after {d} of its {len(cf_fraction(p, q))}" in text
    assert pq.read_table(out).column(0).to_pylist() == ref
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    table = S.summarize_discrepancy(S.prefix_discrepancy("prime", 20_000, 2)).to_pylist()
    assert [r["prefix_length"] for r in table] == [1000, 10_000, 20_000]
    for r in table:
        assert f"{r['discrepancy']:>12.6g}  {r['word']:<12}" in text
    assert f"x = 0.{S.decimals('prime', 50)}" in text


@pytest.mark.parametrize("argv, words", [
    (["--terms", "0"], ["terms 0", ">= 1"]),
    (["--terms", "1e-2"], ["terms '1e-2'", "whole number"]),
    (["--family", "odd"], ["'odd'", "allowed"]),
    (["--decimals", "0"], ["decimals 0", "1 <= decimals"]),
    (["--words", "9"], ["words 9", "1 <= words <= 6"]),
    (["--chunk-size", "0"], ["chunk_size 0", "1 <= chunk_size"]),
])
def test_cli_bad_inputs_exit_2_with_one_line(argv, words, capsys):
    assert cli_main(["stream"] + argv + ["--terms", "10"] * ("--terms" not in argv)) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    for w in words:
        assert w in err


def test_cli_out_directory_and_module_entry(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "cfsweep.cli_stream", "--terms", "100", "--out", str(tmp_path)],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "is a directory" in proc.stderr and str(tmp_path) in proc.stderr
    assert list(Path(tmp_path).iterdir()) == []
