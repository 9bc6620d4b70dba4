/* C references for the sweep benchmark: digit histogram (symbols min(a, cap) - 1), length histogram and
 * per-denominator rows (members, partial quotients, digits 1..4) of all p/q with q_lo <= q <= q_hi.
 * Built at run time by bench/run.py with gcc -O3 -march=native -fopenmp.
 *   cf_plain:    one Euclid chain at a time, uint32 division.
 *   cf_lockstep: LANES fractions in lockstep, float32 quotient (exact for q < 2^24 after one
 *                correction), packed per-lane counters for symbols 0..7, scalar pass for the rest.
 * Threads: denominators dealt cyclically to n_threads OpenMP threads, each with its own histograms; the
 * lockstep references also keep their own per-denominator rows, copied out at the end, so that two threads
 * never write the same cache line (rows of q and q + 1 share one). */
#include <stdint.h>
#include <string.h>
#include <stdlib.h>
#include <omp.h>

#define MAXLEN 129
#define LANES 64

static void merge(int64_t *dst, const int64_t *src, int n) { for (int i = 0; i < n; i++) dst[i] += src[i]; }

/* rows of the thread's denominators q_lo + tid, q_lo + tid + nt, ...: how many, and copying them out */
static int64_t thread_rows(int64_t q_lo, int64_t q_hi, int tid, int nt) {
    return q_lo + tid <= q_hi ? (q_hi - q_lo - tid) / nt + 1 : 0;
}
static void copy_rows_out(int64_t *per_den, const int64_t *local, int64_t n_local, int tid, int nt) {
    for (int64_t k = 0; k < n_local; k++) memcpy(per_den + (tid + k * nt) * 6, local + k * 6, 6 * sizeof(int64_t));
}

void cf_plain(int64_t q_lo, int64_t q_hi, int64_t cap, int n_threads,
              int64_t *hist, int64_t *lengths, int64_t *per_den) {
    #pragma omp parallel num_threads(n_threads)
    {
        int tid = omp_get_thread_num(), nt = omp_get_num_threads();
        int64_t h[64] = {0}, lh[MAXLEN] = {0};
        for (int64_t q = q_lo + tid; q <= q_hi; q += nt) {
            int64_t d4[4] = {0}, pqs = 0;
            for (uint32_t p = 1; p < q; p++) {
                uint32_t x = (uint32_t)q, y = p; int n = 0;
                while (y) {
                    uint32_t a = x / y, r = x - a * y;
                    uint32_t s = (a < cap ? a : cap) - 1;
                    h[s]++; if (a <= 4) d4[a - 1]++;
                    n++; x = y; y = r;
                }
                lh[n]++; pqs += n;
            }
            int64_t *row = per_den + (q - q_lo) * 6;
            row[0] = q - 1; row[1] = pqs;
            for (int d = 0; d < 4; d++) row[2 + d] = d < cap - 1 ? d4[d] : -1;
        }
        #pragma omp critical
        { merge(hist, h, cap); merge(lengths, lh, MAXLEN); }
    }
}

typedef struct { int64_t q; uint32_t p; int64_t k; } gen_t;  /* k: q's row among the thread's */
static inline int next_pair(gen_t *g, int64_t q_hi, int step) {
    g->p++;
    if (g->p >= g->q) { g->q += step; g->p = 1; g->k++; }
    return g->q <= q_hi;
}

void cf_lockstep(int64_t q_lo, int64_t q_hi, int64_t cap, int n_threads,
                 int64_t *hist, int64_t *lengths, int64_t *per_den) {
    #pragma omp parallel num_threads(n_threads)
    {
        int tid = omp_get_thread_num(), nt = omp_get_num_threads();
        int64_t h[64] = {0}, lh[MAXLEN] = {0};
        float xf[LANES] __attribute__((aligned(64))), yf[LANES] __attribute__((aligned(64)));
        int32_t sym[LANES] __attribute__((aligned(64)));
        uint64_t packed[LANES] __attribute__((aligned(64)));
        int32_t start[LANES]; int64_t lk[LANES]; uint8_t act[LANES];
        int64_t n_local = thread_rows(q_lo, q_hi, tid, nt);
        int64_t *local = calloc(n_local * 6 + 6, sizeof(int64_t));
        gen_t g = { q_lo + tid, 0, 0 };
        if (g.q > q_hi) g.q = q_hi + 1;
        int n_active = 0;
        for (int l = 0; l < LANES; l++) {
            packed[l] = 0; start[l] = 0;
            if (g.q <= q_hi && next_pair(&g, q_hi, nt)) {
                xf[l] = (float)g.q; yf[l] = (float)g.p; lk[l] = g.k; act[l] = 1; n_active++;
            } else { xf[l] = 2.f; yf[l] = 1.f; act[l] = 0; }
        }
        const float capf = (float)cap;
        for (int32_t t = 0; n_active > 0; t++) {
            for (int l = 0; l < LANES; l++) {
                float x = xf[l], y = yf[l];
                float a = __builtin_floorf(x / y);
                a -= (x - a * y < 0.f) ? 1.f : 0.f;
                float r = x - a * y;
                int32_t s = (int32_t)(a < capf ? a : capf) - 1;
                sym[l] = s;
                packed[l] += (s < 8 ? 1ull : 0ull) << ((s & 7) * 8);
                xf[l] = y; yf[l] = r;
            }
            for (int l = 0; l < LANES; l++) {
                int32_t s = sym[l];
                if (s >= 8) h[s]++;
                if (yf[l] == 0.f) {
                    if (act[l]) {
                        int n = t - start[l] + 1;
                        uint64_t v = packed[l];
                        for (int k = 0; k < 8; k++) h[k] += (v >> (8 * k)) & 255;
                        lh[n]++;
                        int64_t *row = local + lk[l] * 6;
                        row[0]++; row[1] += n;
                        for (int d = 0; d < 4; d++) row[2 + d] += (v >> (8 * d)) & 255;
                        if (next_pair(&g, q_hi, nt)) { xf[l] = (float)g.q; yf[l] = (float)g.p; lk[l] = g.k; }
                        else { act[l] = 0; n_active--; xf[l] = 2.f; yf[l] = 1.f; }
                    } else { xf[l] = 2.f; yf[l] = 1.f; }
                    packed[l] = 0; start[l] = t + 1;
                }
            }
        }
        /* idle lanes counted symbol 1 (digit 2) in h only through s >= 8: nothing to undo */
        copy_rows_out(per_den, local, n_local, tid, nt);
        free(local);
        #pragma omp critical
        { merge(hist, h, cap); merge(lengths, lh, MAXLEN); }
    }
    for (int64_t q = q_lo; q <= q_hi; q++)
        for (int d = 0; d < 4; d++) if (d >= cap - 1) per_den[(q - q_lo) * 6 + 2 + d] = -1;
}

/* cf_simd: the strongest reference, written with intrinsics for the widest vector unit the compiler
 * targets (-march=native): AVX-512 (4 groups of 16 float32 lanes) or AVX2 + FMA (8 groups of 8), 64
 * lanes either way. Quotient by vector division + round down + one exact correction (the remainder
 * x - a*y is formed by one fused multiply-add, exact for operands below 2^24), per-lane packed 32-bit
 * counters (bytes for symbols 0..7, nibbles for 8..31: a symbol >= 8 is a digit >= 9 and 9^c <= q bounds
 * its count by 9), counters summed branch-free into per-lane 16-bit fields when a lane finishes, a scalar
 * pass only for the finished lanes (length, per-denominator row, refill). With mirror = 1 only p < q/2 are
 * expanded, from their second partial quotient on, and (q - p)/q = [0; 1, a1 - 1, a2, ...] is booked from
 * the same expansion (the same algorithm as the cfsweep kernel). Requires cap <= 32 and q_hi < 2^24.
 * cf_simd_isa() names the instruction set compiled in; "none" means cf_simd is not available. */
#if defined(__AVX512F__) || (defined(__AVX2__) && defined(__FMA__))
#include <immintrin.h>

#define NCNT 5
#define NACC 16
#define FLUSH_STEPS 8192  /* a 16-bit field grows by at most 4 per step (mirror: counts twice) */

#if defined(__AVX512F__)
#define GW 16  /* lanes per vector */
const char *cf_simd_isa(void) { return "avx512"; }
#else
#define GW 8
const char *cf_simd_isa(void) { return "avx2"; }
#endif
#define GROUPS (LANES / GW)

/* add the unpacked counters of the lanes in `done` (bit i = lane GW*g + i) to their 16-bit fields */
static inline void simd_book_counts(uint32_t cnt[NCNT][LANES], uint32_t acc[NACC][LANES], int g,
                                    uint32_t done, int twice) {
    int a = 0;
#if defined(__AVX512F__)
    const __m512i m8 = _mm512_set1_epi32(0x00FF00FF), m4 = _mm512_set1_epi32(0x000F000F);
    for (int c = 0; c < NCNT; c++) {
        __m512i v = _mm512_load_si512(&cnt[c][GW * g]);
        int parts = c < 2 ? 2 : 4, width = c < 2 ? 8 : 4;
        for (int j = 0; j < parts; j++, a++) {
            __m512i f = _mm512_and_si512(_mm512_srlv_epi32(v, _mm512_set1_epi32(j * width)), c < 2 ? m8 : m4);
            if (twice) f = _mm512_slli_epi32(f, 1);
            __m512i s = _mm512_load_si512(&acc[a][GW * g]);
            _mm512_store_si512(&acc[a][GW * g], _mm512_mask_add_epi32(s, (__mmask16)done, s, f));
        }
    }
#else
    const __m256i m8 = _mm256_set1_epi32(0x00FF00FF), m4 = _mm256_set1_epi32(0x000F000F);
    const __m256i bits = _mm256_setr_epi32(1, 2, 4, 8, 16, 32, 64, 128);
    const __m256i sel = _mm256_cmpeq_epi32(_mm256_and_si256(_mm256_set1_epi32((int)done), bits), bits);
    for (int c = 0; c < NCNT; c++) {
        __m256i v = _mm256_load_si256((const __m256i *)&cnt[c][GW * g]);
        int parts = c < 2 ? 2 : 4, width = c < 2 ? 8 : 4;
        for (int j = 0; j < parts; j++, a++) {
            __m256i f = _mm256_and_si256(_mm256_srlv_epi32(v, _mm256_set1_epi32(j * width)), c < 2 ? m8 : m4);
            if (twice) f = _mm256_slli_epi32(f, 1);
            __m256i *dst = (__m256i *)&acc[a][GW * g];
            _mm256_store_si256(dst, _mm256_add_epi32(_mm256_load_si256(dst), _mm256_and_si256(f, sel)));
        }
    }
#endif
}

/* counter c holds symbols COUNTER_BASE[c].. in fields of 2^COUNTER_SHIFT[c] bits: bytes, then nibbles */
static const int COUNTER_BASE[NCNT] = {0, 4, 8, 16, 24}, COUNTER_SHIFT[NCNT] = {3, 3, 2, 2, 2};

/* one Euclid step of the GW lanes of group g; returns the lanes whose remainder is now 0 */
static inline uint32_t simd_step(float *xs, float *ys, uint32_t cnt[NCNT][LANES], int g, float capf) {
#if defined(__AVX512F__)
    const __m512 zero = _mm512_setzero_ps(), one = _mm512_set1_ps(1.f), vcap = _mm512_set1_ps(capf);
    const __m512i ione = _mm512_set1_epi32(1);
    __m512 x = _mm512_load_ps(xs + GW * g), y = _mm512_load_ps(ys + GW * g);
    __m512 a = _mm512_roundscale_ps(_mm512_div_ps(x, y), _MM_FROUND_TO_NEG_INF | _MM_FROUND_NO_EXC);
    __m512 r = _mm512_fnmadd_ps(a, y, x);
    __mmask16 neg = _mm512_cmp_ps_mask(r, zero, _CMP_LT_OQ);
    a = _mm512_mask_sub_ps(a, neg, a, one);
    r = _mm512_mask_add_ps(r, neg, r, y);
    __m512i s = _mm512_sub_epi32(_mm512_cvttps_epi32(_mm512_min_ps(a, vcap)), ione);
    _mm512_store_ps(xs + GW * g, y);
    _mm512_store_ps(ys + GW * g, r);
    /* variable shifts by >= 32 (negative differences included) give 0: each symbol lands in one counter */
    for (int c = 0; c < NCNT; c++) {
        __m512i v = _mm512_load_si512(&cnt[c][GW * g]);
        v = _mm512_add_epi32(v, _mm512_sllv_epi32(ione, _mm512_slli_epi32(
                _mm512_sub_epi32(s, _mm512_set1_epi32(COUNTER_BASE[c])), COUNTER_SHIFT[c])));
        _mm512_store_si512(&cnt[c][GW * g], v);
    }
    return (uint32_t)_mm512_cmp_ps_mask(r, zero, _CMP_EQ_OQ);
#else
    const __m256 zero = _mm256_setzero_ps(), one = _mm256_set1_ps(1.f), vcap = _mm256_set1_ps(capf);
    const __m256i ione = _mm256_set1_epi32(1);
    __m256 x = _mm256_load_ps(xs + GW * g), y = _mm256_load_ps(ys + GW * g);
    __m256 a = _mm256_floor_ps(_mm256_div_ps(x, y));
    __m256 r = _mm256_fnmadd_ps(a, y, x);
    __m256 neg = _mm256_cmp_ps(r, zero, _CMP_LT_OQ);
    a = _mm256_sub_ps(a, _mm256_and_ps(neg, one));
    r = _mm256_add_ps(r, _mm256_and_ps(neg, y));
    __m256i s = _mm256_sub_epi32(_mm256_cvttps_epi32(_mm256_min_ps(a, vcap)), ione);
    _mm256_store_ps(xs + GW * g, y);
    _mm256_store_ps(ys + GW * g, r);
    for (int c = 0; c < NCNT; c++) {
        __m256i *p = (__m256i *)&cnt[c][GW * g];
        __m256i v = _mm256_load_si256(p);
        v = _mm256_add_epi32(v, _mm256_sllv_epi32(ione, _mm256_slli_epi32(
                _mm256_sub_epi32(s, _mm256_set1_epi32(COUNTER_BASE[c])), COUNTER_SHIFT[c])));
        _mm256_store_si256(p, v);
    }
    return (uint32_t)_mm256_movemask_ps(_mm256_cmp_ps(r, zero, _CMP_EQ_OQ));
#endif
}

static void simd_flush(uint32_t acc[NACC][LANES], int64_t *h) {
    int a = 0;
    for (int c = 0; c < NCNT; c++) {
        int parts = c < 2 ? 2 : 4, base = c == 0 ? 0 : c == 1 ? 4 : 8 + 8 * (c - 2);
        for (int j = 0; j < parts; j++, a++) {
            int s_lo = base + j, s_hi = c < 2 ? base + j + 2 : base + j + 4;
            for (int l = 0; l < LANES; l++) {
                h[s_lo] += acc[a][l] & 0xFFFF;
                h[s_hi] += acc[a][l] >> 16;
                acc[a][l] = 0;
            }
        }
    }
}

void cf_simd(int64_t q_lo, int64_t q_hi, int64_t cap, int n_threads, int mirror,
             int64_t *hist, int64_t *lengths, int64_t *per_den) {
    memset(per_den, 0, sizeof(int64_t) * 6 * (q_hi - q_lo + 1));
    #pragma omp parallel num_threads(n_threads)
    {
        int tid = omp_get_thread_num(), nt = omp_get_num_threads();
        int64_t h[64] = {0}, lh[MAXLEN] = {0};
        float xs[LANES] __attribute__((aligned(64))), ys[LANES] __attribute__((aligned(64)));
        uint32_t cnt[NCNT][LANES] __attribute__((aligned(64)));
        uint32_t acc[NACC][LANES] __attribute__((aligned(64)));
        int32_t start[LANES], sym1[LANES]; int64_t lk[LANES];
        uint32_t active[GROUPS] = {0};
        memset(cnt, 0, sizeof cnt); memset(acc, 0, sizeof acc);
        int64_t q = q_lo + tid, p = 0, k = 0;  /* generator state; k: q's row among the thread's */
        int64_t n_local = thread_rows(q_lo, q_hi, tid, nt);
        int64_t *local = calloc(n_local * 6 + 6, sizeof(int64_t));
        int n_active = 0;
        const float capf = (float)cap;
        int32_t t = -1;
        /* refill lane l at the end of step t; returns 1 if it got a fraction */
        #define NEXT_FRACTION() ({ int got = 0; \
            while (!got && q <= q_hi) { \
                p++; \
                if (mirror ? (2 * p >= q) : (p >= q)) { \
                    if (mirror && q % 2 == 0) { /* (q/2)/q = [0; 2], its own mirror */ \
                        int64_t *row = local + k * 6; \
                        row[0]++; row[1]++; row[3]++; h[1]++; lh[1]++; } \
                    q += nt; k++; p = 0; continue; } \
                if (!mirror) { xs[l] = (float)q; ys[l] = (float)p; cnt[0][l] = cnt[1][l] = cnt[2][l] = cnt[3][l] = cnt[4][l] = 0; \
                    start[l] = t + 1; got = 1; break; } \
                int64_t a1 = (uint32_t)q / (uint32_t)p, r = q - a1 * p; \
                int s1 = (int)(a1 < cap ? a1 : cap) - 1, s2 = a1 - 1 < cap ? (int)a1 - 2 : (int)cap - 1; \
                if (r == 0) { /* [a1] and its mirror [1, a1 - 1] */ \
                    int64_t *row = local + k * 6; \
                    h[s1]++; h[0]++; h[s2]++; lh[1]++; lh[2]++; row[0] += 2; row[1] += 3; \
                    if (s1 < 4) row[2 + s1]++; row[2]++; if (s2 < 4) row[2 + s2]++; continue; } \
                xs[l] = (float)p; ys[l] = (float)r; \
                cnt[0][l] = s1 < 4 ? 1u << (8 * s1) : 0; cnt[1][l] = (s1 >= 4 && s1 < 8) ? 1u << (8 * (s1 - 4)) : 0; \
                for (int c = 2; c < NCNT; c++) cnt[c][l] = (s1 >= 8 + 8 * (c - 2) && s1 < 16 + 8 * (c - 2)) ? 1u << (4 * ((s1 - 8) % 8)) : 0; \
                sym1[l] = (int)(a1 <= cap ? a1 - 1 : cap); start[l] = t; got = 1; } \
            got; })
        for (int l = 0; l < LANES; l++) {
            if (NEXT_FRACTION()) { lk[l] = k; active[l / GW] |= 1u << (l % GW); n_active++; }
            else { xs[l] = 2.f; ys[l] = 1.f; }
        }
        int since_flush = 0;
        while (n_active > 0) {
            t++;
            for (int g = 0; g < GROUPS; g++) {
                uint32_t ended = simd_step(xs, ys, cnt, g, capf);
                if (!ended) continue;
                uint32_t done = ended & active[g];
                if (done) simd_book_counts(cnt, acc, g, done, mirror);
                for (uint32_t m = ended; m; m &= m - 1) {
                    int l = GW * g + __builtin_ctz(m);
                    if (active[g] & (1u << (l % GW))) {
                        int n = t - start[l] + 1;
                        int64_t *row = local + lk[l] * 6;
                        uint32_t v = cnt[0][l];
                        if (mirror) {
                            int s1 = sym1[l], pooled = s1 == cap;
                            if (pooled) s1 = cap - 1;
                            int s2 = pooled ? cap - 1 : s1 - 1;
                            h[0]++; h[s1]--; h[s2]++;
                            lh[n]++; lh[n + 1]++; row[0] += 2; row[1] += 2 * n + 1;
                            for (int d = 0; d < 4; d++) row[2 + d] += 2 * ((v >> (8 * d)) & 255);
                            row[2]++; if (s1 < 4) row[2 + s1]--; if (s2 < 4) row[2 + s2]++;
                        } else {
                            lh[n]++; row[0]++; row[1] += n;
                            for (int d = 0; d < 4; d++) row[2 + d] += (v >> (8 * d)) & 255;
                        }
                        if (NEXT_FRACTION()) lk[l] = k;
                        else { active[g] &= ~(1u << (l % GW)); n_active--; xs[l] = 2.f; ys[l] = 1.f;
                               for (int c = 0; c < NCNT; c++) cnt[c][l] = 0; }
                    } else {
                        xs[l] = 2.f; ys[l] = 1.f;
                        for (int c = 0; c < NCNT; c++) cnt[c][l] = 0;
                    }
                }
            }
            if (++since_flush == FLUSH_STEPS) { simd_flush(acc, h); since_flush = 0; }
        }
        simd_flush(acc, h);
        copy_rows_out(per_den, local, n_local, tid, nt);
        free(local);
        #pragma omp critical
        { merge(hist, h, cap); merge(lengths, lh, MAXLEN); }
        #undef NEXT_FRACTION
    }
    for (int64_t q = q_lo; q <= q_hi; q++)
        for (int d = 0; d < 4; d++) if (d >= cap - 1) per_den[(q - q_lo) * 6 + 2 + d] = -1;
}
#else
const char *cf_simd_isa(void) { return "none"; }
#endif
