"""The constructed number: the stream of a family's partial quotients, its prefix discrepancy, its decimals.

Stream. The members p/q (1 <= p < q) of a family are taken in order of q, then p; the shorter expansion
of each (last digit >= 2; a non-reduced member has the digits of its reduced form) is appended. For the
family ``all`` this is 1/2, 1/3, 2/3, 1/4, 2/4, 3/4, ... -> 2, 3, 1, 2, 4, 2, 1, 3, ... and the stream is
the sequence of partial quotients of x = [0; a1, a2, ...].

Where a prefix ends is a :class:`StreamCursor` (q, p, digits): the prefix ends after the first ``digits``
partial quotients of the member p/q. Streams are produced in chunks from a cursor, so the memory used is
independent of the number of terms N; the result does not depend on the chunk size.

Prefix discrepancy (definition). For a prefix a_1..a_n and a word w = (b_1..b_k) over the full, unpooled
alphabet {1, 2, 3, ...}, the frequency is f_n(w) = #{0 <= j <= n-k : a_{j+1..j+k} = w} / (n - k + 1)
(overlapping windows; windows may straddle two expansions). The discrepancy of the prefix for words of
length k is D_k(n) = sup over ALL words w of length k of |f_n(w) - mu(w)|, mu the Gauss measure of the
cylinder [b_1..b_k] (:func:`cfsweep.gauss.cylinder_measure`). Words that do not occur count with f = 0, so
the largest mu among absent words competes. The discrepancy for words of length <= K is max_k D_k(n).
The attaining word is reported; ties go to the shorter word, then to the lexicographically smaller one.

How the sup is found exactly. mu is strictly decreasing in each digit (in the natural extension,
mu[u, b, v] = (1/ln 2) * integral over t in I(v), y in I(rev u) of dt dy / (b + t + y)^2), so a best-first
walk from (1, ..., 1), raising one digit at a time, visits words in decreasing order of mu. Walking until
the next mu is below the best value found, and then also evaluating every word with f >= the best value,
leaves only words with mu < best and f < best, whose |f - mu| <= max(f, mu) < best. Digits are counted
unpooled without limit (a digit of p/q is at most q). Words of length k >= 2 are counted per word in a
box of digits 1..L_k (L_k = floor(table_entries ** (1/k))). A word outside the box has a digit d > L_k at
some place i, so mu(w) <= mu([d]) <= mu([L_k + 1]) (shift invariance) and its count is at most the count of
the digit d; both are below the reported ``outside_bound``. When the best value found exceeds that bound
the result is exact (``exact`` true); otherwise the sup lies between ``discrepancy`` and ``outside_bound``.

Decimals. x = [0; a1, a2, ...] is irrational (the stream is infinite) and lies strictly between any two
consecutive convergents. Digits after the decimal point are printed only where the two convergents agree,
so every digit printed is certain; exact integers throughout (gmpy2 when importable).
"""
from __future__ import annotations

import heapq
import math
import os
import sys
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from typing import Iterator

import numpy as np
import pyarrow as pa

from .errors import UsageError
from .families import Family, parse_family
from .gauss import cylinder_measure
from .kernels import stream as _k
from .schema import SCHEMA_VERSION, word_label

try:  # Exact big integers: gmpy2 is much faster for huge products and conversions.
    import gmpy2 as _gmpy2

    _mpz = _gmpy2.mpz
except ImportError:  # pragma: no cover - exercised only where gmpy2 is absent
    _gmpy2 = None
    _mpz = int

DEFAULT_CHUNK_SIZE = 1 << 20
MAX_CHUNK_SIZE = 1 << 27
MAX_WORD_LENGTH = 6
#: Default number of table rows per word length k >= 2 (int64 each, 32 MiB).
DEFAULT_TABLE_ENTRIES = 1 << 22
MAX_DECIMALS = 10_000_000
STREAM_COLUMN = "partial_quotient"
META_PREFIX = "cfsweep."
_INITIAL_DEN_LIMIT = 4096
_ANY_DEN_LIMIT = (1 << 62) - 1


@dataclass(frozen=True)
class StreamCursor:
    """End of a stream prefix: after the first ``digits`` partial quotients of the member p/q.

    ``StreamCursor(1, 0, 0)`` is the empty stream. Otherwise 1 <= p < q and 1 <= digits <= length(p/q).
    """

    q: int = 1
    p: int = 0
    digits: int = 0


START = StreamCursor()


def _check_int(name: str, value, lo: int, hi: int | None = None) -> int:
    ok = isinstance(value, (int, np.integer)) and not isinstance(value, bool)
    if not ok or value < lo or (hi is not None and value > hi):
        rng = f"{lo} <= {name} <= {hi}" if hi is not None else f"{name} >= {lo}"
        raise UsageError(f"{name} {value!r} out of range: allowed integers {rng}")
    return int(value)


def _check_cursor(cursor: StreamCursor) -> StreamCursor:
    if not isinstance(cursor, StreamCursor):
        raise UsageError(f"start {cursor!r} is not a StreamCursor")
    if cursor == START:
        return cursor
    q, p, d = cursor.q, cursor.p, cursor.digits
    if not (1 <= p < q <= _ANY_DEN_LIMIT):
        raise UsageError(f"start cursor {cursor}: need 1 <= p < q < 2**62")
    n = int(_k.expansion_length_of(q, p))
    if not (1 <= d <= n):
        raise UsageError(f"start cursor {cursor}: digits {d} out of range 1..{n} (length of {p}/{q})")
    return cursor


class StreamReader:
    """Reads the stream of a family from a cursor in pieces of any size; ``cursor`` is where it stands.

    The family's membership arrays grow by doubling as the denominators grow, so memory stays
    proportional to the largest denominator reached (about sqrt(N / ln N) for N terms of ``all``).
    """

    def __init__(self, family: str | Family = "all", start: StreamCursor | None = None):
        self.family = parse_family(family)
        if self.family.predicate is not None:
            raise UsageError(f"family {self.family.canonical!r}: streams of predicate families are not "
                             "supported; allowed: all/reduced with num=/den= classes")
        start = START if start is None else _check_cursor(start)
        if start != START and not self.family.contains(start.p, start.q):
            raise UsageError(f"start cursor {start}: {start.p}/{start.q} is not in family {self.family}")
        self._q, self._p, self._pos = start.q, start.p, start.digits
        self._needs_arrays = self.family.num != "any" or self.family.den != "any"
        self._limit = 0
        self._num_ok = self._den_ok = np.zeros(0, np.uint8)
        self._grow(max(_INITIAL_DEN_LIMIT, 2 * start.q))

    def _grow(self, limit: int) -> None:
        if not self._needs_arrays:
            self._limit = _ANY_DEN_LIMIT
            return
        self._num_ok, self._den_ok, _ = self.family.membership(limit)
        self._limit = limit

    @property
    def cursor(self) -> StreamCursor:
        return StreamCursor(self._q, self._p, self._pos)

    def read_into(self, out: np.ndarray) -> None:
        """Fill the int64 array ``out`` with the next len(out) partial quotients."""
        done = 0
        while done < out.shape[0]:
            view = out[done:]
            written, q, p, pos, status = _k.fill_stream(
                view, self._q, self._p, self._pos, self._limit, self._num_ok, self._den_ok,
                self.family.coprime_only)
            done += int(written)
            self._q, self._p, self._pos = int(q), int(p), int(pos)
            if status == _k.STATUS_LIMIT:
                if self._limit >= _ANY_DEN_LIMIT // 2:
                    raise UsageError("stream denominators beyond 2**61 are out of range")
                self._grow(2 * self._limit)

    def read(self, n: int) -> np.ndarray:
        """The next n partial quotients as an int64 array."""
        out = np.empty(_check_int("n", n, 0), np.int64)
        self.read_into(out)
        return out


def iter_stream(family: str | Family = "all", terms: int | None = None,
                chunk_size: int = DEFAULT_CHUNK_SIZE,
                start: StreamCursor | None = None) -> Iterator[np.ndarray]:
    """Yield the stream as int64 numpy chunks of ``chunk_size`` terms (the last may be shorter).

    ``terms`` is the total number of partial quotients (>= 1), or None for an endless stream.
    ``start`` resumes after a cursor (default: the beginning).
    """
    chunk_size = _check_int("chunk_size", chunk_size, 1, MAX_CHUNK_SIZE)
    if terms is not None:
        terms = _check_int("terms", terms, 1)
    reader = StreamReader(family, start)
    left = terms
    while left is None or left > 0:
        n = chunk_size if left is None else min(chunk_size, left)
        yield reader.read(n)
        if left is not None:
            left -= n


def iter_partial_quotients(family: str | Family = "all", terms: int | None = None,
                           start: StreamCursor | None = None) -> Iterator[int]:
    """The stream as Python ints (convenience over :func:`iter_stream`)."""
    for chunk in iter_stream(family, terms, 1 << 16, start):
        yield from chunk.tolist()


def stream_prefix(family: str | Family = "all", terms: int = 1000) -> list[int]:
    """The first ``terms`` partial quotients as a list (for small prefixes)."""
    return list(iter_partial_quotients(family, terms))


# ----------------------------------------------------------------------------- discrepancy


@lru_cache(maxsize=1 << 20)
def _mu(word: tuple[int, ...]) -> float:
    return cylinder_measure(word)


def _box_limit(k: int, table_entries: int) -> int:
    lim = int(round(table_entries ** (1.0 / k)))
    while lim ** k > table_entries:
        lim -= 1
    while (lim + 1) ** k <= table_entries:
        lim += 1
    return lim


def default_checkpoints(terms: int) -> list[int]:
    """Prefix lengths 10**3, 10**4, ... below ``terms``, then ``terms`` itself."""
    points, n = [], 1000
    while n < terms:
        points.append(n)
        n *= 10
    points.append(terms)
    return points


@dataclass
class _WordCounter:
    """Running word counts of a stream (see the module docstring for the box and the bound)."""

    max_k: int
    table_entries: int = DEFAULT_TABLE_ENTRIES
    digit_counts: np.ndarray = field(default_factory=lambda: np.zeros(1 << 12, np.int64))

    def __post_init__(self):
        k1 = self.max_k + 1
        self.limits = np.zeros(k1, np.int64)
        self.offsets = np.zeros(k1, np.int64)
        rows = 0
        for k in range(2, k1):
            self.limits[k] = _box_limit(k, self.table_entries)
            self.offsets[k] = rows
            rows += int(self.limits[k]) ** k
        self.word_counts = np.zeros(max(rows, 1), np.int64)
        self.codes = np.zeros(k1, np.int64)
        self.run_in_box = np.zeros(k1, np.int64)
        self.seen = np.zeros(1, np.int64)

    def add(self, digits: np.ndarray, max_digit: int) -> None:
        if max_digit >= self.digit_counts.shape[0]:
            grown = np.zeros(max(2 * self.digit_counts.shape[0], max_digit + 1), np.int64)
            grown[: self.digit_counts.shape[0]] = self.digit_counts
            self.digit_counts = grown
        _k.count_words(digits, self.digit_counts, self.word_counts, self.offsets, self.limits,
                       self.max_k, self.codes, self.run_in_box, self.seen)

    @property
    def n(self) -> int:
        return int(self.seen[0])

    def count(self, word: tuple[int, ...]) -> int:
        k = len(word)
        if k == 1:
            d = word[0]
            return int(self.digit_counts[d]) if d < self.digit_counts.shape[0] else 0
        lim = int(self.limits[k])
        code = 0
        for b in word:
            code = code * lim + (b - 1)
        return int(self.word_counts[self.offsets[k] + code])

    def _table(self, k: int) -> np.ndarray:
        if k == 1:
            return self.digit_counts
        lim = int(self.limits[k])
        return self.word_counts[self.offsets[k]: self.offsets[k] + lim ** k]

    def _decode(self, k: int, index: int) -> tuple[int, ...]:
        if k == 1:
            return (int(index),)
        lim = int(self.limits[k])
        word = []
        for _ in range(k):
            index, s = divmod(int(index), lim)
            word.append(s + 1)
        return tuple(reversed(word))

    def sup(self, k: int) -> dict:
        """Exact sup over all words of length k of |f - mu| at the current prefix (see module doc)."""
        n = self.n
        positions = n - k + 1
        lim = None if k == 1 else int(self.limits[k])
        best = (-1.0, None, 0)  # (value, word, count)

        def consider(word):
            nonlocal best
            c = self.count(word)
            value = abs(c / positions - _mu(word))
            if value > best[0] or (value == best[0] and word < best[1]):
                best = (value, word, c)

        first = (1,) * k
        heap = [(-_mu(first), first)]
        visited = {first}
        while heap and -heap[0][0] >= best[0]:
            _, word = heapq.heappop(heap)
            consider(word)
            for i in range(k):
                nxt = word[:i] + (word[i] + 1,) + word[i + 1:]
                if (lim is None or nxt[i] <= lim) and nxt not in visited:
                    visited.add(nxt)
                    heapq.heappush(heap, (-_mu(nxt), nxt))
        # Every word with f >= best (threshold lowered by 1 count against float rounding).
        threshold = max(1, int(best[0] * positions) - 1)
        table = self._table(k)
        for index in np.flatnonzero(table >= threshold).tolist():
            consider(self._decode(k, index))
        if k == 1:
            bound, exact = None, True
        else:
            big = self.digit_counts[lim + 1:]
            bound = max(_mu((lim + 1,)), (int(big.max()) if big.size else 0) / positions)
            exact = best[0] > bound
        value, word, c = best
        return dict(prefix_length=n, k=k, discrepancy=value, word=word_label(word, None), count=c,
                    positions=positions, frequency=c / positions, gauss_measure=_mu(word),
                    exact=exact, outside_bound=bound, box_limit=lim)


DISCREPANCY_SCHEMA = pa.schema([
    ("prefix_length", pa.int64()),
    ("k", pa.int32()),
    ("discrepancy", pa.float64()),
    ("word", pa.string()),
    ("count", pa.int64()),
    ("positions", pa.int64()),
    ("frequency", pa.float64()),
    ("gauss_measure", pa.float64()),
    ("exact", pa.bool_()),
    ("outside_bound", pa.float64()),
    ("box_limit", pa.int64()),
])


def summarize_discrepancy(table: pa.Table) -> pa.Table:
    """One row per prefix length: the maximum over word lengths (ties: shorter word first).

    ``exact`` is true when every word length of that prefix is exact.
    """
    rows = table.to_pylist()
    out: dict[int, dict] = {}
    for r in rows:
        n = r["prefix_length"]
        cur = out.get(n)
        if cur is None:
            out[n] = dict(r, all_exact=r["exact"])
            continue
        all_exact = cur["all_exact"] and r["exact"]
        if r["discrepancy"] > cur["discrepancy"]:
            out[n] = dict(r, all_exact=all_exact)
        else:
            cur["all_exact"] = all_exact
    result = []
    for n in sorted(out):
        r = out[n]
        result.append(dict(prefix_length=n, discrepancy=r["discrepancy"], word=r["word"], k=r["k"],
                           frequency=r["frequency"], gauss_measure=r["gauss_measure"], exact=r["all_exact"]))
    schema = pa.schema([("prefix_length", pa.int64()), ("discrepancy", pa.float64()), ("word", pa.string()),
                        ("k", pa.int32()), ("frequency", pa.float64()), ("gauss_measure", pa.float64()),
                        ("exact", pa.bool_())])
    return pa.Table.from_pylist(result, schema=schema)


# ----------------------------------------------------------------------------- one pass


@dataclass
class StreamSummary:
    """Where a prefix of N terms ends, and what was computed on the way.

    ``end_q``/``end_p``: the member whose expansion holds the last term; ``end_digits`` of its
    ``end_length`` partial quotients are in the prefix. ``discrepancy``: per (prefix length, word
    length) table (:data:`DISCREPANCY_SCHEMA`) or None.
    """

    family: str
    terms: int
    end_q: int
    end_p: int
    end_digits: int
    end_length: int
    chunk_size: int
    path: str | None = None
    discrepancy: pa.Table | None = None

    @property
    def cursor(self) -> StreamCursor:
        return StreamCursor(self.end_q, self.end_p, self.end_digits)


def _validate_out(path) -> Path:
    out = Path(path)
    if out.is_dir():
        raise UsageError(f"out path {str(out)!r} is a directory; allowed: a file path in an existing directory")
    parent = out.parent if str(out.parent) else Path(".")
    if not parent.is_dir():
        raise UsageError(f"out path {str(out)!r}: directory {str(parent)!r} does not exist")
    return out


def analyse_stream(family: str | Family = "all", terms: int = 10 ** 6, *, out=None,
                   chunk_size: int = DEFAULT_CHUNK_SIZE, max_word_length: int | None = 2,
                   checkpoints: list[int] | None = None,
                   table_entries: int = DEFAULT_TABLE_ENTRIES) -> StreamSummary:
    """One pass over the first ``terms`` partial quotients: optional Parquet file, prefix discrepancy.

    ``max_word_length`` K in 1..6 (None: no discrepancy); ``checkpoints`` are the prefix lengths
    (default :func:`default_checkpoints`), each in 1..terms. The Parquet file is written to a
    temporary name beside ``out`` and renamed only when complete.
    """
    fam = parse_family(family)
    terms = _check_int("terms", terms, 1)
    chunk_size = _check_int("chunk_size", chunk_size, 1, MAX_CHUNK_SIZE)
    out_path = _validate_out(out) if out is not None else None
    counter = None
    if max_word_length is not None:
        max_k = _check_int("words", max_word_length, 1, MAX_WORD_LENGTH)
        table_entries = _check_int("table_entries", table_entries, 1, 1 << 26)
        points = default_checkpoints(terms) if checkpoints is None else sorted(set(checkpoints))
        for c in points:
            _check_int("checkpoint", c, 1, terms)
        counter = _WordCounter(max_k, table_entries)
        rows: list[dict] = []
    reader = StreamReader(fam)
    writer = tmp = None
    try:
        if out_path is not None:
            import pyarrow.parquet as pq

            tmp = out_path.with_name(f".{out_path.name}.{os.getpid()}.tmp")
            schema = pa.schema([pa.field(STREAM_COLUMN, pa.int64(), nullable=False)])
            writer = pq.ParquetWriter(str(tmp), schema)
        left = terms
        point_index = 0
        while left > 0:
            chunk = reader.read(min(chunk_size, left))
            left -= chunk.shape[0]
            if writer is not None:
                writer.write_table(pa.table({STREAM_COLUMN: chunk}, schema=writer.schema),
                                   row_group_size=chunk.shape[0])
            if counter is not None:
                done = 0
                max_digit = reader.cursor.q  # a partial quotient of p/q is at most q
                while done < chunk.shape[0]:
                    stop = chunk.shape[0]
                    if point_index < len(points):
                        stop = min(stop, points[point_index] - counter.n + done)
                    counter.add(chunk[done:stop], max_digit)
                    done = stop
                    while point_index < len(points) and counter.n == points[point_index]:
                        for k in range(1, counter.max_k + 1):
                            if counter.n - k + 1 >= 1:
                                rows.append(counter.sup(k))
                        point_index += 1
        end = reader.cursor
        summary = StreamSummary(fam.canonical, terms, end.q, end.p, end.digits,
                                int(_k.expansion_length_of(end.q, end.p)), chunk_size,
                                str(out_path) if out_path is not None else None)
        if writer is not None:
            writer.add_key_value_metadata(_stream_metadata(summary))
            writer.close()
            writer = None
            os.replace(tmp, out_path)
            tmp = None
    finally:
        if writer is not None:
            writer.close()
        if tmp is not None and Path(tmp).exists():
            Path(tmp).unlink()
    if counter is not None:
        summary.discrepancy = pa.Table.from_pylist(rows, schema=DISCREPANCY_SCHEMA)
    return summary


def _stream_metadata(s: StreamSummary) -> dict[str, str]:
    return {META_PREFIX + k: str(v) for k, v in dict(
        schema_version=SCHEMA_VERSION, family=s.family, terms=s.terms, end_q=s.end_q, end_p=s.end_p,
        end_digits=s.end_digits, end_length=s.end_length, chunk_size=s.chunk_size).items()}


def write_stream(path, family: str | Family = "all", terms: int = 10 ** 6,
                 chunk_size: int = DEFAULT_CHUNK_SIZE) -> StreamSummary:
    """Write the first ``terms`` partial quotients to Parquet at ``path`` (one int64 column
    ``partial_quotient``, one row group per chunk; key-value metadata ``cfsweep.*``: schema_version,
    family, terms, end_q, end_p, end_digits, end_length, chunk_size). Returns the summary."""
    return analyse_stream(family, terms, out=path, chunk_size=chunk_size, max_word_length=None)


def read_stream_metadata(path) -> dict[str, str]:
    """The ``cfsweep.*`` key-value metadata of a stream file, keys without the prefix."""
    import pyarrow.parquet as pq

    meta = pq.ParquetFile(str(path)).metadata.metadata or {}
    return {k.decode()[len(META_PREFIX):]: v.decode() for k, v in meta.items()
            if k.decode().startswith(META_PREFIX)}


def prefix_discrepancy(family: str | Family = "all", terms: int = 10 ** 6, max_word_length: int = 2,
                       chunk_size: int = DEFAULT_CHUNK_SIZE, checkpoints: list[int] | None = None,
                       table_entries: int = DEFAULT_TABLE_ENTRIES) -> pa.Table:
    """Per (prefix length, word length k <= K) discrepancy table; see the module docstring."""
    return analyse_stream(family, terms, chunk_size=chunk_size, max_word_length=max_word_length,
                          checkpoints=checkpoints, table_entries=table_entries).discrepancy


# ----------------------------------------------------------------------------- decimals


def _product(terms: list[int], lo: int, hi: int):
    """M(t_lo) ... M(t_{hi-1}) with M(a) = [[0, 1], [1, a]], as (m11, m12, m21, m22); binary splitting."""
    if hi - lo <= 24:
        a, b, c, d = 1, 0, 0, 1
        for t in terms[lo:hi]:
            a, b, c, d = b, a + t * b, d, c + t * d
        return _mpz(a), _mpz(b), _mpz(c), _mpz(d)
    mid = (lo + hi) // 2
    a1, b1, c1, d1 = _product(terms, lo, mid)
    a2, b2, c2, d2 = _product(terms, mid, hi)
    return a1 * a2 + b1 * c2, a1 * b2 + b1 * d2, c1 * a2 + d1 * c2, c1 * b2 + d1 * d2


def _digits_text(value: int, width: int) -> str:
    if _gmpy2 is not None:
        text = _mpz(value).digits(10)
    else:
        old = sys.get_int_max_str_digits() if hasattr(sys, "get_int_max_str_digits") else None
        try:
            if old is not None:
                sys.set_int_max_str_digits(0)
            text = str(int(value))
        finally:
            if old is not None:
                sys.set_int_max_str_digits(old)
    return text.zfill(width)


def certain_digits(lo_num: int, lo_den: int, hi_num: int, hi_den: int, max_digits: int) -> str:
    """Digits after the decimal point shared by every real strictly between two fractions in [0, 1].

    Returns the longest common prefix (at most ``max_digits`` long) of the first ``max_digits`` digits of
    both endpoints: floor(10**m y) is monotone in y, so when it agrees at both ends it holds for every y
    between them; the first disagreeing digit (e.g. 0.12999... against 0.13000...) is not returned.
    """
    max_digits = _check_int("max_digits", max_digits, 1)
    scale = _mpz(10) ** max_digits
    a = _mpz(lo_num) * scale // _mpz(lo_den)
    b = _mpz(hi_num) * scale // _mpz(hi_den)
    if a // scale != b // scale or not (0 <= a // scale <= 1):
        return ""
    ta = _digits_text(a % scale, max_digits)
    tb = _digits_text(b % scale, max_digits)
    if ta == tb:
        return ta
    m = 0
    while ta[m] == tb[m]:
        m += 1
    return ta[:m]


@dataclass
class DecimalExpansion:
    """``digits``: the first decimal digits of x after "0." (all certain); ``terms``: partial
    quotients used; the two bracketing convergents p_{n-1}/q_{n-1} and p_n/q_n."""

    digits: str
    terms: int
    convergents: tuple[int, int, int, int]


def decimal_expansion(family: str | Family = "all", digits: int = 1000) -> DecimalExpansion:
    """The first ``digits`` decimal digits (1 <= digits <= 10**7) of x = [0; a1, a2, ...], proven.

    Partial quotients are taken until two consecutive convergents agree in all requested digits.
    """
    digits = _check_int("decimals", digits, 1, MAX_DECIMALS)
    reader = StreamReader(family)
    need_bits = int(digits * math.log2(10)) + 2
    terms: list[int] = []
    total = (_mpz(1), _mpz(0), _mpz(0), _mpz(1))
    batch = max(64, digits // 2)
    while True:
        new = reader.read(batch).tolist()
        lo = len(terms)
        terms.extend(new)
        a2, b2, c2, d2 = _product(terms, lo, len(terms))
        a1, b1, c1, d1 = total
        total = (a1 * a2 + b1 * c2, a1 * b2 + b1 * d2, c1 * a2 + d1 * c2, c1 * b2 + d1 * d2)
        p_prev, p_n, q_prev, q_n = total
        # |p_n/q_n - p_{n-1}/q_{n-1}| = 1/(q_n q_{n-1}): no agreement is possible before it is < 10**-M.
        if int(q_prev).bit_length() + int(q_n).bit_length() >= need_bits:
            text = certain_digits(p_prev, q_prev, p_n, q_n, digits)
            if len(text) == digits:
                return DecimalExpansion(text, len(terms), (int(p_prev), int(q_prev), int(p_n), int(q_n)))
        batch = max(64, len(terms) // 8)


def decimals(family: str | Family = "all", digits: int = 1000) -> str:
    """The first ``digits`` decimal digits of x after "0." as a string (see :func:`decimal_expansion`)."""
    return decimal_expansion(family, digits).digits
