"""Sampled runs: determinism, family membership at huge q, exact counts of the drawn pairs, coverage."""

import warnings

import numpy as np
import pytest

from cfsweep import frequency_table
from cfsweep.cli import main
from cfsweep.good import good_proportion
from cfsweep.reduce import merge_run
from cfsweep.runs import sample
from cfsweep.sampled import draw_block, plan_sample_blocks, sample_params
from cfsweep.kernels.sampling import divisor_table, sample_pairs
from cfsweep.kernels.sweep import tally_pairs_serial
from cfsweep.stats import ratio_standard_error
from cfsweep.schema import Z95
from reference import cf_fraction, member


def _integers(run):
    m = merge_run(run.store)
    return (m.words.sort_by("word").to_pylist(), m.lengths.to_pylist(),
            None if m.goodness is None else m.goodness.to_pylist())


def test_same_seed_same_integers_for_any_split(tmp_path):
    runs = [sample(tmp_path / f"r{i}", den_range="1e15:3e15", samples=6000, seed=11, family="reduced", words=2,
                   cap=10, block_samples=bs, threads=th, good_eps="0.1,0.2") for i, (bs, th) in
            enumerate([(6000, 1), (1000, 2), (777, 1)])]
    first = _integers(runs[0])
    for r in runs[1:]:
        assert _integers(r) == first
    other = sample(tmp_path / "seed12", den_range="1e15:3e15", samples=6000, seed=12, family="reduced", words=2,
                   cap=10, good_eps="0.1,0.2")
    assert _integers(other) != first


@pytest.mark.parametrize("family,lo,hi", [("squarefree", 10**18, 10**18 + 10**17), ("prime", 2**62, 2**63),
                                          ("reduced,den=squarefree", 5 * 10**17, 6 * 10**17),
                                          ("num=prime,den=squarefree", 10**12, 2 * 10**12)])
def test_drawn_pairs_are_members_and_counts_are_exact(family, lo, hi):
    params = sample_params([(lo, hi)], 60, 5, family, cap=16, words=3)
    block = plan_sample_blocks(params)[0]
    ps, qs, attempts = draw_block(params, block)
    assert attempts >= 60
    pairs = list(zip(ps.tolist(), qs.tolist()))
    fam = params["family"]
    base = "reduced" if fam.startswith("reduced") else "all"
    num = "prime" if "num=prime" in fam else ("squarefree" if "num=squarefree" in fam else "any")
    den = "prime" if "den=prime" in fam else ("squarefree" if "den=squarefree" in fam else "any")
    for p, q in pairs:
        assert lo <= q < hi and 1 <= p < q
        assert member(base, num, den, p, q)  # sympy.isprime / sympy.factorint
    # exact counts of the drawn pairs from Fraction-based expansions
    word_sums, position_sums, length_hist = tally_pairs_serial(ps, qs, 16, 3)
    total = sum(len(cf_fraction(p, q)) for p, q in pairs)
    assert int(position_sums[1, 0]) == total
    ones = sum(cf_fraction(p, q).count(1) for p, q in pairs)
    assert int(word_sums[0, 0]) == ones


def test_confidence_intervals_cover_the_exhaustive_frequency():
    # Over 300 seeded runs of 1500 samples from all p/q with 40 <= q < 80, the 95% interval of the
    # frequency of digit 1 and of digit 2 should cover the exhaustive value about 95% of the time.
    # 600 (correlated) trials: a binomial standard deviation of about 0.9%; we accept 91%..99%.
    lo, hi = 40, 80
    exhaustive = {1: [0, 0], 2: [0, 0]}
    for q in range(lo, hi):
        for p in range(1, q):
            digits = cf_fraction(p, q)
            for d in (1, 2):
                exhaustive[d][0] += digits.count(d)
                exhaustive[d][1] += len(digits)
    truth = {d: c / m for d, (c, m) in exhaustive.items()}
    divisors = divisor_table(3)
    covered = trials = 0
    for seed in range(300):
        ps = np.empty(1500, np.uint64)
        qs = np.empty(1500, np.uint64)
        sample_pairs(np.array([seed, 99], np.uint64), np.uint64(0), np.uint64(0), 1500, np.uint64(lo),
                     np.uint64(hi), False, 0, 0, divisors, ps, qs)
        ws, pos, _ = tally_pairs_serial(ps, qs, 8, 1)
        for d in (1, 2):
            c, c2, cm = (int(x) for x in ws[d - 1])
            m, m2 = int(pos[1, 0]), int(pos[1, 1])
            f = c / m
            se = ratio_standard_error(1500, c, c2, cm, m, m2)
            covered += abs(f - truth[d]) <= Z95 * se
            trials += 1
    assert 0.91 <= covered / trials <= 0.99, covered / trials


def test_pipeline_intervals_equal_kernel_route(tmp_path):
    run = sample(tmp_path / "r", den_range="40:80", samples=1500, seed=3, cap=8, words=1)
    t = frequency_table(run).to_pydict()
    params = run.params
    ps, qs, _ = draw_block(params, run.store.plan[0])
    ws, pos, _ = tally_pairs_serial(ps, qs, 8, 1)
    c, c2, cm = (int(x) for x in ws[0])
    se = ratio_standard_error(1500, c, c2, cm, int(pos[1, 0]), int(pos[1, 1]))
    i = t["word"].index("1")
    assert t["count"][i] == c and t["std_error"][i] == pytest.approx(se, rel=1e-15)


def test_scan_and_good_on_sampled_run(tmp_path, capsys):
    assert main(["sample", "--scan", "3:5", "--samples", "3000", "--seed", "1", "--words", "1",
                 "--good-eps", "0.2,0.3", "--out", str(tmp_path / "s"), "--quiet"]) == 0
    assert main(["table", str(tmp_path / "s")]) == 0
    out = capsys.readouterr().out
    assert "per sampled range" in out and "10000" in out
    result = good_proportion(tmp_path / "s")
    assert sorted(set(result.bins["q_lo"].to_pylist())) == [1000, 10000, 100000]
    assert set(result.bins["members"].to_pylist()) == {3000}


def test_good_on_one_sampled_range_warns_nothing(tmp_path, capsys):
    # one range gives one bin: no fit and no heuristic to draw, and so nothing to put in a legend
    assert main(["sample", "--den-range", "1e6:2e6", "--samples", "2000", "--seed", "3", "--words", "2",
                 "--good-eps", "0.1,0.2", "--good-k", "2", "--out", str(tmp_path / "s"), "--quiet"]) == 0
    capsys.readouterr()
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert main(["good", str(tmp_path / "s")]) == 0
    captured = capsys.readouterr()
    assert "too few bins" in captured.out and captured.err == ""
    assert (tmp_path / "s" / "tables" / "good.png").stat().st_size > 0


@pytest.mark.parametrize("args,needle", [
    (["--den-range", "5:3"], "2 <= LO < HI"),
    (["--den-range", "1e12"], "is not LO:HI"),
    (["--den-range", "2:9223372036854775809"], "2 <= LO < HI <= 2^63"),
    (["--scan", "0:3"], "1 <= J0 <= J1 <= 18"),
    (["--den-range", "10:20", "--scan", "1:2"], "exactly one"),
    (["--den-range", "24:29", "--family", "den=prime"], "has no member"),
])
def test_sample_bad_input(tmp_path, capsys, args, needle):
    assert main(["sample", *args, "--samples", "10", "--seed", "1", "--out", str(tmp_path / "x")]) == 2
    err = capsys.readouterr().err
    assert needle in err and err.count("\n") == 1
    assert not (tmp_path / "x").exists()


def test_sample_bad_counts(tmp_path, capsys):
    for args, needle in ((["--samples", "0", "--seed", "1"], "1 <= --samples"),
                         (["--samples", "5", "--seed", "-1"], "0 <= --seed")):
        assert main(["sample", "--den-range", "10:20", *args, "--out", str(tmp_path / "x")]) == 2
        assert needle in capsys.readouterr().err


def test_shards_of_a_sampled_run_equal_the_whole(tmp_path):
    whole = sample(tmp_path / "whole", den_range="1e9:2e9", samples=4000, seed=21, cap=8, words=2,
                   block_samples=1000)
    for i in range(3):
        sample(tmp_path / "sharded", den_range="1e9:2e9", samples=4000, seed=21, cap=8, words=2,
               block_samples=1000, shard=f"{i}/3")
    from cfsweep.runs import open_run
    assert _integers(open_run(tmp_path / "sharded")) == _integers(whole)
