"""Prefix discrepancy against a brute-force twin over every word (absent ones included)."""
from __future__ import annotations

import itertools
from collections import Counter

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from cfsweep import stream as S
from cfsweep.gauss import cylinder_measure
from test_stream_support import FAMILIES, reference_stream


def twin_sup(digits: list[int], n: int, k: int):
    """(value, word, count): max |count/(n-k+1) - mu| over every word of length k, ties to the smaller word.

    Words are enumerated over digits 1..M with M above every digit of the prefix: a word with a digit
    > M is absent and has a smaller mu than the (also absent) word with that digit lowered to M
    (mu falls as a digit grows: checked in test_measure_falls_as_a_digit_grows).
    """
    positions = n - k + 1
    counts = Counter(tuple(digits[j:j + k]) for j in range(positions))
    top = max(digits[:n]) + 1
    best = None
    for w in itertools.product(range(1, top + 1), repeat=k):  # lexicographic: strict > keeps the smaller
        c = counts.get(w, 0)
        v = abs(c / positions - cylinder_measure(w))
        if best is None or v > best[0]:
            best = (v, w, c)
    return best


def _label(word):
    return ",".join(map(str, word))


@settings(max_examples=60, deadline=None)
@given(word=st.lists(st.integers(1, 40), min_size=1, max_size=5), place=st.integers(0, 4))
def test_measure_falls_as_a_digit_grows(word, place):
    place %= len(word)
    raised = list(word)
    raised[place] += 1
    assert cylinder_measure(raised) < cylinder_measure(word)


def _check_rows(family, n_max, max_k, checkpoints, table_entries=S.DEFAULT_TABLE_ENTRIES):
    digits, _ = reference_stream(family, n_max)
    rows = S.prefix_discrepancy(family, n_max, max_k, chunk_size=977, checkpoints=checkpoints,
                                table_entries=table_entries).to_pylist()
    expected_keys = [(n, k) for n in sorted(set(checkpoints)) for k in range(1, max_k + 1) if n - k + 1 >= 1]
    assert [(r["prefix_length"], r["k"]) for r in rows] == expected_keys
    outcomes = Counter()
    for r in rows:
        n, k = r["prefix_length"], r["k"]
        value, word, count = twin_sup(digits, n, k)
        assert r["positions"] == n - k + 1
        if r["exact"]:
            assert (r["discrepancy"], r["word"], r["count"]) == (value, _label(word), count)
            assert r["gauss_measure"] == cylinder_measure(word)
            outcomes["exact", count == 0] += 1
        else:
            # Only bounded: the true sup lies between the value found and the bound.
            assert r["discrepancy"] <= value <= r["outside_bound"]
            outcomes["bounded"] += 1
    return rows, outcomes


def test_all_family_small_prefixes_equal_the_twin():
    points = [1, 2, 3, 5, 12, 13, 40, 100, 1000, 5000, 20_000]
    rows, outcomes = _check_rows("all", 20_000, 2, points)
    assert all(r["exact"] for r in rows)
    # At n = 12 the absent word (1, 1) (mu = |log2(1 + 1/F_4^2)| = 0.1520, check-values.md) is the sup.
    r12 = [r for r in rows if (r["prefix_length"], r["k"]) == (12, 2)][0]
    assert (r12["word"], r12["count"]) == ("1,1", 0)
    assert abs(r12["discrepancy"] - 0.1520030934) < 1e-9
    assert outcomes["exact", True] >= 1 and outcomes["exact", False] >= 1


def test_words_of_length_three():
    _check_rows("all", 1500, 3, [7, 300, 1500])
    _check_rows("prime", 800, 3, [50, 800])


@settings(max_examples=25, deadline=None)
@given(family=st.sampled_from(sorted(FAMILIES)), n=st.integers(1, 2500),
       points=st.lists(st.integers(1, 2500), min_size=1, max_size=3))
def test_any_family_and_checkpoints_equal_the_twin(family, n, points):
    points = sorted({min(p, n) for p in points} | {n})
    _check_rows(family, n, 2, points)


@settings(max_examples=25, deadline=None)
@given(family=st.sampled_from(sorted(FAMILIES)), n=st.integers(20, 3000), entries=st.integers(4, 200))
def test_small_count_box_is_exact_or_honestly_bounded(family, n, entries):
    _check_rows(family, n, 2, [n // 3 + 1, n], table_entries=entries)


def test_small_box_reaches_both_outcomes():
    _, exact_outcomes = _check_rows("all", 3000, 2, [3000], table_entries=400)  # box 1..20
    _, bounded_outcomes = _check_rows("all", 3000, 2, [3000], table_entries=4)  # box 1..2
    assert exact_outcomes["bounded"] == 0 and bounded_outcomes["bounded"] == 1


def test_summary_takes_the_largest_word_length():
    table = S.prefix_discrepancy("reduced", 5000, 3, checkpoints=[100, 5000])
    rows = table.to_pylist()
    summary = S.summarize_discrepancy(table).to_pylist()
    assert [s["prefix_length"] for s in summary] == [100, 5000]
    for s in summary:
        mine = [r for r in rows if r["prefix_length"] == s["prefix_length"]]
        best = max(mine, key=lambda r: (r["discrepancy"], -r["k"]))
        assert (s["discrepancy"], s["k"], s["word"]) == (best["discrepancy"], best["k"], best["word"])
        assert s["exact"] == all(r["exact"] for r in mine)


def test_default_checkpoints():
    assert S.default_checkpoints(1) == [1]
    assert S.default_checkpoints(1000) == [1000]
    assert S.default_checkpoints(10 ** 5) == [1000, 10 ** 4, 10 ** 5]
    assert S.default_checkpoints(123_456) == [1000, 10 ** 4, 10 ** 5, 123_456]


def test_png_is_written(tmp_path):
    from cfsweep.plots_stream import plot_discrepancy

    table = S.prefix_discrepancy("all", 3000, 2, table_entries=4)
    path = plot_discrepancy(table, tmp_path / "d.png", "all")
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in tmp_path.iterdir()] == ["d.png"]
    with pytest.raises(S.UsageError, match="is a directory"):
        plot_discrepancy(table, tmp_path, "all")
