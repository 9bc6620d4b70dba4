"""Good-proportion analysis: Wilson intervals, fits on synthetic curves, pipeline counts, CLI errors."""
import math

import mpmath
import numpy as np
import pytest

from cfsweep import sweep
from cfsweep.cli import main
from cfsweep.good import (fit_bad_fraction, good_proportion, heuristic_bad_fraction, log_bins,
                          wilson_interval)
from cfsweep.reduce import merge_run
from reference import cf_fraction, member
from test_goodness_kernel import _reference_good_cached


@pytest.mark.parametrize("x,n", [(0, 10), (3, 10), (10, 10), (512, 1000), (1, 10**6)])
def test_wilson_endpoints_solve_the_score_equation(x, n):
    # Wilson (1927): the interval is {pi : (p_hat - pi)^2 <= z^2 pi (1 - pi) / n}; its ends are the roots.
    lo, hi = wilson_interval(x, n)
    z = 1.959963984540054
    for pi in (lo, hi):
        assert (x / n - pi) ** 2 == pytest.approx(z * z * pi * (1 - pi) / n, rel=1e-9, abs=1e-15)
    if x == 0:  # closed form of the upper end for zero successes: z^2 / (n + z^2)
        assert hi == pytest.approx(z * z / (n + z * z), rel=1e-12)


def test_fit_recovers_known_exponents_from_synthetic_curves():
    # Invented data (synthetic curves with known exponents), used only to test the fitting code.
    q = np.geomspace(1e3, 1e7, 30)
    n = np.full(q.shape, 10**9)
    for alpha, c in ((0.25, 3.0), (0.5, 1.0)):
        good = np.round(n * (1 - c * q ** -alpha)).astype(np.int64)
        fit = fit_bad_fraction(q, n, good, "power", upper_fraction=1.0)
        assert fit.rate == pytest.approx(alpha, abs=max(5 * fit.rate_se, 1e-4))
        assert math.exp(fit.log_c) == pytest.approx(c, rel=1e-3)
    beta = 1.5
    good = np.round(n * (1 - 2.0 * np.log(q) ** -beta)).astype(np.int64)
    fit_log = fit_bad_fraction(q, n, good, "log", upper_fraction=1.0)
    fit_pow = fit_bad_fraction(q, n, good, "power", upper_fraction=1.0)
    assert fit_log.rate == pytest.approx(beta, abs=1e-3)
    assert fit_log.reduced_chi2 < fit_pow.reduced_chi2  # the right model fits better


def test_heuristic_single_digit_is_a_normal_tail():
    # One digit with variance constant s2: 1 - G = 2 Phi(-eps sqrt(n)/sqrt(s2)), Phi from mpmath.
    q, eps, s2 = 10**6, 0.1, 0.3
    n = 12 * math.log(2) / math.pi**2 * math.log(q) + 1.46707807943397547289779848470723 - 1  # Heilbronn–Porter
    expected = float(mpmath.erfc(eps * mpmath.sqrt(n) / mpmath.sqrt(s2) / mpmath.sqrt(2)))
    assert heuristic_bad_fraction(q, eps, {1: s2}) == pytest.approx(expected, rel=1e-12)


def test_log_bins_cover_every_denominator_once():
    for lo, hi in ((2, 3), (2, 3000), (1000, 10**6), (17, 17)):
        edges = log_bins(lo, hi, 8)
        assert edges[0] == lo and edges[-1] == hi + 1 and np.all(np.diff(edges) > 0)


@pytest.mark.parametrize("family", ["all", "reduced"])
def test_pipeline_good_counts_equal_plain_python(tmp_path, family):
    run = sweep(90, tmp_path / "r", family=family, cap=8, words=1, blocks=3, good_eps="0.1,0.2", good_k=2)
    g = merge_run(run.store).goodness.to_pydict()
    got = {(q, e): c for q, e, c in zip(g["q_lo"], g["eps"], g["good"])}
    base = "reduced" if family == "reduced" else "all"
    for q in range(2, 91):
        for eps in (0.1, 0.2):
            want = sum(_reference_good_cached(tuple(cf_fraction(p, q)), eps, 2, 2)
                       for p in range(1, q) if member(base, "any", "any", p, q))
            assert got[(q, eps)] == want
    result = good_proportion(run)
    assert sum(result.bins.filter(np.array(result.bins["eps"]) == 0.1)["members"].to_pylist()) == \
        sum(1 for q in range(2, 91) for p in range(1, q) if member(base, "any", "any", p, q))


def test_good_cli_errors(tmp_path, capsys):
    run = sweep(30, tmp_path / "plain", cap=4, words=1)
    assert main(["good", str(run.path)]) == 2
    assert "--good-eps" in capsys.readouterr().err
    for bad, needle in (("0", "0 < eps < 1"), ("1.5", "0 < eps < 1"), ("x", "not a number"), ("0.1,0.1", "repeats")):
        assert main(["sweep", "--max-den", "20", "--good-eps", bad, "--out", str(tmp_path / "n")]) == 2
        assert needle in capsys.readouterr().err
    assert main(["sweep", "--max-den", "20", "--good-eps", "0.1", "--good-k", "9", "--out", str(tmp_path / "n")]) == 2
    assert "1 <= --good-k <= 6" in capsys.readouterr().err
    assert not (tmp_path / "n").exists()


def test_good_cli_writes_outputs(tmp_path, capsys):
    run = sweep(200, tmp_path / "r", cap=8, words=1, good_eps="0.2,0.3")
    assert main(["good", str(run.path), "--csv", str(tmp_path / "bins.csv")]) == 0
    out = capsys.readouterr().out
    assert "eps=0.2:" in out and "eps=0.3:" in out
    assert (run.path / "tables" / "good.png").stat().st_size > 1000
    assert (tmp_path / "bins.csv").read_text().startswith('"q_lo"')
