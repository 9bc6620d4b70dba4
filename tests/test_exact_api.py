"""exact_counts / exact_table / CLI / fits: schema, checks, refusals, exit codes."""
import math

import numpy as np
import pyarrow.parquet as pq
import pytest

from cfsweep import gauss
from cfsweep.cli_exact import main
from cfsweep.errors import UsageError
from cfsweep.exact import MAX_EXACT_DEN, _verify, exact_counts, exact_table, parse_integer
from cfsweep.fits import fit_inverse_log, least_squares
from cfsweep.schema import FREQUENCY_SCHEMA, SCHEMA_VERSION

import _exact_brute as brute


@pytest.fixture(scope="module")
def small_result():
    return exact_counts(300, cap=5, words=[(1, 2), (2, 1, 1), (1, 1, 1, 1, 2)], threads=1)


def test_table_schema_metadata_and_values(small_result):
    t = exact_table(small_result)
    assert t.schema.equals(FREQUENCY_SCHEMA)
    meta = {k.decode(): v.decode() for k, v in t.schema.metadata.items()}
    assert meta["cfsweep.method"] == "exact"
    assert meta["cfsweep.schema_version"] == str(SCHEMA_VERSION)
    assert meta["cfsweep.max_den"] == "300"
    rows = t.to_pylist()
    cum = brute.cumulative(300, ((1, 2), (2, 1, 1), (1, 1, 1, 1, 2)), 5)[300]
    for row in rows:
        f = 0 if row["family"] == "all" else 1
        b = cum[f]
        k = row["k"]
        assert row["positions"] == sum(max(0, n - k + 1) * c for n, c in b["lengths"].items())
        if k == 1:
            d = 5 if row["word"] == "5+" else int(row["word"])
            assert row["count"] == b["digits"][d]
        else:
            assert row["count"] == b["words"][tuple(int(s) for s in row["word"].split(","))]
        assert row["frequency"] == row["count"] / row["positions"]
        symbols = (5,) if row["word"] == "5+" else tuple(int(s) for s in row["word"].split(","))
        assert row["gauss_measure"] == gauss.word_measure(symbols, 5)
        assert row["ratio"] == row["frequency"] / row["gauss_measure"]
        assert row["std_error"] is None and row["ci_low"] is None and row["ci_high"] is None and row["z"] is None
    assert {r["family"] for r in rows} == {"all", "reduced"}


def test_verify_passes_and_detects_a_wrong_count(small_result):
    r = exact_counts(200, cap=5, words=[(1, 2), (2, 1, 1)], verify=True, threads=1)
    assert r.verified
    r.families["reduced"].word_counts[(1, 2)] += 1
    with pytest.raises(RuntimeError, match="reduced 1,2"):
        _verify(r, 1)


def test_reduced_fraction_count_matches_totient_sum():
    import sympy

    r = exact_counts(777, cap=3, threads=1)
    assert r.families["reduced"].fractions == sum(int(sympy.totient(q)) for q in range(2, 778))
    assert r.families["all"].fractions == 777 * 776 // 2


def test_mean_length_against_heilbronn_growth():
    # Mean length over all p/q, q <= Q grows like (12 ln 2 / pi^2) ln Q + const (Heilbronn; see
    # check-values): the difference of means between Q and 4Q is close to HEILBRONN * ln 4.
    a, b = exact_counts(5000, cap=3, threads=1), exact_counts(20000, cap=3, threads=1)
    diff = b.families["reduced"].mean_length - a.families["reduced"].mean_length
    assert abs(diff - gauss.HEILBRONN * math.log(4)) < 0.02


@pytest.mark.parametrize("kwargs, text", [
    (dict(max_den=MAX_EXACT_DEN + 1), "300000000"),
    (dict(max_den=1), "allowed 2..300000000"),
    (dict(max_den="1.5"), "not an integer"),
    (dict(max_den=100, cap=1), "cap 1 out of range"),
    (dict(max_den=100, words=[(0, 1)]), "digit < 1"),
    (dict(max_den=100, cap=5, words=[(1, 7)]), "word 1,5+"),
    (dict(max_den=100, all_words=2), "word 1,32+"),
    (dict(max_den=100, family="odd"), "family 'odd'"),
    (dict(max_den=2 * 10 ** 6, words=[(1, 1, 1, 1, 1)]), "1000000"),
    (dict(max_den=100, checkpoints=[1]), "checkpoint 1 out of range"),
])
def test_bad_input_is_refused_with_a_named_value(kwargs, text):
    with pytest.raises(UsageError, match=text):
        exact_counts(**kwargs)


def test_parse_integer_exact_forms():
    assert parse_integer("1e7", "x", 1, 10 ** 9) == 10 ** 7
    assert parse_integer("2.5e3", "x", 1, 10 ** 9) == 2500
    assert parse_integer(" 300000000 ", "x", 1, 10 ** 9) == 300000000
    with pytest.raises(UsageError):
        parse_integer("1e-3", "x", 1, 10)
    with pytest.raises(UsageError):
        parse_integer("abc", "x", 1, 10)


def test_all_words_one_is_the_digit_table():
    r = exact_counts(500, cap=6, all_words=1, threads=1)
    t = exact_table(r)
    assert [w for w in t.column("word").to_pylist()[:6]] == ["1", "2", "3", "4", "5", "6+"]


def test_checkpoints_fit_and_plot(tmp_path):
    cps = [200, 500, 1000, 2000, 4000]
    r = exact_counts(4000, cap=4, checkpoints=cps, threads=1)
    assert [c.max_den for c in r.checkpoints] == cps
    # The fit recomputed independently with numpy's lstsq on the checkpoint frequencies.
    freqs = [c.families["all"].digit_counts[1] / c.families["all"].total_length for c in r.checkpoints]
    lq = np.log(cps)
    design = np.stack([np.ones(5), 1 / lq, 1 / lq ** 2], axis=1)
    coef = np.linalg.lstsq(design, freqs, rcond=None)[0]
    ex = r.extrapolations[("all", "1")]
    assert ex.limit == pytest.approx(coef[0], rel=1e-9)
    assert ex.gauss_measure == gauss.word_measure((1,), 4)
    from cfsweep.plots_exact import plot_checkpoints

    png = tmp_path / "c.png"
    plot_checkpoints(r, png)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_least_squares_standard_error_matches_textbook_line_fit():
    # Simple linear regression: SE(intercept) = s sqrt(1/n + xbar^2 / Sxx), SE(slope) = s / sqrt(Sxx)
    # (any regression text, e.g. Montgomery & Runger, Applied Statistics, §11-4).
    x = np.array([1.0, 2.0, 3.5, 4.0, 6.0, 7.5])
    y = np.array([2.1, 3.9, 7.2, 8.1, 11.7, 15.2])
    fit = least_squares(np.stack([np.ones_like(x), x], 1), y)
    n = len(x)
    sxx = ((x - x.mean()) ** 2).sum()
    slope = ((x - x.mean()) * (y - y.mean())).sum() / sxx
    icpt = y.mean() - slope * x.mean()
    s = math.sqrt(((y - icpt - slope * x) ** 2).sum() / (n - 2))
    assert fit.coefficients == pytest.approx((icpt, slope), rel=1e-12)
    assert fit.std_errors == pytest.approx((s * math.sqrt(1 / n + x.mean() ** 2 / sxx), s / math.sqrt(sxx)), rel=1e-10)
    # Weight 2 on a point gives the same coefficients as listing it twice.
    w = np.ones(n)
    w[2] = 2.0
    a = least_squares(np.stack([np.ones_like(x), x], 1), y, weights=w)
    b = least_squares(np.stack([np.ones(n + 1), np.append(x, x[2])], 1), np.append(y, y[2]))
    assert a.coefficients == pytest.approx(b.coefficients, rel=1e-12)
    # Noise-free data of the model is recovered exactly, with (near) zero standard error.
    qs = [1e3, 1e4, 1e5, 1e6, 1e7]
    vals = [0.4 + 0.3 / math.log(q) - 0.2 / math.log(q) ** 2 for q in qs]
    f = fit_inverse_log(qs, vals)
    assert f.coefficients == pytest.approx((0.4, 0.3, -0.2), rel=1e-8)
    assert f.std_errors[0] < 1e-10


def test_cli_runs_and_writes_outputs(tmp_path, capsys):
    out = tmp_path / "o"
    csv = tmp_path / "t.csv"
    rc = main(["--max-den", "3e2", "--cap", "5", "--words", "1,2", "2,1", "--out", str(out), "--csv", str(csv),
               "--family", "reduced"])
    assert rc == 0
    text = capsys.readouterr().out
    r = exact_counts(300, cap=5, family="reduced", threads=1)
    assert str(r.families["reduced"].total_length) in text
    assert str(r.families["reduced"].digit_counts[1]) in text
    t = pq.read_table(out / "exact.parquet")
    assert t.schema.metadata[b"cfsweep.method"] == b"exact"
    assert t.column("count").to_pylist() == exact_table(exact_counts(300, cap=5, words=[(1, 2), (2, 1)],
                                                                     family="reduced", threads=1)).column("count").to_pylist()
    assert csv.read_text().startswith('"family"')


@pytest.mark.parametrize("argv, text", [
    (["--max-den", "1e9"], "300000000"),
    (["--max-den", "abc"], "--max-den 'abc'"),
    (["--max-den", "100", "--cap", "0"], "--cap 0"),
    (["--max-den", "100", "--family", "x"], "--family 'x'"),
    (["--max-den", "100", "--words", "1,x"], "word '1,x'"),
    (["--max-den", "100", "--plot", "a.png"], "--plot"),
    (["--max-den", "100", "--all-words", "2"], "word 1,32+"),
    (["--max-den", "100", "--threads", "0"], "--threads 0"),
    (["--max-den", "100", "--words", "20+"], "word '20+'"),
])
def test_cli_bad_input_exits_2_with_one_line(argv, text, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and text in err
