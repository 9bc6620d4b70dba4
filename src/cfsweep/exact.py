"""Exact digit and word counts over all fractions with denominator <= Q, without enumerating them.

Public API: :func:`exact_counts` (the numbers, as an :class:`ExactResult`) and :func:`exact_table`
(the same as a frequency table in ``cfsweep.schema.FREQUENCY_SCHEMA``). The counting is the lattice
method of ``kernels/lattice.py``; the cost for one word is O((Q / w22) log^2 Q) instead of the
O(Q^2 log Q) of enumeration.

Families: ``all`` (every pair 1 <= p < q <= Q, non-reduced included) and ``reduced`` (gcd(p, q) = 1).

Alphabet: digits 1..cap-1 and the pooled symbol ``cap+`` (all digits >= cap). The pooled symbol is
supported as a single digit (the exact bucket count). Inside a word of length >= 2 it is refused with a
UsageError naming the word: the lattice formula needs one fixed matrix W per word, and a pooled
symbol would need a separate derivation (not done here).

Integer range (why Q <= MAX_EXACT_DEN): every count below is a non-negative int64.

* V_w(x) <= #{(a, b, G, D): a < b, G < D, b*D <= x} <= sum_{b*D <= x} b*D <= x^2 (1 + ln x), since
  q >= w22 * b * D; the bucket volume obeys the same bound (m*D <= x, b < m).
* Möbius partial sums: sum_h |mu(h)| V(v / h) <= zeta(2) v^2 (1 + ln v).
* N_w(x) <= 2 x^2 + 2 x^2 (1 + ln x); the reduced transform's partial sums are at most
  sum_g N(Q / g) <= zeta(2) (2 Q^2 + 2 Q^2 (1 + ln Q)) = 3.29 Q^2 (2 + ln Q).
* Floor-sum products a*n + b stay below Q^2.

So the largest intermediate is below 3.3 Q^2 (2 + ln Q), which is < 2^63 - 1 for Q <= 3.5e8; the
bound 3e8 keeps a margin. Totals over several kernels (total length) are added in Python integers.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from decimal import Decimal, InvalidOperation
from typing import Iterable, Sequence

import numba
import numpy as np
import pyarrow as pa

from cfsweep import gauss
from cfsweep.errors import UsageError
from cfsweep.families import parse_family
from cfsweep.fits import fit_inverse_log
from cfsweep.kernels import lattice
from cfsweep.schema import FREQUENCY_SCHEMA, SCHEMA_VERSION, append_frequency_row, word_label

#: Largest max_den with a proven int64-safe computation (see the module docstring).
MAX_EXACT_DEN = 300_000_000
#: Words of length k >= 5 need the number of fractions of each length <= k - 2 for their places;
#: that comes from walking the digit sequences, feasible up to this max_den.
MAX_ENUMERATION_DEN = 1_000_000
#: Largest cap (pooled symbol) accepted.
MAX_CAP = 1000
#: Largest word length accepted.
MAX_WORD_LENGTH = 12
#: Largest number of word-table rows the brute-force check may allocate.
MAX_VERIFY_ROWS = 5_000_000

FAMILY_NAMES = ("all", "reduced")


@dataclass
class FamilyCounts:
    """Exact counts for one family at one max_den.

    ``digit_counts[d]`` for d = 1..cap-1, ``bucket`` = occurrences of digits >= cap,
    ``word_counts[w]`` for the chosen words (tuples of digits), ``positions[k]`` = number of places of
    length k, sum over fractions of max(0, n - k + 1).
    """

    family: str
    fractions: int
    total_length: int
    digit_counts: dict[int, int]
    bucket: int
    word_counts: dict[tuple[int, ...], int]
    positions: dict[int, int]

    @property
    def mean_length(self) -> float:
        """Mean number of partial quotients per fraction."""
        return self.total_length / self.fractions


@dataclass
class Extrapolation:
    """f(Q) = limit + a/ln Q + b/ln^2 Q fitted over the checkpoints (std_error None with 3 points)."""

    limit: float
    std_error: float | None
    gauss_measure: float


@dataclass
class ExactResult:
    """Result of :func:`exact_counts`. ``families`` maps "all"/"reduced" to :class:`FamilyCounts`."""

    max_den: int
    cap: int
    words: tuple[tuple[int, ...], ...]
    families: dict[str, FamilyCounts]
    checkpoints: list["ExactResult"] = field(default_factory=list)
    #: (family, word label) -> Extrapolation; empty without at least 3 checkpoints.
    extrapolations: dict[tuple[str, str], Extrapolation] = field(default_factory=dict)
    verified: bool = False

    def symbol_rows(self) -> list[tuple[str, tuple[int, ...], int]]:
        """(label, symbols, k) of every tabulated word: digits, the bucket, then the chosen words."""
        rows = [(str(d), (d,), 1) for d in range(1, self.cap)]
        rows.append((f"{self.cap}+", (self.cap,), 1))
        for w in self.words:
            if len(w) >= 2:
                rows.append((word_label(w, self.cap), w, len(w)))
        return rows

    def count(self, family: str, symbols: tuple[int, ...]) -> int:
        """Exact count of a tabulated word (a single symbol >= cap means the bucket)."""
        fc = self.families[family]
        if len(symbols) == 1:
            d = symbols[0]
            return fc.bucket if d >= self.cap else fc.digit_counts[d]
        return fc.word_counts[symbols]


# ----------------------------------------------------------------------------------------------
# input checks
# ----------------------------------------------------------------------------------------------

def parse_integer(text: str | int, name: str, low: int, high: int) -> int:
    """Parse an integer written as ``10000000``, ``1e7`` or ``2.5e6`` exactly; UsageError if not in [low, high]."""
    if isinstance(text, bool):
        raise UsageError(f"{name} {text!r} is not an integer; allowed {low}..{high}")
    if isinstance(text, (int, np.integer)):
        value = int(text)
    else:
        try:
            dec = Decimal(str(text).strip())
        except InvalidOperation:
            raise UsageError(f"{name} {text!r} is not an integer; allowed {low}..{high}") from None
        if not dec.is_finite() or dec != dec.to_integral_value():
            raise UsageError(f"{name} {text!r} is not an integer; allowed {low}..{high}")
        value = int(dec)
    if not low <= value <= high:
        raise UsageError(f"{name} {value} out of range: allowed {low}..{high}")
    return value


def _check_max_den(max_den, name="max_den") -> int:
    return parse_integer(max_den, name, 2, MAX_EXACT_DEN)


def _normalise_words(words: Iterable[Sequence[int]] | None, cap: int) -> list[tuple[int, ...]]:
    out: list[tuple[int, ...]] = []
    for w in words or ():
        try:
            t = tuple(int(s) for s in w)
        except (TypeError, ValueError):
            raise UsageError(f"word {w!r} is not a sequence of integer digits >= 1") from None
        if not t:
            raise UsageError("empty word: words have 1.." f"{MAX_WORD_LENGTH} digits")
        if len(t) > MAX_WORD_LENGTH:
            raise UsageError(f"word {word_label(t, None)} has {len(t)} digits: allowed 1..{MAX_WORD_LENGTH}")
        if any(s < 1 for s in t):
            raise UsageError(f"word {word_label(t, None)} has a digit < 1: digits are >= 1")
        if len(t) >= 2 and any(s >= cap for s in t):
            raise UsageError(
                f"word {word_label(t, cap)}: the pooled symbol {cap}+ (digits >= cap {cap}) is supported only "
                f"as a single digit; use digits 1..{cap - 1} inside words of length >= 2")
        if len(t) == 1 and t[0] > cap:
            t = (cap,)
        if t not in out:
            out.append(t)
    return out


def _all_words(k_max: int, cap: int) -> list[tuple[int, ...]]:
    words: list[tuple[int, ...]] = []
    for k in range(1, k_max + 1):
        for code in range(cap ** k):
            w = []
            c = code
            for _ in range(k):
                w.append(c % cap + 1)
                c //= cap
            words.append(tuple(reversed(w)))
    return words


def word_matrix(word: Sequence[int]) -> tuple[int, int, int, int, int]:
    """(w11, w12, w21, w22, e) of W = M(b1)...M(bk), M(a) = [[0, 1], [1, a]], e = [b_k >= 2]."""
    w11, w12, w21, w22 = 1, 0, 0, 1
    for b in word:
        w11, w12, w21, w22 = w12, w11 + b * w12, w22, w21 + b * w22
    return w11, w12, w21, w22, 1 if word[-1] >= 2 else 0


# ----------------------------------------------------------------------------------------------
# one max_den
# ----------------------------------------------------------------------------------------------

class _Grid:
    """Grid of distinct values floor(Q/m) with Mertens values and the thread chunks."""

    def __init__(self, max_den: int, n_chunks: int):
        self.q = max_den
        self.vals = lattice.divisor_grid(max_den)
        self.mert = lattice.mertens_on_grid(max_den, self.vals)
        self.n_chunks = n_chunks
        self.order, self.starts = lattice.deal_chunks(self.vals, n_chunks)

    def word(self, word: tuple[int, ...]) -> tuple[int, int]:
        """(N_w(Q), R_w(Q))."""
        w11, w12, w21, w22, e = word_matrix(word)
        if w22 > self.q:  # every occurrence has q >= w22
            return 0, 0
        if self.n_chunks == 1:
            vol = lattice.word_volumes_serial(self.vals, w11, w12, w21, w22, e)
        else:
            vol = lattice.word_volumes_parallel(self.vals, w11, w12, w21, w22, e, self.order, self.starts)
        counts, red = lattice.word_counts_from_volumes(self.q, self.vals, self.mert, vol, w11, w12, w21, w22, e)
        return int(counts[-1]), int(red)

    def bucket(self, d0: int) -> tuple[int, int]:
        """(sum_{d >= d0} N_d(Q), the same for the reduced family), d0 >= 2."""
        if self.n_chunks == 1:
            vol = lattice.bucket_volumes_serial(self.vals, d0)
        else:
            vol = lattice.bucket_volumes_parallel(self.vals, d0, self.order, self.starts)
        counts, red = lattice.bucket_counts_from_volumes(self.q, self.vals, self.mert, vol, d0)
        return int(counts[-1]), int(red)


def _length_counts(max_den: int, grid: _Grid, max_len: int) -> tuple[list[int], list[int]]:
    """Fractions with expansion length exactly n = 0..max_len (all, reduced); index 0 is 0."""
    all_c = [0] * (max_len + 1)
    red_c = [0] * (max_len + 1)
    if max_len <= 0:
        return all_c, red_c
    if max_len <= 2:
        a1, a2, r1, r2 = lattice.short_length_counts(max_den, grid.vals, grid.mert)
        all_c[1], red_c[1] = int(a1), int(r1)
        if max_len == 2:
            all_c[2], red_c[2] = int(a2), int(r2)
        return all_c, red_c
    a, r = lattice.length_counts_by_enumeration(max_den, max_len)
    return [int(x) for x in a], [int(x) for x in r]


def positions_from_lengths(k: int, total_length: int, fractions: int, length_counts: Sequence[int]) -> int:
    """sum_r max(0, n_r - k + 1) = total - (k-1) fractions + sum_{n <= k-2} (k-1-n) #{r: n_r = n}.

    Why: max(0, n-k+1) = (n-k+1) + max(0, k-1-n), and lengths are >= 1.
    """
    if k == 1:
        return total_length
    corr = sum((k - 1 - n) * length_counts[n] for n in range(1, k - 1))
    return total_length - (k - 1) * fractions + corr


def _compute_at(max_den: int, cap: int, words: list[tuple[int, ...]], n_chunks: int) -> ExactResult:
    grid = _Grid(max_den, n_chunks)
    cache: dict[tuple[int, ...], tuple[int, int]] = {}

    def get(word):
        if word not in cache:
            cache[word] = grid.word(word)
        return cache[word]

    digits = {d: get((d,)) for d in range(1, cap)}
    bucket = grid.bucket(cap)
    ge2 = grid.bucket(2)
    totals = (digits[1][0] + ge2[0], digits[1][1] + ge2[1])
    # Two different kernels must agree: N_1 + bucket(>=2) against the per-digit sum plus bucket(>=cap).
    for f in range(2):
        other = sum(digits[d][f] for d in range(1, cap)) + bucket[f]
        if other != totals[f]:
            raise RuntimeError(f"internal inconsistency at Q={max_den}: total length {totals[f]} != {other}")
    word_counts = {w: get(w) for w in words if len(w) >= 2}
    phi_sum = lattice.totient_summatory_on_grid(max_den, grid.vals)
    fractions = (max_den * (max_den - 1) // 2, int(phi_sum[-1]) - 1)
    ks = sorted({1} | {len(w) for w in words})
    all_len, red_len = _length_counts(max_den, grid, max(ks) - 2)
    fams = {}
    for f, name in enumerate(FAMILY_NAMES):
        lens = all_len if f == 0 else red_len
        fams[name] = FamilyCounts(
            family=parse_family(name).canonical,
            fractions=fractions[f],
            total_length=totals[f],
            digit_counts={d: digits[d][f] for d in range(1, cap)},
            bucket=bucket[f],
            word_counts={w: c[f] for w, c in word_counts.items()},
            positions={k: positions_from_lengths(k, totals[f], fractions[f], lens) for k in ks},
        )
    return ExactResult(max_den=max_den, cap=cap, words=tuple(words), families=fams)


# ----------------------------------------------------------------------------------------------
# brute-force check
# ----------------------------------------------------------------------------------------------

def _verify(result: ExactResult, n_chunks: int) -> None:
    """Enumerate every p/q with the sweep kernel and compare every number exactly; raise on mismatch."""
    from cfsweep.kernels.sweep import n_word_rows, sweep_block, word_offset

    q = result.max_den
    empty = np.zeros(0, np.uint8)
    longer = [w for w in result.words if len(w) >= 2]
    max_k = max((len(w) for w in longer), default=0)
    cap_w = max((max(w) for w in longer), default=1) + 1
    if longer and n_word_rows(cap_w, max_k) > MAX_VERIFY_ROWS:
        raise UsageError(f"verify: words up to length {max_k} with digits up to {cap_w - 1} need "
                         f"{n_word_rows(cap_w, max_k)} table rows; allowed <= {MAX_VERIFY_ROWS}")
    problems = []
    for name in result.families:
        coprime = name == "reduced"
        fc = result.families[name]
        ws, ps, lh, _ = sweep_block(2, q, empty, empty, coprime, result.cap, 1, n_chunks)
        checks = [("fractions", fc.fractions, int(lh.sum())), ("total length", fc.total_length, int(ps[1, 0])),
                  (f"{result.cap}+", fc.bucket, int(ws[result.cap - 1, 0]))]
        checks += [(str(d), fc.digit_counts[d], int(ws[d - 1, 0])) for d in range(1, result.cap)]
        if longer:
            ws2, ps2, _, _ = sweep_block(2, q, empty, empty, coprime, cap_w, max_k, n_chunks)
            for w in longer:
                code = 0
                for b in w:
                    code = code * cap_w + (b - 1)
                checks.append((word_label(w, None), fc.word_counts[w], int(ws2[word_offset(cap_w, len(w)) + code, 0])))
            for k in fc.positions:
                if k >= 2:
                    checks.append((f"positions k={k}", fc.positions[k], int(ps2[k, 0])))
        for what, exact, brute in checks:
            if exact != brute:
                problems.append(f"{name} {what}: exact {exact} != enumeration {brute}")
    if problems:
        raise RuntimeError(f"verification failed at max_den={q}: " + "; ".join(problems))
    result.verified = True


# ----------------------------------------------------------------------------------------------
# public API
# ----------------------------------------------------------------------------------------------

def _frequency(result: ExactResult, family: str, symbols: tuple[int, ...]) -> float:
    fc = result.families[family]
    return result.count(family, symbols) / fc.positions[len(symbols)]


def _extrapolate(main: ExactResult) -> None:
    points = main.checkpoints
    if len(points) < 3:
        return
    qs = [p.max_den for p in points]
    for name in main.families:
        for label, symbols, _k in main.symbol_rows():
            values = [_frequency(p, name, symbols) for p in points]
            fit = fit_inverse_log(qs, values)
            main.extrapolations[(name, label)] = Extrapolation(
                limit=fit.coefficients[0],
                std_error=None if fit.std_errors is None else fit.std_errors[0],
                gauss_measure=gauss.word_measure(symbols, main.cap),
            )


def exact_counts(max_den, family: str = "both", words: Iterable[Sequence[int]] | None = None,
                 cap: int = 32, all_words: int | None = None, checkpoints: Iterable | None = None,
                 threads: int | None = None, verify: bool = False) -> ExactResult:
    """Exact digit and word counts over all p/q with 1 <= p < q <= max_den.

    ``max_den``: 2..MAX_EXACT_DEN (ints or text like "1e7"). ``family``: "all", "reduced" or "both".
    ``words``: extra words (sequences of digits >= 1; a single digit >= cap means the bucket).
    ``cap``: 2..MAX_CAP; digits 1..cap-1 are counted one by one, digits >= cap pooled.
    ``all_words``: K >= 1, every word of length <= K over the pooled alphabet (K >= 2 is refused: pooled
    symbols inside words are not supported). ``checkpoints``: further max_den values; the result gets
    one ExactResult per checkpoint and, with >= 3 of them, the extrapolated limits.
    ``threads``: Numba threads (default: the current setting). ``verify``: compare with enumeration.
    """
    q = _check_max_den(max_den)
    cap = parse_integer(cap, "cap", 2, MAX_CAP)
    if family not in ("all", "reduced", "both"):
        raise UsageError(f"family {family!r}: allowed all, reduced, both")
    word_list = _normalise_words(words, cap)
    if all_words is not None:
        k_all = parse_integer(all_words, "all_words", 1, MAX_WORD_LENGTH)
        if k_all >= 2:
            raise UsageError(
                f"all_words {k_all}: word 1,{cap}+ (and every word with the pooled symbol {cap}+ inside a word "
                f"of length >= 2) has no exact formula here; allowed all_words 1, or list words with digits "
                f"1..{cap - 1} via words")
        word_list += [w for w in _normalise_words(_all_words(k_all, cap), cap) if w not in word_list]
    longest = max((len(w) for w in word_list), default=1)
    cps = sorted({_check_max_den(c, "checkpoint") for c in (checkpoints or ())})
    if longest >= 5:
        for value in [q] + cps:
            if value > MAX_ENUMERATION_DEN:
                raise UsageError(
                    f"max_den {value} with words of length {longest}: places of length >= 5 need the length "
                    f"distribution, exact here only for max_den <= {MAX_ENUMERATION_DEN}")
    n_threads = numba.get_num_threads() if threads is None else parse_integer(
        threads, "threads", 1, numba.config.NUMBA_NUM_THREADS)
    previous = numba.get_num_threads()
    try:
        numba.set_num_threads(n_threads)
        result = _compute_at(q, cap, word_list, n_threads)
        result.checkpoints = [result if c == q else _compute_at(c, cap, word_list, n_threads) for c in cps]
        if verify:
            _verify(result, n_threads)
    finally:
        numba.set_num_threads(previous)
    if family != "both":
        result.families = {family: result.families[family]}
        for cp in result.checkpoints:
            cp.families = {family: cp.families[family]}
    _extrapolate(result)
    return result


def exact_table(result: ExactResult) -> pa.Table:
    """The result as a frequency table (FREQUENCY_SCHEMA); words with count 0 are left out.

    std_error, ci_low, ci_high and z are null: the counts are exact. Schema metadata:
    cfsweep.method = "exact", cfsweep.schema_version, cfsweep.max_den, cfsweep.cap.
    """
    cols: dict[str, list] = {f.name: [] for f in FREQUENCY_SCHEMA}
    for name, fc in result.families.items():
        for label, symbols, k in result.symbol_rows():
            count = result.count(name, symbols)
            if count == 0:
                continue
            append_frequency_row(cols, fc.family, label, k, count, fc.positions[k],
                                 gauss.word_measure(symbols, result.cap))
    table = pa.table(cols, schema=FREQUENCY_SCHEMA)
    meta = {"cfsweep.method": "exact", "cfsweep.schema_version": str(SCHEMA_VERSION),
            "cfsweep.max_den": str(result.max_den), "cfsweep.cap": str(result.cap)}
    return table.replace_schema_metadata(meta)


def write_exact_parquet(result: ExactResult, path) -> None:
    """Write :func:`exact_table` to ``path`` (Parquet, key-value metadata kept), atomically."""
    import os

    import pyarrow.parquet as pq

    tmp = f"{path}.tmp-{os.getpid()}"
    pq.write_table(exact_table(result), tmp)
    os.replace(tmp, path)


def gauss_kuzmin_of(symbols: tuple[int, ...], cap: int) -> float:
    """Gauss–Kuzmin probability of a single symbol (the tail for the pooled symbol)."""
    d = symbols[0]
    return gauss.gauss_kuzmin_tail(cap) if d >= cap else gauss.gauss_kuzmin(d)


__all__ = ["ExactResult", "FamilyCounts", "Extrapolation", "exact_counts", "exact_table",
           "write_exact_parquet", "MAX_EXACT_DEN", "parse_integer", "positions_from_lengths", "word_matrix"]
