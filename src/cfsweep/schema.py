"""One source of truth for on-disk formats: schema version, table columns, word labels.

Frequency tables (Parquet ``tables/frequency.parquet`` of a run, and every ``frequency_table`` result)
have one row per (family, word) that occurs, with these columns:

========== ======== ==================================================================================
column     type     meaning (unit)
========== ======== ==================================================================================
family     string   canonical family text (see ``cfsweep.families``)
word       string   the word's symbols joined by ",": digits as integers, the pooled symbol as ``D+``
k          int32    word length (number of partial quotients), 1 <= k <= K
count      int64    occurrences of the word, overlapping, over all rationals (exact integer)
positions  int64    number of places of length k over all rationals: sum of max(0, n - k + 1)
frequency  double   count / positions
gauss_measure double Gauss measure of the word (pooled symbols: measure of the union)
ratio      double   frequency / gauss_measure
std_error  double   delta-method standard error of frequency, the rational as sampling unit (null: exact)
ci_low     double   frequency - 1.959964 std_error (95%), null when std_error is null
ci_high    double   frequency + 1.959964 std_error (95%), null when std_error is null
z          double   (frequency - gauss_measure) / std_error, null when std_error is null or 0
========== ======== ==================================================================================
"""
from __future__ import annotations

from typing import Sequence

import pyarrow as pa

SCHEMA_VERSION = 1

#: Two-sided 95% normal quantile used for every confidence interval of the tool.
Z95 = 1.959963984540054

FREQUENCY_SCHEMA = pa.schema(
    [
        ("family", pa.string()),
        ("word", pa.string()),
        ("k", pa.int32()),
        ("count", pa.int64()),
        ("positions", pa.int64()),
        ("frequency", pa.float64()),
        ("gauss_measure", pa.float64()),
        ("ratio", pa.float64()),
        ("std_error", pa.float64()),
        ("ci_low", pa.float64()),
        ("ci_high", pa.float64()),
        ("z", pa.float64()),
    ]
)


def append_frequency_row(cols: dict[str, list], family: str, word: str, k: int, count: int, positions: int,
                         gauss_measure: float, std_error: float | None = None) -> None:
    """Append one row of FREQUENCY_SCHEMA to column lists: frequency, ratio, 95% interval and z derived
    here, so every table (sweep, sampled, exact) uses the same formulas."""
    f = count / positions
    cols["family"].append(family)
    cols["word"].append(word)
    cols["k"].append(k)
    cols["count"].append(count)
    cols["positions"].append(positions)
    cols["frequency"].append(f)
    cols["gauss_measure"].append(gauss_measure)
    cols["ratio"].append(f / gauss_measure)
    cols["std_error"].append(std_error)
    cols["ci_low"].append(None if std_error is None else f - Z95 * std_error)
    cols["ci_high"].append(None if std_error is None else f + Z95 * std_error)
    cols["z"].append(None if not std_error else (f - gauss_measure) / std_error)


def word_label(symbols: Sequence[int], cap: int | None) -> str:
    """Text of a word: ``"1,2,32+"``; symbols >= cap print as the pooled ``cap+``."""
    return ",".join(f"{cap}+" if cap is not None and s >= cap else str(int(s)) for s in symbols)


def parse_word_label(text: str) -> tuple[tuple[int, ...], bool]:
    """Inverse of :func:`word_label`: (symbols, has_pooled); a pooled ``D+`` comes back as D."""
    symbols, pooled = [], False
    for part in text.split(","):
        part = part.strip()
        if part.endswith("+"):
            pooled = True
            part = part[:-1]
        symbols.append(int(part))
    return tuple(symbols), pooled
