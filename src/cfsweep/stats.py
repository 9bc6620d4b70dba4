"""Frequencies, standard errors and intervals from the exact integer sums of a merged run.

For a word w of length k the frequency is the ratio estimate f = C / M with C = sum_r c_r (occurrences)
and M = sum_r m_r (places of length k), summed over the N rationals r of the run. Its delta-method
standard error with the rational as sampling unit is

    se(f) = sqrt( N / (N - 1) * sum_r (c_r - f m_r)^2 ) / M,
    sum_r (c_r - f m_r)^2 = (C2 M^2 - 2 C CM M + C^2 M2) / M^2,

with C2 = sum c_r^2, CM = sum c_r m_r, M2 = sum m_r^2, evaluated in exact integers before the one
rounding to float. For a sampled run this is a genuine 95% interval for the population frequency; for an
exhaustive sweep the counts are exact and se is the dispersion a random subsample of N rationals would
show (the finite-Q drift shows in the convergence table instead).
"""
from __future__ import annotations

import math

import numpy as np
import pyarrow as pa

from .gauss import word_measure
from .reduce import MergedRun
from .schema import FREQUENCY_SCHEMA, append_frequency_row, parse_word_label


def ratio_standard_error(n: int, c: int, c2: int, cm: int, m: int, m2: int) -> float | None:
    """Delta-method standard error of C/M (see module docstring); None if undefined (n < 2 or M = 0)."""
    if n < 2 or m == 0:
        return None
    numerator = c2 * m * m - 2 * c * cm * m + c * c * m2  # = M^2 * sum (c_r - f m_r)^2, exact
    if numerator < 0:  # impossible in exact arithmetic; guard against corrupted sums
        raise ValueError("negative sum of squares: corrupted sums")
    return math.sqrt(numerator * n / (n - 1)) / (m * m)


def frequency_rows(merged: MergedRun) -> pa.Table:
    """The frequency table (schema ``cfsweep.schema.FREQUENCY_SCHEMA``) of a merged run."""
    cap = merged.params["cap"]
    pos = {k: (m, m2) for k, m, m2 in zip(merged.positions["k"].to_pylist(), merged.positions["sum_m"].to_pylist(),
                                           merged.positions["sum_m2"].to_pylist())}
    w = merged.words.to_pydict()
    rows = []
    for label, k, c, c2, cm in zip(w["word"], w["k"], w["sum_c"], w["sum_c2"], w["sum_cm"]):
        symbols, _ = parse_word_label(label)
        m, m2 = pos[k]
        mu = word_measure(symbols, cap)
        se = ratio_standard_error(merged.members, c, c2, cm, m, m2)
        rows.append((k, symbols, label, c, m, mu, se))
    rows.sort(key=lambda r: (r[0], r[1]))
    out = {name: [] for name in FREQUENCY_SCHEMA.names}
    for k, _, label, c, m, mu, se in rows:
        append_frequency_row(out, merged.family.canonical, label, k, c, m, mu, se)
    meta = {b"cfsweep.method": merged.method.encode(), b"cfsweep.family": merged.family.canonical.encode()}
    return pa.table(out, schema=FREQUENCY_SCHEMA).replace_schema_metadata(meta)


def digit_distribution(table: pa.Table) -> tuple[np.ndarray, np.ndarray]:
    """(frequency, Gauss measure) of the single-symbol rows of a frequency table, pooled symbol last."""
    k = np.asarray(table["k"])
    freq = np.asarray(table["frequency"])[k == 1]
    mu = np.asarray(table["gauss_measure"])[k == 1]
    return freq, mu


def total_variation(table: pa.Table, cap: int) -> float:
    """Total variation distance 1/2 sum_s |f_s - mu_s| over the capped alphabet (digits 1..cap-1, cap+).

    Symbols that never occur contribute their full Gauss–Kuzmin mass.
    """
    k = np.asarray(table["k"])
    labels = [w for w, kk in zip(table["word"].to_pylist(), k) if kk == 1]
    freq = dict(zip(labels, np.asarray(table["frequency"])[k == 1]))
    total = 0.0
    for s in range(1, cap + 1):
        label = f"{cap}+" if s == cap else str(s)
        total += abs(freq.get(label, 0.0) - word_measure((s,), cap))
    return 0.5 * total


def summary(merged: MergedRun, table: pa.Table) -> dict:
    """Totals of a run: fractions, partial quotients, mean length, length histogram, TV distance."""
    lengths = dict(zip(merged.lengths["length"].to_pylist(), merged.lengths["rationals"].to_pylist()))
    return {
        "method": merged.method,
        "family": merged.family.canonical,
        "min_den": merged.params.get("min_den"),
        "max_den": merged.params.get("max_den"),
        "den_ranges": merged.params.get("den_ranges"),
        "seed": merged.params.get("seed"),
        "cap": merged.params["cap"],
        "words": merged.params["words"],
        "fractions": merged.members,
        "partial_quotients": merged.partial_quotients,
        "mean_length": merged.partial_quotients / merged.members if merged.members else float("nan"),
        "length_histogram": {int(k): int(v) for k, v in lengths.items()},
        "tv_distance_digits": total_variation(table, merged.params["cap"]),
    }


def convergence(merged: MergedRun, points: int = 200) -> pa.Table:
    """Cumulative frequency of the digits 1..4 along the sweep, at about ``points`` denominators.

    Columns: q (denominator bound Q of the prefix), members, partial_quotients, freq_digit_1..4 (null
    where the digit is pooled). Built from the per-denominator rows, so exact up to the final rounding.
    """
    den = merged.denominators
    if den is None or den.num_rows == 0:
        return pa.table({"q": pa.array([], pa.int64())})
    q = np.asarray(den["q"])
    members = np.cumsum(np.asarray(den["members"]))
    pqs = np.cumsum(np.asarray(den["partial_quotients"]))
    idx = np.unique(np.geomspace(1, len(q), num=min(points, len(q))).astype(np.int64) - 1)
    idx = idx[pqs[idx] > 0]
    out = {"q": q[idx], "members": members[idx], "partial_quotients": pqs[idx]}
    for d in range(1, 5):
        col = den[f"digit_{d}"]
        if col.null_count:
            out[f"freq_digit_{d}"] = pa.nulls(len(idx), pa.float64())
        else:
            out[f"freq_digit_{d}"] = np.cumsum(np.asarray(col))[idx] / pqs[idx]
    return pa.table(out)
