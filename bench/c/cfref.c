/* C references for the sweep benchmark: digit histogram (symbols min(a, cap) - 1), length histogram and
 * per-denominator rows (members, partial quotients, digits 1..4) of all p/q with q_lo <= q <= q_hi.
 * Built at run time by bench/run.py with gcc -O3 -march=native -fopenmp.
 *   cf_plain:    one Euclid chain at a time, uint32 division.
 *   cf_lockstep: LANES fractions in lockstep, float32 quotient (exact for q < 2^24 after one
 *                correction), packed per-lane counters for symbols 0..7, scalar pass for the rest.
 * Threads: denominators dealt cyclically to n_threads OpenMP threads, each with its own histograms. */
#include <stdint.h>
#include <string.h>
#include <stdlib.h>
#include <omp.h>

#define MAXLEN 129
#define LANES 64

static void merge(int64_t *dst, const int64_t *src, int n) { for (int i = 0; i < n; i++) dst[i] += src[i]; }

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

typedef struct { int64_t q; uint32_t p; } gen_t;
static inline int next_pair(gen_t *g, int64_t q_hi, int step) {
    g->p++;
    if (g->p >= g->q) { g->q += step; g->p = 1; }
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
        int32_t start[LANES]; int64_t lq[LANES]; uint8_t act[LANES];
        int64_t *rows = per_den;  /* rows indexed by q - q_lo; disjoint between threads */
        gen_t g = { q_lo + tid, 0 };
        if (g.q > q_hi) g.q = q_hi + 1;
        int n_active = 0;
        for (int l = 0; l < LANES; l++) {
            packed[l] = 0; start[l] = 0;
            if (g.q <= q_hi && next_pair(&g, q_hi, nt)) {
                xf[l] = (float)g.q; yf[l] = (float)g.p; lq[l] = g.q; act[l] = 1; n_active++;
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
                        int64_t *row = rows + (lq[l] - q_lo) * 6;
                        row[0]++; row[1] += n;
                        for (int d = 0; d < 4; d++) row[2 + d] += (v >> (8 * d)) & 255;
                        if (next_pair(&g, q_hi, nt)) { xf[l] = (float)g.q; yf[l] = (float)g.p; lq[l] = g.q; }
                        else { act[l] = 0; n_active--; xf[l] = 2.f; yf[l] = 1.f; }
                    } else { xf[l] = 2.f; yf[l] = 1.f; }
                    packed[l] = 0; start[l] = t + 1;
                }
            }
        }
        /* idle lanes counted symbol 1 (digit 2) in h only through s >= 8: nothing to undo */
        #pragma omp critical
        { merge(hist, h, cap); merge(lengths, lh, MAXLEN); }
    }
    for (int64_t q = q_lo; q <= q_hi; q++)
        for (int d = 0; d < 4; d++) if (d >= cap - 1) per_den[(q - q_lo) * 6 + 2 + d] = -1;
}
