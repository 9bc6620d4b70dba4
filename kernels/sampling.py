"""Sampled runs: a counter-based generator, 64-bit number theory and the pair sampler.

Everything here is unsigned 64-bit integer arithmetic. Numba promotes a mix of int64 and uint64 to
float64, so every constant is an explicit ``np.uint64`` and loop indices are converted before they meet
a uint64.

Generator. Philox-4x64-10 (Salmon, Moraes, Dror, Shaw, "Parallel random numbers: as easy as 1, 2, 3",
SC 2011; the Random123 library): a keyed bijection of a 256-bit counter (four uint64 words) under a
128-bit key (two words), giving four uint64 words per counter. The word order and constants are those of
Random123 and of ``numpy.random.Philox``, whose raw output for counter c is ``philox4x64_10(c + 1, key)``
(numpy increments the counter before each block); the tests check both.

Streams. A stream is a uint64 array of ``STREAM_WORDS`` words fixing key and counter words c1..c3; its
words are the outputs of counters (j, c1, c2, c3) for j = 0, 1, 2, ... in order. The pair sampler gives
sample i of block b the stream (j, i, b, PAIR_STREAM_TAG), so sample i depends only on (key, b, i): the
arrays are the same whatever the number of threads, calls or workers, and rejections inside one sample
never shift another sample's draws.

Number theory. ``mulhilo_u64`` emulates the 64x64 -> 128-bit product in 32-bit halves;
``mulmod_u64`` reduces it by a two-digit (base 2**32) long division (Knuth, TAOCP vol. 2, 4.3.1,
Algorithm D, in the 128/64 form of Warren, "Hacker's Delight", divlu); Miller-Rabin runs in Montgomery
form (Montgomery 1985) with the first twelve prime bases, which is deterministic for every n < 2**64.
"""
import numpy as np
from numba import prange

from ._jit import parallel, serial

ZERO = np.uint64(0)
ONE = np.uint64(1)
TWO = np.uint64(2)
THREE = np.uint64(3)
FOUR = np.uint64(4)
U32 = np.uint64(32)
U63 = np.uint64(63)
U64_MASK32 = np.uint64(0xFFFFFFFF)
U64_BASE32 = np.uint64(0x100000000)
U64_MAX = np.uint64(0xFFFFFFFFFFFFFFFF)
TWO_POW_63 = np.uint64(1 << 63)

# Philox-4x64 multipliers and Weyl key increments (Random123, philox.h).
PHILOX_M0 = np.uint64(0xD2E7470EE14C6C93)
PHILOX_M1 = np.uint64(0xCA5A826395121157)
PHILOX_W0 = np.uint64(0x9E3779B97F4A7C15)
PHILOX_W1 = np.uint64(0xBB67AE8584CAA73B)

# Stream layout: key words, fixed counter words c1..c3, next c0, buffer position, 4 buffered words.
STREAM_WORDS = 11
_S_K0, _S_K1, _S_C1, _S_C2, _S_C3, _S_NEXT, _S_POS, _S_BUF = 0, 1, 2, 3, 4, 5, 6, 7

# Counter word c3 of the pair sampler's streams ("pair" in ASCII), so that other uses of the same key
# (with another tag) never reuse its counters.
PAIR_STREAM_TAG = np.uint64(0x70616972)

CLASS_ANY = 0
CLASS_SQUAREFREE = 1
CLASS_PRIME = 2

# The first twelve primes. Deterministic Miller-Rabin below 2**64: the smallest strong pseudoprime to
# all of them is psi_12 = 318665857834031151167461 > 2**64 (Sorenson and Webster, "Strong pseudoprimes
# to twelve prime bases", Math. Comp. 86 (2017), arXiv 2015; also OEIS A014233; value quoted from
# memory). Fewer bases are not enough: 3825123056546413051 < 2**64 is a strong pseudoprime to the
# bases 2..31 (psi_9 = psi_10 = psi_11, Jaeschke 1993 / Jiang and Deng 2014); the tests check it.
MILLER_RABIN_BASES = np.array([2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37], np.uint64)
# Trial divisors tried before Miller-Rabin: they reject most composites for the price of a division.
_SMALL_PRIMES = np.array([2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47, 53, 59, 61],
                         np.uint64)

# Largest r with r**3 < 2**64 (2642245**3 = 18446724184312856125 < 2**64 < 2642246**3).
MAX_CUBE_ROOT_U64 = 2642245


# ----------------------------------------------------------------------------- 128-bit helpers
@serial
def mulhilo_u64(a, b):
    """(hi, lo) with a * b = hi * 2**64 + lo, for uint64 a, b (exact 128-bit product)."""
    a = np.uint64(a)
    b = np.uint64(b)
    a_lo = a & U64_MASK32
    a_hi = a >> U32
    b_lo = b & U64_MASK32
    b_hi = b >> U32
    ll = a_lo * b_lo
    lh = a_lo * b_hi
    hl = a_hi * b_lo
    hh = a_hi * b_hi
    # Each term is < 2**32, so the middle column sum is < 3 * 2**32: no overflow.
    mid = (ll >> U32) + (lh & U64_MASK32) + (hl & U64_MASK32)
    lo = (mid << U32) | (ll & U64_MASK32)
    hi = hh + (lh >> U32) + (hl >> U32) + (mid >> U32)
    return hi, lo


@serial
def leading_zeros_u64(x):
    """Number of leading zero bits of the uint64 x (64 for x = 0)."""
    x = np.uint64(x)
    if x == ZERO:
        return np.uint64(64)
    n = ZERO
    if x <= np.uint64(0x00000000FFFFFFFF):
        n += np.uint64(32)
        x <<= np.uint64(32)
    if x <= np.uint64(0x0000FFFFFFFFFFFF):
        n += np.uint64(16)
        x <<= np.uint64(16)
    if x <= np.uint64(0x00FFFFFFFFFFFFFF):
        n += np.uint64(8)
        x <<= np.uint64(8)
    if x <= np.uint64(0x0FFFFFFFFFFFFFFF):
        n += np.uint64(4)
        x <<= np.uint64(4)
    if x <= np.uint64(0x3FFFFFFFFFFFFFFF):
        n += np.uint64(2)
        x <<= np.uint64(2)
    if x <= np.uint64(0x7FFFFFFFFFFFFFFF):
        n += ONE
    return n


@serial
def rem128_u64(hi, lo, m):
    """(hi * 2**64 + lo) mod m for uint64 hi < m (so the quotient fits in 64 bits), m >= 1.

    Long division with two base-2**32 quotient digits after normalising m to its top bit (Knuth's
    Algorithm D; the estimate q-hat is corrected at most twice per digit).
    """
    hi = np.uint64(hi)
    lo = np.uint64(lo)
    m = np.uint64(m)
    shift = leading_zeros_u64(m)
    v = m << shift
    v_hi = v >> U32
    v_lo = v & U64_MASK32
    if shift == ZERO:
        top = hi
    else:
        top = (hi << shift) | (lo >> (np.uint64(64) - shift))
    low = lo << shift
    low_hi = low >> U32
    low_lo = low & U64_MASK32

    q1 = top // v_hi
    rhat = top - q1 * v_hi
    while q1 >= U64_BASE32 or q1 * v_lo > ((rhat << U32) | low_hi):
        q1 -= ONE
        rhat += v_hi
        if rhat >= U64_BASE32:
            break
    # Wrapping arithmetic: the true value is the 64-bit partial remainder.
    mid = ((top << U32) | low_hi) - q1 * v

    q0 = mid // v_hi
    rhat = mid - q0 * v_hi
    while q0 >= U64_BASE32 or q0 * v_lo > ((rhat << U32) | low_lo):
        q0 -= ONE
        rhat += v_hi
        if rhat >= U64_BASE32:
            break
    rem = ((mid << U32) | low_lo) - q0 * v
    return rem >> shift


@serial
def mulmod_u64(a, b, m):
    """a * b mod m without overflow, for uint64 a, b < m, 1 <= m < 2**64."""
    hi, lo = mulhilo_u64(a, b)
    return rem128_u64(hi, lo, m)


@serial
def powmod_u64(base, exponent, m):
    """base ** exponent mod m for uint64 values, 1 <= m < 2**64 (0 ** 0 = 1, reduced mod m)."""
    m = np.uint64(m)
    e = np.uint64(exponent)
    b = np.uint64(base) % m
    result = ONE % m
    while e != ZERO:
        if e & ONE:
            result = mulmod_u64(result, b, m)
        e >>= ONE
        if e != ZERO:
            b = mulmod_u64(b, b, m)
    return result


@serial
def gcd_u64(a, b):
    """gcd(a, b) of uint64 values (gcd(0, 0) = 0)."""
    a = np.uint64(a)
    b = np.uint64(b)
    while b != ZERO:
        a, b = b, a % b
    return a


@serial
def isqrt_u64(n):
    """floor(sqrt(n)) exactly, for uint64 0 <= n < 2**64."""
    n = np.uint64(n)
    r = np.uint64(np.sqrt(np.float64(n)))
    # The float estimate is within a few units; clamp so that r * r cannot overflow.
    if r > U64_MASK32:
        r = U64_MASK32
    while r * r > n:
        r -= ONE
    while r < U64_MASK32 and (r + ONE) * (r + ONE) <= n:
        r += ONE
    return r


@serial
def icbrt_u64(n):
    """floor(n ** (1/3)) exactly, for uint64 0 <= n < 2**64."""
    n = np.uint64(n)
    r = np.uint64(np.cbrt(np.float64(n)))
    limit = np.uint64(MAX_CUBE_ROOT_U64)
    if r > limit:
        r = limit
    while r * r * r > n:
        r -= ONE
    while r < limit and (r + ONE) * (r + ONE) * (r + ONE) <= n:
        r += ONE
    return r


# ----------------------------------------------------------------------------- Miller-Rabin
@serial
def _montgomery_neg_inverse(n):
    """-n**-1 mod 2**64 for odd n (Newton iteration; n is its own inverse mod 8)."""
    inv = n
    for _ in range(5):  # 3 -> 6 -> 12 -> 24 -> 48 -> 96 correct low bits
        inv *= TWO - n * inv
    return ZERO - inv


@serial
def _montgomery_reduce(hi, lo, n, n_neg_inv):
    """(hi * 2**64 + lo) / 2**64 mod n, for odd n and hi < n (Montgomery's REDC)."""
    m = lo * n_neg_inv
    mh, ml = mulhilo_u64(m, n)
    # lo + ml = 0 mod 2**64 by the choice of m, so its carry is 1 exactly when lo != 0.
    carry = ONE if lo != ZERO else ZERO
    s = hi + mh
    overflow = s < hi
    t = s + carry
    overflow = overflow or t < s
    # The true value is < 2n, so one subtraction (wrapping when it overflowed 2**64) suffices.
    if overflow or t >= n:
        t -= n
    return t


@serial
def _montgomery_mul(a, b, n, n_neg_inv):
    hi, lo = mulhilo_u64(a, b)
    return _montgomery_reduce(hi, lo, n, n_neg_inv)


@serial
def is_prime_u64(n):
    """True iff the uint64 n (0 <= n < 2**64) is prime: trial division by primes <= 61, then
    deterministic Miller-Rabin with the bases 2, 3, ..., 37 (see MILLER_RABIN_BASES)."""
    n = np.uint64(n)
    if n < TWO:
        return False
    for i in range(_SMALL_PRIMES.shape[0]):
        p = _SMALL_PRIMES[i]
        if n == p:
            return True
        if n % p == ZERO:
            return False
    # n is odd and > 61 from here on.
    d = n - ONE
    s = 0
    while (d & ONE) == ZERO:
        d >>= ONE
        s += 1
    n_neg_inv = _montgomery_neg_inverse(n)
    one_m = (ZERO - n) % n  # 2**64 mod n: the Montgomery form of 1
    r2 = mulmod_u64(one_m, one_m, n)  # 2**128 mod n: multiplying by it enters Montgomery form
    minus_one_m = n - one_m
    for i in range(MILLER_RABIN_BASES.shape[0]):
        a_m = _montgomery_mul(MILLER_RABIN_BASES[i], r2, n, n_neg_inv)
        x = one_m
        e = d
        while e != ZERO:
            if e & ONE:
                x = _montgomery_mul(x, a_m, n, n_neg_inv)
            e >>= ONE
            if e != ZERO:
                a_m = _montgomery_mul(a_m, a_m, n, n_neg_inv)
        if x == one_m or x == minus_one_m:
            continue
        witness = True
        for _ in range(s - 1):
            x = _montgomery_mul(x, x, n, n_neg_inv)
            if x == minus_one_m:
                witness = False
                break
        if witness:
            return False
    return True


# ----------------------------------------------------------------------------- square-freeness
@serial
def divisor_table(limit):
    """Odd primes p <= limit (limit <= MAX_CUBE_ROOT_U64) as the columns of a uint64 array of shape
    (3, count): row 0 the primes p, row 1 p**-1 mod 2**64, row 2 floor((2**64 - 1) / p).

    With inv = p**-1 mod 2**64, p divides m exactly when m * inv mod 2**64 <= floor((2**64 - 1) / p),
    and then m * inv is the quotient m / p (Granlund and Montgomery 1994; Warren, "Hacker's Delight",
    10-17): one multiplication instead of a division. Rows are contiguous so that the trial-division
    loop streams 16 bytes per prime.
    """
    if limit > MAX_CUBE_ROOT_U64:
        limit = MAX_CUBE_ROOT_U64
    if limit < 3:
        return np.zeros((3, 0), np.uint64)
    composite = np.zeros(limit + 1, np.uint8)
    count = 0
    for d in range(3, limit + 1, 2):
        if composite[d] == 0:
            count += 1
            for mult in range(d * d, limit + 1, 2 * d):
                composite[mult] = 1
    table = np.empty((3, count), np.uint64)
    col = 0
    for d in range(3, limit + 1, 2):
        if composite[d] == 0:
            p = np.uint64(d)
            inv = p
            for _ in range(5):  # Newton: 3 -> 6 -> 12 -> 24 -> 48 -> 96 correct low bits
                inv *= TWO - p * inv
            table[0, col] = p
            table[1, col] = inv
            table[2, col] = U64_MAX // p
            col += 1
    return table


@serial
def _primes_up_to(divisors, x, stop):
    """Number of table primes <= x among the first ``stop`` columns (binary search)."""
    lo_i = 0
    hi_i = stop
    while lo_i < hi_i:
        mid = (lo_i + hi_i) // 2
        if divisors[0, mid] <= x:
            lo_i = mid + 1
        else:
            hi_i = mid
    return lo_i


@serial
def is_squarefree_u64(n, divisors):
    """True iff the uint64 n >= 1 has no square factor > 1 (False for n = 0).

    ``divisors`` is a :func:`divisor_table`; it only affects speed (past its last prime, odd trial
    divisors continue), so any table, even an empty one, gives the right answer; a table up to
    icbrt_u64(n) never falls back.

    Why this is correct: trial division removes the primes p <= m**(1/3) in increasing order, where m
    is the cofactor left (it only shrinks), returning False as soon as p**2 divides n. Afterwards every
    prime factor of m is > m**(1/3), so m has at most two prime factors (with multiplicity): m = 1, a
    prime r, r*s with r != s (all square-free) or r**2. Hence n is square-free exactly when m is not a
    perfect square > 1, which the exact integer square root decides.
    """
    n = np.uint64(n)
    if n == ZERO:
        return False
    if (n & THREE) == ZERO:
        return False
    m = n >> ONE if (n & ONE) == ZERO else n
    count = divisors.shape[1]
    end = _primes_up_to(divisors, icbrt_u64(m), count)
    col = 0
    while col < end:
        inv = divisors[1, col]
        max_quotient = divisors[2, col]
        t = m * inv
        if t <= max_quotient:
            m = t
            if m * inv <= max_quotient:
                return False
            end = _primes_up_to(divisors, icbrt_u64(m), end)
        col += 1
    # Beyond the table (or with no table): odd trial divisors d while d**3 <= m; composite d never
    # divide m because their prime factors were removed already.
    d = divisors[0, count - 1] + TWO if count > 0 else THREE
    while d * d <= m // d:
        if m % d == ZERO:
            m //= d
            if m % d == ZERO:
                return False
        d += TWO
    if m == ONE:
        return True
    r = isqrt_u64(m)
    return r * r != m


# ----------------------------------------------------------------------------- Philox streams
@serial
def philox4x64_10(c0, c1, c2, c3, k0, k1):
    """Philox-4x64 with 10 rounds: four uint64 output words for counter (c0..c3) and key (k0, k1)."""
    c0 = np.uint64(c0)
    c1 = np.uint64(c1)
    c2 = np.uint64(c2)
    c3 = np.uint64(c3)
    k0 = np.uint64(k0)
    k1 = np.uint64(k1)
    for r in range(10):
        hi0, lo0 = mulhilo_u64(PHILOX_M0, c0)
        hi1, lo1 = mulhilo_u64(PHILOX_M1, c2)
        c0, c1, c2, c3 = hi1 ^ c1 ^ k0, lo1, hi0 ^ c3 ^ k1, lo0
        k0 += PHILOX_W0
        k1 += PHILOX_W1
    return c0, c1, c2, c3


@serial
def stream_init(stream, k0, k1, c1, c2, c3):
    """Point ``stream`` (uint64[STREAM_WORDS]) at counters (j, c1, c2, c3), j = 0, 1, ..., key (k0, k1)."""
    stream[_S_K0] = k0
    stream[_S_K1] = k1
    stream[_S_C1] = c1
    stream[_S_C2] = c2
    stream[_S_C3] = c3
    stream[_S_NEXT] = ZERO
    stream[_S_POS] = FOUR  # buffer empty


@serial
def stream_next(stream):
    """Next uint64 word of the stream: the words of counter j = 0, 1, ... in order, four per counter."""
    pos = stream[_S_POS]
    if pos >= FOUR:
        j = stream[_S_NEXT]
        o0, o1, o2, o3 = philox4x64_10(j, stream[_S_C1], stream[_S_C2], stream[_S_C3],
                                       stream[_S_K0], stream[_S_K1])
        stream[_S_BUF] = o0
        stream[_S_BUF + 1] = o1
        stream[_S_BUF + 2] = o2
        stream[_S_BUF + 3] = o3
        stream[_S_NEXT] = j + ONE
        pos = ZERO
    stream[_S_POS] = pos + ONE
    return stream[_S_BUF + np.int64(pos)]


@serial
def uniform_below(n, stream):
    """Unbiased uniform uint64 in [0, n), 1 <= n <= 2**64 - 1, from the words of ``stream``.

    Lemire's multiply-shift ("Fast random integer generation in an interval", ACM TOMACS 2019): the
    high word of x * n, rejecting x when the low word is below 2**64 mod n. Each draw uses one word
    per try; the rejection probability is (2**64 mod n) / 2**64 < 1/2.
    """
    n = np.uint64(n)
    hi, lo = mulhilo_u64(stream_next(stream), n)
    if lo < n:
        threshold = (ZERO - n) % n
        while lo < threshold:
            hi, lo = mulhilo_u64(stream_next(stream), n)
    return hi


# ----------------------------------------------------------------------------- the pair sampler
@serial
def in_class_u64(value, cls, divisors):
    """Membership of the uint64 value in class 0 (any), 1 (square-free) or 2 (prime)."""
    if cls == CLASS_SQUAREFREE:
        return is_squarefree_u64(value, divisors)
    if cls == CLASS_PRIME:
        return is_prime_u64(value)
    return True


@serial
def draw_pair(stream, lo, hi, coprime_only, num_class, den_class, divisors):
    """One pair drawn uniformly from the family by rejection: returns (p, q, attempts).

    An attempt draws q uniform in [lo, hi), then u uniform in [0, hi - 2), and proposes p = u + 1
    when u < q - 1, i.e. with probability (q - 1) / (hi - 2), the share of q among all pairs; such p
    is uniform in [1, q). So each pair (p, q) with 1 <= p < q, lo <= q < hi is proposed with the same
    probability 1 / ((hi - lo) (hi - 2)), and rejecting the pairs outside the family leaves the result
    uniform over the family. The cheap test u < q - 1 comes before the class tests, which dominate
    the cost at large q; every attempt uses the same two draws, whatever the family.
    """
    width = hi - lo
    p_range = hi - TWO
    attempts = 0
    while True:
        attempts += 1
        q = lo + uniform_below(width, stream)
        u = uniform_below(p_range, stream)
        if u >= q - ONE:
            continue
        p = u + ONE
        if not in_class_u64(q, den_class, divisors):
            continue
        if not in_class_u64(p, num_class, divisors):
            continue
        if coprime_only and gcd_u64(p, q) != ONE:
            continue
        return p, q, attempts


SAMPLE_CHUNK = 256


@parallel
def sample_pairs(key, block_id, first_sample, n_samples, lo, hi, coprime_only, num_class, den_class,
                 divisors, out_p, out_q):
    """Draw samples first_sample .. first_sample + n_samples - 1 of block ``block_id`` into
    out_p[:n_samples], out_q[:n_samples] (uint64); return the total number of attempts (int64).

    * key: uint64[2], the Philox key (derived from the run seed by the caller).
    * block_id, first_sample: uint64 counter words; sample i uses the stream (j, i, block_id,
      PAIR_STREAM_TAG), so results do not depend on threads or on how a block is split into calls.
    * lo, hi: denominators q with lo <= q < hi, 2 <= lo < hi <= 2**63.
    * coprime_only: keep only gcd(p, q) = 1; num_class, den_class: CLASS_ANY / CLASS_SQUAREFREE /
      CLASS_PRIME.
    * divisors: a divisor_table (any size is correct; up to icbrt_u64(hi - 1) is fastest); only used
      for square-free classes.

    Each sample is uniform over the family {(p, q): 1 <= p < q, lo <= q < hi, class and coprimality
    conditions}; the caller must make sure the family is not empty, or a sample never ends.
    """
    lo = np.uint64(lo)
    hi = np.uint64(hi)
    if not (lo >= TWO and hi > lo and hi <= TWO_POW_63):
        raise ValueError("sample_pairs needs 2 <= lo < hi <= 2**63")
    if n_samples > out_p.shape[0] or n_samples > out_q.shape[0]:
        raise ValueError("sample_pairs: output arrays shorter than n_samples")
    if num_class < 0 or num_class > 2 or den_class < 0 or den_class > 2:
        raise ValueError("sample_pairs: class must be 0 (any), 1 (squarefree) or 2 (prime)")
    k0 = np.uint64(key[0])
    k1 = np.uint64(key[1])
    block = np.uint64(block_id)
    first = np.uint64(first_sample)
    n_chunks = (n_samples + SAMPLE_CHUNK - 1) // SAMPLE_CHUNK
    chunk_attempts = np.zeros(n_chunks, np.int64)
    for chunk in prange(n_chunks):
        stream = np.empty(STREAM_WORDS, np.uint64)
        start = chunk * SAMPLE_CHUNK
        stop = min(start + SAMPLE_CHUNK, n_samples)
        attempts = 0
        for i in range(start, stop):
            stream_init(stream, k0, k1, first + np.uint64(i), block, PAIR_STREAM_TAG)
            p, q, used = draw_pair(stream, lo, hi, coprime_only, num_class, den_class, divisors)
            out_p[i] = p
            out_q[i] = q
            attempts += used
        chunk_attempts[chunk] = attempts
    return chunk_attempts.sum()
