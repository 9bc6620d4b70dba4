"""Exact lattice-point counter for continued-fraction words over all fractions p/q, q <= Q.

The mathematics (bijection, triangle counts, hyperbola split, Möbius on the grid of distinct values) is
in ``/work/shared/design/exact-counting.md``; names below follow it. In short, for a word w with matrix
W = M(b1)...M(bk) = [[w11, w12], [w21, w22]] and e = [b_k >= 2]:

* N_w(Q)  = T_e(w21, w22; Q) + T_e(w11 + w21, w12 + w22; Q) + 2 sum_g mu(g) V_w(Q // g)   (all p/q)
* R_w(Q)  = sum_g mu(g) N_w(Q // g)                                                    (gcd(p, q) = 1)
* sum_{d >= D0} N_d(Q) = T_1(1, D0; Q) + 2 sum_g mu(g) Vb_{D0}(Q // g)                 (the bucket)

Every argument Q // g lies in the grid D(Q) = {Q // m}, so the volumes are evaluated once per grid value
(``vals``, ascending) and combined by Möbius over blocks of equal quotients with Mertens values on the
grid.

Integer range: every intermediate is a non-negative count bounded by 3.3 * Q**2 * (2 + ln Q) or a
floor-sum product bounded by Q**2 (derivation in ``cfsweep.exact.MAX_EXACT_DEN``); callers must keep Q
within that bound. Divisions of non-negative int64 values go through :func:`udiv` (unsigned division:
no sign fix-ups in the hot loops).
"""
import math

import numpy as np
from numba import prange

from ._jit import parallel, serial


@serial
def udiv(a, b):
    """floor(a / b) for int64 a >= 0, b >= 1, by unsigned division."""
    return np.int64(np.uint64(a) // np.uint64(b))


@serial
def isqrt(n):
    """floor(sqrt(n)) for 0 <= n < 2**62, exact (float guess corrected by integer steps)."""
    if n <= 0:
        return np.int64(0)
    r = np.int64(math.sqrt(float(n)))
    while r * r > n:
        r -= 1
    while (r + 1) * (r + 1) <= n:
        r += 1
    return r


@serial
def floor_sum(n, m, a, b):
    """sum_{i=0}^{n-1} floor((a*i + b) / m) for n >= 0, m >= 1, a, b >= 0 (Euclid-like reduction)."""
    total = np.int64(0)
    n = np.int64(n)
    m = np.int64(m)
    a = np.int64(a)
    b = np.int64(b)
    while True:
        if a >= m:
            qa = udiv(a, m)
            total += qa * ((n * (n - 1)) >> 1)
            a -= qa * m
        if b >= m:
            qb = udiv(b, m)
            total += qb * n
            b -= qb * m
        y = a * n + b
        if y < m:
            break
        n = udiv(y, m)
        b = y - n * m
        t = m
        m = a
        a = t
    return total


@serial
def triangle_count(l1, l2, x, e):
    """T_e(l1, l2; x) = #{(G, D): 1 <= G < D, l1*G + l2*D <= x} + e * floor(x / l2).

    l1, l2 >= 1, x >= 0, e in {0, 1}.
    """
    out = np.int64(0)
    if e != 0:
        out = udiv(x, l2)
    if x < l1 + 2 * l2:
        return out
    d2 = udiv(x - l1, l2)
    d1 = udiv(x + l1, l1 + l2)
    if d1 > d2:
        d1 = d2
    if d1 >= 2:
        out += (d1 * (d1 - 1)) >> 1
    lo = d1 + 1
    if lo < 2:
        lo = 2
    if d2 >= lo:
        out += floor_sum(d2 - lo + 1, l1, l2, x - l2 * d2)
    return out


@serial
def corner_count(m1, m2, x, b_low):
    """C(m1, m2; x, b_low) = #{(a, b): 1 <= a < b, b >= b_low + 1, a*m1 + b*m2 <= x}.

    m1, m2 >= 1, x >= 0, b_low >= 1.
    """
    if x < m1 + (b_low + 1) * m2:
        return np.int64(0)
    b2 = udiv(x - m1, m2)
    b1 = udiv(x + m1, m1 + m2)
    hi = b1 if b1 < b2 else b2
    out = np.int64(0)
    if hi >= b_low + 1:
        # sum_{b = b_low+1}^{hi} (b - 1)
        out += ((hi * (hi - 1)) >> 1) - ((b_low * (b_low - 1)) >> 1)
    lo2 = b1 + 1
    if lo2 < b_low + 1:
        lo2 = b_low + 1
    if b2 >= lo2:
        out += floor_sum(b2 - lo2 + 1, m1, m2, x - m2 * b2)
    return out


@serial
def word_volume(x, w11, w12, w21, w22, e):
    """V_w(x) = #{(a, b, G, D): 1 <= a < b, (G, D) admissible, (a, b) W (G, D)^T <= x}.

    Admissible suffixes: 1 <= G < D, and (0, D), D >= 1, when e = 1. Hyperbola split at
    b <= B = max(1, isqrt(x / w22)) (triangle counts in (G, D)) and b > B (corner counts in (a, b),
    where q >= w22 * b * D forces D <= E = x / (w22 (B + 1))).
    """
    if x <= 0:
        return np.int64(0)
    big_b = isqrt(udiv(x, w22))
    if big_b < 1:
        big_b = 1
    total = np.int64(0)
    # Region I: b <= B, count (G, D) for each prefix vector (a, b).
    for b in range(2, big_b + 1):
        l1_base = b * w21
        l2_base = b * w22
        if x < l2_base:
            break
        first = True
        for a in range(1, b):
            t = triangle_count(a * w11 + l1_base, a * w12 + l2_base, x, e)
            if t == 0:
                break
            first = False
            total += t
        if first:
            break
    # Region II: b > B, count (a, b) for each suffix (G, D) with D <= E.
    big_e = udiv(x, w22 * (big_b + 1))
    g_start = 0 if e != 0 else 1
    for dd in range(1, big_e + 1):
        first = True
        for g in range(g_start, dd):
            c = corner_count(w11 * g + w12 * dd, w21 * g + w22 * dd, x, big_b)
            if c == 0:
                break
            first = False
            total += c
        if first and dd > 1:
            break
    return total


@serial
def bucket_threshold(x, d0):
    """Split point Mth = max(d0, floor(sqrt(x) * d0**0.25)) of the bucket volume (any Mth >= d0 is exact)."""
    mth = np.int64(math.sqrt(float(x)) * d0 ** 0.25)
    if mth < d0:
        mth = d0
    return mth


@serial
def bucket_bsum(x, dd, g, mth, d0):
    """sum_{b >= 1} max(0, floor((x - b*g) / dd) - max(mth, d0*b)) for x >= 0, dd >= 1, g >= 0, mth >= d0 >= 1.

    Two floor sums: b <= mth // d0 (the max is mth) and b above (the max is d0*b).
    """
    total = np.int64(0)
    b_star = udiv(mth, d0)
    rest = x - dd * (mth + 1)
    if rest >= 0 and b_star >= 1:
        b_a = b_star
        if g > 0:
            lim = udiv(rest, g)
            if lim < b_a:
                b_a = lim
        if b_a >= 1:
            total += floor_sum(b_a, dd, g, x - b_a * g) - b_a * mth
    slope = g + dd * d0
    if x >= dd:
        b_b = udiv(x - dd, slope)
        if b_b > b_star:
            n = b_b - b_star
            total += floor_sum(n, dd, slope, x - b_b * slope)
    return total


@serial
def bucket_volume(x, d0):
    """Vb_{d0}(x) = #{(b, m, G, D): b >= 1, m >= d0*b + 1, 0 <= G < D, m*D + b*G <= x} for d0 >= 2."""
    if x <= 0:
        return np.int64(0)
    mth = bucket_threshold(x, d0)
    total = np.int64(0)
    top = mth if mth < x else x
    for m in range(d0 + 1, top + 1):
        nb = udiv(m - 1, d0)
        tail = udiv(x, m)  # T_1 value once the triangle part vanishes
        for b in range(1, nb + 1):
            if x < b + 2 * m:
                total += (nb - b + 1) * tail
                break
            total += triangle_count(b, m, x, 1)
    big_e = udiv(x, mth + 1)
    for dd in range(1, big_e + 1):
        for g in range(0, dd):
            s = bucket_bsum(x, dd, g, mth, d0)
            if s == 0:
                break
            total += s
    return total


# ----------------------------------------------------------------------------------------------
# The grid of distinct values floor(Q/m) and arithmetic functions on it
# ----------------------------------------------------------------------------------------------

@serial
def divisor_grid(q):
    """Ascending array of the distinct values floor(q / m), 1 <= m <= q (q >= 1)."""
    sq = isqrt(q)
    dup = 1 if udiv(q, sq) == sq else 0
    n = 2 * sq - dup
    vals = np.empty(n, np.int64)
    for t in range(1, sq + 1):
        vals[t - 1] = t
    for m in range(1, sq + 1 - dup):
        vals[n - m] = udiv(q, m)
    return vals


@serial
def grid_index(x, q, sq, n):
    """Index in ``divisor_grid(q)`` (length n, sq = isqrt(q)) of a grid value x >= 1."""
    if x <= sq:
        return x - 1
    return n - udiv(q, x)


@serial
def mobius_sieve(n):
    """mu[0..n] (mu[0] = 0) by a smallest-prime-factor sieve."""
    mu = np.ones(n + 1, np.int8)
    mu[0] = 0
    is_comp = np.zeros(n + 1, np.uint8)
    for p in range(2, n + 1):
        if is_comp[p] == 0:
            for m in range(p, n + 1, p):
                if m > p:
                    is_comp[m] = 1
                mu[m] = -mu[m]
            pp = p * p
            for m in range(pp, n + 1, pp):
                mu[m] = 0
    return mu


@serial
def totient_sieve(n):
    """phi[0..n] (phi[0] = 0) by the product formula over primes."""
    phi = np.arange(n + 1).astype(np.int64)
    for p in range(2, n + 1):
        if phi[p] == p:
            for m in range(p, n + 1, p):
                phi[m] -= udiv(phi[m], p)
    return phi


@serial
def _sieve_limit(q):
    s = np.int64(float(q) ** (2.0 / 3.0)) + 1
    sq = isqrt(q)
    if s < sq:
        s = sq
    if s > q:
        s = q
    return s


@serial
def _summatory_on_grid(q, vals, values, triangular_top):
    """F(v) = sum_{n <= v} values[n] for every v in ``vals``, for a function f with sum_{d | n} f(d)
    equal to [n = 1] (Möbius, ``triangular_top`` False) or n (Euler phi, True).

    ``values`` is the sieve of f up to lim ~ q**(2/3); above it F(x) = top(x) - sum_{g=2}^{x} F(x // g),
    grouped by equal quotients, with top(x) = 1 or x(x+1)/2.
    """
    n = vals.shape[0]
    sq = isqrt(q)
    lim = values.shape[0] - 1
    small = np.zeros(lim + 1, np.int64)
    acc = np.int64(0)
    for i in range(1, lim + 1):
        acc += values[i]
        small[i] = acc
    out = np.zeros(n, np.int64)
    for i in range(n):
        x = vals[i]
        if x <= lim:
            out[i] = small[x]
            continue
        s = np.int64(0)
        g = np.int64(2)
        while g <= x:
            t = udiv(x, g)
            g2 = udiv(x, t)
            ft = small[t] if t <= lim else out[grid_index(t, q, sq, n)]
            s += (g2 - g + 1) * ft
            g = g2 + 1
        top = ((x * (x + 1)) >> 1) if triangular_top else np.int64(1)
        out[i] = top - s
    return out


@serial
def mertens_on_grid(q, vals):
    """M(v) = sum_{n <= v} mu(n) for every v in ``vals = divisor_grid(q)``.

    A mu sieve to about q**(2/3), then M(x) = 1 - sum_{g=2}^{x} M(x // g) grouped by equal quotients.
    """
    return _summatory_on_grid(q, vals, mobius_sieve(_sieve_limit(q)), False)


@serial
def totient_summatory_on_grid(q, vals):
    """Phi(v) = sum_{n <= v} phi(n) for every v in ``vals``.

    A phi sieve to about q**(2/3), then Phi(x) = x(x+1)/2 - sum_{g=2}^{x} Phi(x // g) (from
    sum_{d | n} phi(d) = n), independent of the Möbius values used elsewhere.
    """
    return _summatory_on_grid(q, vals, totient_sieve(_sieve_limit(q)), True)


@serial
def mobius_transform_at(q, vals, mert, f, i):
    """sum_{h >= 1} mu(h) f(vals[i] // h) for a function f given by its values on the grid."""
    n = vals.shape[0]
    sq = isqrt(q)
    v = vals[i]
    s = np.int64(0)
    h = np.int64(1)
    m_prev = np.int64(0)
    while h <= v:
        t = udiv(v, h)
        h2 = udiv(v, t)
        m_now = mert[grid_index(h2, q, sq, n)]
        s += (m_now - m_prev) * f[grid_index(t, q, sq, n)]
        m_prev = m_now
        h = h2 + 1
    return s


@serial
def mobius_transform(q, vals, mert, f):
    """The array v -> sum_h mu(h) f(v // h) over the whole grid."""
    n = vals.shape[0]
    out = np.empty(n, np.int64)
    for i in range(n):
        out[i] = mobius_transform_at(q, vals, mert, f, i)
    return out


@serial
def deal_chunks(vals, n_chunks):
    """Assign grid indices to n_chunks by longest-processing-time first (cost ~ v log v).

    Returns (order, starts): chunk c owns order[starts[c]:starts[c+1]]. Deterministic.
    """
    n = vals.shape[0]
    owner = np.empty(n, np.int64)
    load = np.zeros(n_chunks, np.float64)
    counts = np.zeros(n_chunks, np.int64)
    for j in range(n - 1, -1, -1):
        best = 0
        for c in range(1, n_chunks):
            if load[c] < load[best]:
                best = c
        v = float(vals[j])
        load[best] += v * math.log(v + 2.0)
        owner[j] = best
        counts[best] += 1
    starts = np.zeros(n_chunks + 1, np.int64)
    for c in range(n_chunks):
        starts[c + 1] = starts[c] + counts[c]
    fill = starts[:n_chunks].copy()
    order = np.empty(n, np.int64)
    for j in range(n - 1, -1, -1):
        c = owner[j]
        order[fill[c]] = j
        fill[c] += 1
    return order, starts


@serial
def word_volumes_serial(vals, w11, w12, w21, w22, e):
    """V_w(v) for every grid value, one thread."""
    n = vals.shape[0]
    out = np.zeros(n, np.int64)
    for i in range(n):
        out[i] = word_volume(vals[i], w11, w12, w21, w22, e)
    return out


@parallel
def word_volumes_parallel(vals, w11, w12, w21, w22, e, order, starts):
    """V_w(v) for every grid value, chunks from :func:`deal_chunks` spread over threads."""
    n = vals.shape[0]
    n_chunks = starts.shape[0] - 1
    out = np.zeros(n, np.int64)
    for c in prange(n_chunks):
        for j in range(starts[c], starts[c + 1]):
            i = order[j]
            out[i] = word_volume(vals[i], w11, w12, w21, w22, e)
    return out


@serial
def bucket_volumes_serial(vals, d0):
    """Vb_{d0}(v) for every grid value, one thread."""
    n = vals.shape[0]
    out = np.zeros(n, np.int64)
    for i in range(n):
        out[i] = bucket_volume(vals[i], d0)
    return out


@parallel
def bucket_volumes_parallel(vals, d0, order, starts):
    """Vb_{d0}(v) for every grid value, chunks from :func:`deal_chunks` spread over threads."""
    n = vals.shape[0]
    n_chunks = starts.shape[0] - 1
    out = np.zeros(n, np.int64)
    for c in prange(n_chunks):
        for j in range(starts[c], starts[c + 1]):
            i = order[j]
            out[i] = bucket_volume(vals[i], d0)
    return out


@serial
def word_counts_from_volumes(q, vals, mert, volumes, w11, w12, w21, w22, e):
    """(N_w on the whole grid, R_w(q)) from the volumes V_w on the grid: formulas (3) and (2)."""
    n = vals.shape[0]
    inner = mobius_transform(q, vals, mert, volumes)
    counts = np.empty(n, np.int64)
    for i in range(n):
        v = vals[i]
        counts[i] = (triangle_count(w21, w22, v, e) + triangle_count(w11 + w21, w12 + w22, v, e)
                     + 2 * inner[i])
    return counts, mobius_transform_at(q, vals, mert, counts, n - 1)


@serial
def bucket_counts_from_volumes(q, vals, mert, volumes, d0):
    """(sum_{d >= d0} N_d on the whole grid, the same for the reduced family at q): formula (4)."""
    n = vals.shape[0]
    inner = mobius_transform(q, vals, mert, volumes)
    counts = np.empty(n, np.int64)
    for i in range(n):
        counts[i] = triangle_count(1, d0, vals[i], 1) + 2 * inner[i]
    return counts, mobius_transform_at(q, vals, mert, counts, n - 1)


# ----------------------------------------------------------------------------------------------
# Fractions of a given short length (for the number of places of length k)
# ----------------------------------------------------------------------------------------------

@serial
def divisor_summatory(y):
    """D(y) = sum_{a=1}^{y} floor(y / a) for y >= 0 (Dirichlet hyperbola)."""
    if y <= 0:
        return np.int64(0)
    r = isqrt(y)
    s = np.int64(0)
    for a in range(1, r + 1):
        s += udiv(y, a)
    return 2 * s - r * r


@serial
def short_length_counts(q, vals, mert):
    """Fractions p/q' (q' <= q) of expansion length 1 and 2: (all_1, all_2, reduced_1, reduced_2).

    Reduced: length 1 is [0; a], a >= 2: q - 1 of them; length 2 is [0; a1, a2], a2 >= 2, with
    denominator a1*a2 + 1 <= x: D(x - 1) - (x - 1). The all family is sum_g reduced(q // g).
    """
    n = vals.shape[0]
    red1 = np.empty(n, np.int64)
    red2 = np.empty(n, np.int64)
    for i in range(n):
        v = vals[i]
        red1[i] = v - 1
        red2[i] = divisor_summatory(v - 1) - (v - 1) if v >= 1 else 0
    # sum_g f(q // g) over blocks of equal quotient
    sq = isqrt(q)
    all1 = np.int64(0)
    all2 = np.int64(0)
    g = np.int64(1)
    while g <= q:
        t = udiv(q, g)
        g2 = udiv(q, t)
        j = grid_index(t, q, sq, n)
        all1 += (g2 - g + 1) * red1[j]
        all2 += (g2 - g + 1) * red2[j]
        g = g2 + 1
    return all1, all2, red1[n - 1], red2[n - 1]


@serial
def length_counts_by_enumeration(q, max_len):
    """Fractions in (0, 1) with denominator <= q by exact expansion length n = 1..max_len.

    Depth-first walk over digit sequences with continuant <= q (cost ~ number of such sequences).
    Returns (all_counts, reduced_counts), int64 arrays of max_len + 1 (index 0 unused); the all
    family counts each reduced fraction p'/q' floor(q / q') times.
    """
    all_counts = np.zeros(max_len + 1, np.int64)
    red_counts = np.zeros(max_len + 1, np.int64)
    # stack of (q_prev, q_cur, depth, next digit)
    qp = np.zeros(max_len + 2, np.int64)
    qc = np.zeros(max_len + 2, np.int64)
    dig = np.zeros(max_len + 2, np.int64)
    depth = 0
    qp[0] = 0
    qc[0] = 1
    dig[0] = 1
    while depth >= 0:
        a = dig[depth]
        nq = a * qc[depth] + qp[depth]
        if nq > q:
            depth -= 1
            continue
        dig[depth] = a + 1
        n = depth + 1
        if a >= 2:
            red_counts[n] += 1
            all_counts[n] += udiv(q, nq)
        if n < max_len:
            depth += 1
            qp[depth] = qc[depth - 1]
            qc[depth] = nq
            dig[depth] = 1
    return all_counts, red_counts
