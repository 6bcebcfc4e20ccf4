/* Compiled loops of the selection correction (docs/method.md#selection).
 *
 * The same arithmetic as the numpy code of selection/terms.py and selection/probit.py, one pass over
 * the objects instead of a dozen array passes: the per-object terms of one cut, log Phi from the
 * same cubic Hermite table (handed over by Python at load time), and the Plackett quadrature of the
 * bivariate normal orthant. Loaded with ctypes by selection/kernels.py; Python falls back to numpy
 * when this library was not built.
 *
 * Built with -ffp-contract=off: every sum and product is rounded as numpy rounds it, so the single-cut
 * terms equal the numpy ones bit for bit (tested), on every instruction set.
 *
 * The loops run over a (rows x cols) grid: walkers on rows, objects on columns. They read the latent
 * mean, offset and variance from a cg_source: arrays passed as (pointer, row stride, column stride),
 * strides in elements (0 broadcasts), or the affine latent model's coefficients and features, so that
 * the likelihood need not write those (walkers x objects) arrays first.
 */
#include <Python.h>
#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

/* The vectorised loops are compiled three times, for AVX-512, AVX2 and the x86-64 baseline (SSE2),
 * and the dynamic loader picks the one the processor runs; without fused multiply-adds all three
 * round identically. */
#if defined(__GNUC__) && !defined(__clang__) && defined(__x86_64__) && defined(__linux__)
#define CG_CLONES __attribute__((target_clones("arch=x86-64-v4", "arch=x86-64-v3", "default")))
#else
#define CG_CLONES
#endif
/* hand-written AVX for the table lookup of log Phi (chosen at run time) */
#if defined(__GNUC__) && defined(__x86_64__)
#define CG_X86 1
#include <immintrin.h>
#else
#define CG_X86 0
#endif

typedef ptrdiff_t idx;

#define CG_BLOCK 256 /* objects per block of the loops below (on the stack) */

/* ---------------------------------------------------------------- log Phi from the table */
static const double *table = NULL; /* (n_cells, 4): f0, d0, c2, c3 of each cell */
static idx n_cells = 0;
static double table_lo = 0.0, table_inv_step = 0.0, table_top = 0.0;

int cg_vector_lookup(int on);

void cg_set_table(const double *coef, idx cells, double lo, double inv_step)
{
    table = coef;
    n_cells = cells;
    table_lo = lo;
    table_inv_step = inv_step;
    table_top = (double)cells - 1e-9;
    cg_vector_lookup(1);
}

/* log Phi(x) for x below the table: the asymptotic series of the Mills ratio (|x| >= 40: the
 * neglected term 945/x^10 is below 1e-13). */
static double log_phi_tail(double x)
{
    double q = 1.0 / (x * x);
    double series = 1.0 + q * (-1.0 + q * (3.0 + q * (-15.0 + q * 105.0)));
    return -0.5 * x * x - log(-x) - 0.91893853320467274178 + log(series);
}

/* The table's cubic at n contiguous values (clamped to the table), without branches so that it
 * vectorises (AVX-512 and AVX2 gather the four coefficients); returns nonzero when a value lies below
 * the table or is NaN (to be fixed by the caller). */
CG_CLONES
static long table_values(idx n, const double *restrict x, double *restrict out)
{
    long below = 0; /* any value below the table, or NaN (an integer reduction vectorises) */
    for (idx i = 0; i < n; i++) {
        below |= x[i] >= table_lo ? 0 : 1;
        double t = x[i] - table_lo;
        t *= table_inv_step;
        t = t >= 0.0 ? t : 0.0; /* NaN too: a valid cell, overwritten below */
        t = t > table_top ? table_top : t;
        int cell = (int)t; /* t >= 0: truncation is floor; int32 lets AVX2 gather */
        t -= (double)cell;
        double value = table[4 * cell + 3];
        value *= t;
        value += table[4 * cell + 2];
        value *= t;
        value += table[4 * cell + 1];
        value *= t;
        value += table[4 * cell];
        out[i] = value;
    }
    return below;
}

#if CG_X86
/* The same with AVX, four values at a time: each cell's four coefficients are one 32-byte load and
 * a 4 x 4 transpose brings them into place (faster than four gathers: 1.3 against 2.0 ns per value
 * measured on an AMD EPYC); the same operations in the same order, so the same numbers. */
__attribute__((target("avx")))
static long table_values_avx(idx n, const double *restrict x, double *restrict out)
{
    const __m256d lo = _mm256_set1_pd(table_lo), inv = _mm256_set1_pd(table_inv_step);
    const __m256d top = _mm256_set1_pd(table_top), zero = _mm256_setzero_pd();
    int below = 0;
    idx i = 0;
    for (; i + 4 <= n; i += 4) {
        __m256d v = _mm256_loadu_pd(x + i);
        below |= _mm256_movemask_pd(_mm256_cmp_pd(v, lo, _CMP_NGE_UQ)); /* below, or NaN */
        __m256d t = _mm256_mul_pd(_mm256_sub_pd(v, lo), inv);
        t = _mm256_max_pd(t, zero); /* (t > 0) ? t : 0, NaN to 0 */
        t = _mm256_min_pd(t, top);
        __m128i cell = _mm256_cvttpd_epi32(t);
        t = _mm256_sub_pd(t, _mm256_cvtepi32_pd(cell));
        int c[4];
        _mm_storeu_si128((__m128i *)c, cell);
        __m256d r0 = _mm256_loadu_pd(table + 4 * (idx)c[0]), r1 = _mm256_loadu_pd(table + 4 * (idx)c[1]);
        __m256d r2 = _mm256_loadu_pd(table + 4 * (idx)c[2]), r3 = _mm256_loadu_pd(table + 4 * (idx)c[3]);
        __m256d u0 = _mm256_unpacklo_pd(r0, r1), u1 = _mm256_unpackhi_pd(r0, r1); /* f0 c2 / d0 c3 */
        __m256d u2 = _mm256_unpacklo_pd(r2, r3), u3 = _mm256_unpackhi_pd(r2, r3);
        __m256d value = _mm256_mul_pd(_mm256_permute2f128_pd(u1, u3, 0x31), t); /* c3 t */
        value = _mm256_add_pd(value, _mm256_permute2f128_pd(u0, u2, 0x31));     /* + c2 */
        value = _mm256_mul_pd(value, t);
        value = _mm256_add_pd(value, _mm256_permute2f128_pd(u1, u3, 0x20)); /* + d0 */
        value = _mm256_mul_pd(value, t);
        value = _mm256_add_pd(value, _mm256_permute2f128_pd(u0, u2, 0x20)); /* + f0 */
        _mm256_storeu_pd(out + i, value);
    }
    return below | (i < n ? table_values(n - i, x + i, out + i) : 0);
}
#endif

static int vector_lookup = 0; /* use table_values_avx (set at load time when the processor has AVX) */

/* Whether log Phi uses the AVX lookup: on = 1 / 0 to choose (0 for the portable loop; tests), -1 to
 * ask; returns the setting in force. */
int cg_vector_lookup(int on)
{
#if CG_X86
    if (on >= 0)
        vector_lookup = on && __builtin_cpu_supports("avx");
#else
    (void)on;
#endif
    return vector_lookup;
}

/* log Phi over n contiguous values: the table, then the rare values below it (or NaN) one by one. */
static void log_phi_block(idx n, const double *restrict x, double *restrict out)
{
#if CG_X86
    long below = vector_lookup ? table_values_avx(n, x, out) : table_values(n, x, out);
#else
    long below = table_values(n, x, out);
#endif
    if (below)
        for (idx i = 0; i < n; i++)
            if (!(x[i] >= table_lo))
                out[i] = x[i] != x[i] ? x[i] : log_phi_tail(x[i]);
}

void cg_log_phi(idx n, const double *x, double *out)
{
    for (idx start = 0; start < n; start += CG_BLOCK)
        log_phi_block(n - start < CG_BLOCK ? n - start : CG_BLOCK, x + start, out + start);
}

/* ---------------------------------------------------------------- where the loops read their inputs */
/* The latent mean mu, method offset delta and latent variance var of the objects, per row (walker)
 * and column (object): either three strided arrays, or (coef != NULL) the model's affine latent mass
 * computed block by block from per-row coefficients and per-object features,
 *   mu = ((alpha + beta s) + host[host_at]) - k_eff x,  delta = off[off_at],  var = sig2[sig2_at] + beta2 e,
 * in the order and rounding of model/mean.py and model/likelihood.py (so bit for bit the same). */
typedef struct {
    const double *mu, *delta, *var;
    idx mu_r, mu_c, de_r, de_c, va_r, va_c;
    const double *coef; /* rows x 4 (row stride coef_r): alpha, beta, k_eff, beta^2 */
    idx coef_r;
    const double *sig2; /* per-row table of intrinsic variances, column sig2_at[j] (NULL: 0) */
    idx sig2_r;
    const int32_t *sig2_at;
    const double *off; /* per-row table of method offsets (NULL: delta = 0) */
    idx off_r;
    const int32_t *off_at;
    const double *host; /* per-row table of host-type offsets (NULL: none) */
    idx host_r;
    const int32_t *host_at;
    const double *s, *x, *e; /* per object: centred host mass, lever arm, host-mass error^2 */
} cg_source;

/* The block [j0, j0 + m) of row r of a strided array, contiguous: a pointer into it when its
 * column stride is 1, else a copy in `buffer`. */
static const double *row_block(const double *a, idx a_r, idx a_c, idx r, idx j0, idx m, double *buffer)
{
    const double *p = a + r * a_r + j0 * a_c;
    if (a_c == 1)
        return p;
    for (idx j = 0; j < m; j++)
        buffer[j] = p[j * a_c];
    return buffer;
}

CG_CLONES
static void affine_mean(idx m, double alpha, double beta, double k_eff, const double *restrict s,
                        const double *restrict x, const double *restrict host, const int32_t *restrict host_at,
                        double *restrict mu)
{
    for (idx j = 0; j < m; j++)
        mu[j] = alpha + beta * s[j];
    if (host)
        for (idx j = 0; j < m; j++)
            mu[j] = mu[j] + host[host_at[j]];
    for (idx j = 0; j < m; j++)
        mu[j] = mu[j] - k_eff * x[j];
}

CG_CLONES
static void affine_variance(idx m, const double *restrict sig2, const int32_t *restrict sig2_at, double beta2,
                            const double *restrict e, double *restrict var)
{
    if (sig2_at)
        for (idx j = 0; j < m; j++)
            var[j] = sig2[sig2_at[j]] + beta2 * e[j];
    else
        for (idx j = 0; j < m; j++)
            var[j] = sig2[0] + beta2 * e[j];
}

static const double zeros[CG_BLOCK] = {0.0};

/* Points mu, delta, var at the block [j0, j0 + m) of row r (computed into b_mu, b_de, b_va, or
 * copied there when strided). */
static void load_block(const cg_source *in, idx r, idx j0, idx m, double *b_mu, double *b_de, double *b_va,
                       const double **mu, const double **delta, const double **var)
{
    if (!in->coef) {
        *mu = row_block(in->mu, in->mu_r, in->mu_c, r, j0, m, b_mu);
        *delta = row_block(in->delta, in->de_r, in->de_c, r, j0, m, b_de);
        *var = row_block(in->var, in->va_r, in->va_c, r, j0, m, b_va);
        return;
    }
    const double *c = in->coef + r * in->coef_r;
    affine_mean(m, c[0], c[1], c[2], in->s + j0, in->x + j0, in->host ? in->host + r * in->host_r : NULL,
                in->host_at ? in->host_at + j0 : NULL, b_mu);
    affine_variance(m, in->sig2 + r * in->sig2_r, in->sig2_at ? in->sig2_at + j0 : NULL, c[3], in->e + j0, b_va);
    if (in->off) {
        const double *off = in->off + r * in->off_r;
        const int32_t *at = in->off_at + j0;
        for (idx j = 0; j < m; j++)
            b_de[j] = off[at[j]];
        *delta = b_de;
    } else
        *delta = zeros;
    *mu = b_mu;
    *var = b_va;
}

/* ---------------------------------------------------------------- one cut per object */
CG_CLONES
static void observed_args(idx m, const double *restrict mu, const double *restrict delta, const double *restrict var,
                          const double *restrict lim, const double *restrict spread_free, double *restrict arg)
{
    for (idx j = 0; j < m; j++) {
        double spread = sqrt(var[j] + spread_free[j]);
        arg[j] = (mu[j] + (delta[j] - lim[j])) / spread;
    }
}

CG_CLONES
static void intrinsic_args(idx m, const double *restrict mu, const double *restrict delta, const double *restrict var,
                           const double *restrict lim, const double *restrict w2, const double *restrict m_obs, const double *restrict e2,
                           double *restrict num_arg, double *restrict norm_arg)
{
    for (idx j = 0; j < m; j++) {
        double vj = var[j];
        double above = mu[j] - lim[j];
        double total = vj + e2[j];
        double spread = total * w2[j];
        spread += vj * e2[j];
        spread *= total;
        spread = sqrt(spread);
        double arg = above * e2[j];
        arg += ((m_obs[j] - delta[j]) - lim[j]) * vj;
        num_arg[j] = arg / spread;
        norm_arg[j] = above / sqrt(vj + w2[j]);
    }
}

CG_CLONES
static void intrinsic_norm_args(idx m, const double *restrict mu, const double *restrict var, const double *restrict lim,
                                const double *restrict w2, double *restrict norm_arg)
{
    for (idx j = 0; j < m; j++)
        norm_arg[j] = (mu[j] - lim[j]) / sqrt(var[j] + w2[j]);
}

static void difference(idx m, const double *restrict a, const double *restrict b, double *restrict out)
{
    for (idx j = 0; j < m; j++)
        out[j] = a[j] - b[j];
}

/* One observed-mass cut: out = 0 - log Phi((mu + (delta - lim)) / sqrt(var + spread_free)).
 * lim and spread_free (= e^2 + w^2) per object (contiguous, length cols). */
void cg_cut_observed(idx rows, idx cols, const cg_source *in, const double *lim, const double *spread_free,
                     double *out, idx out_r)
{
    double b_mu[CG_BLOCK], b_de[CG_BLOCK], b_va[CG_BLOCK], arg[CG_BLOCK], value[CG_BLOCK];
    const double *mu, *delta, *var;
    for (idx r = 0; r < rows; r++)
        for (idx j0 = 0; j0 < cols; j0 += CG_BLOCK) {
            idx m = cols - j0 < CG_BLOCK ? cols - j0 : CG_BLOCK;
            load_block(in, r, j0, m, b_mu, b_de, b_va, &mu, &delta, &var);
            observed_args(m, mu, delta, var, lim + j0, spread_free + j0, arg);
            log_phi_block(m, arg, value);
            difference(m, zeros, value, out + r * out_r + j0);
        }
}

/* One intrinsic cut: log Phi(numerator argument) - log Phi((mu - lim) / sqrt(var + w2)), with the
 * numerator argument ((mu - lim) e2 + (m_obs - delta - lim) var) / sqrt((var + e2)((var + e2) w2 + var e2)).
 * lim, w2, m_obs, e2 per object (contiguous, length cols); numerator 0 skips the numerator. */
void cg_cut_intrinsic(idx rows, idx cols, const cg_source *in,
                      const double *lim, const double *w2, const double *m_obs, const double *e2,
                      int numerator, double *out, idx out_r)
{
    double b_mu[CG_BLOCK], b_de[CG_BLOCK], b_va[CG_BLOCK], arg[CG_BLOCK], num[CG_BLOCK] = {0.0};
    double norm[CG_BLOCK], value[CG_BLOCK];
    const double *mu, *delta, *var;
    for (idx r = 0; r < rows; r++)
        for (idx j0 = 0; j0 < cols; j0 += CG_BLOCK) {
            idx m = cols - j0 < CG_BLOCK ? cols - j0 : CG_BLOCK;
            load_block(in, r, j0, m, b_mu, b_de, b_va, &mu, &delta, &var);
            if (numerator) {
                intrinsic_args(m, mu, delta, var, lim + j0, w2 + j0, m_obs + j0, e2 + j0, arg, norm);
                log_phi_block(m, arg, num);
            } else
                intrinsic_norm_args(m, mu, var, lim + j0, w2 + j0, norm);
            log_phi_block(m, norm, value);
            difference(m, num, value, out + r * out_r + j0);
        }
}

/* ---------------------------------------------------------------- bivariate normal orthant */
/* exp(x) by Cody-Waite reduction and a degree-11 Taylor polynomial (relative error < 1e-14), in
 * plain arithmetic so that the quadrature loop vectorises; x is clamped to [-708, 708]. */
static inline double exp_poly(double x)
{
    x = x > -708.0 ? x : -708.0; /* the forms of maxpd and minpd (NaN becomes -708) */
    x = x < 708.0 ? x : 708.0;
    const double shift = 6755399441055744.0; /* 1.5 * 2^52: adding it rounds to an integer */
    double kd = x * 1.4426950408889634074 + shift;
    uint64_t ki;
    memcpy(&ki, &kd, sizeof ki);
    kd -= shift;
    double r = x - kd * 6.93147180369123816490e-01;
    r -= kd * 1.90821492927058770002e-10;
    /* Taylor to r^11 by Estrin's scheme (short dependency chains) */
    double r2 = r * r, r4 = r2 * r2, r8 = r4 * r4;
    double p01 = 1.0 + r, p23 = 0.5 + r * (1.0 / 6.0), p45 = 1.0 / 24.0 + r * (1.0 / 120.0);
    double p67 = 1.0 / 720.0 + r * (1.0 / 5040.0), p89 = 1.0 / 40320.0 + r * (1.0 / 362880.0);
    double p1011 = 1.0 / 3628800.0 + r * (1.0 / 39916800.0);
    double p = (p01 + r2 * p23) + r4 * (p45 + r2 * p67) + r8 * (p89 + r2 * p1011);
    uint64_t bits = (ki + 1023u) << 52;
    double scale;
    memcpy(&scale, &bits, sizeof scale);
    return p * scale;
}

/* log(x) for x > 0 in plain arithmetic (vectorises): x = 2^e m with m in [1/sqrt 2, sqrt 2),
 * log m = 2 atanh(f), f = (m - 1)/(m + 1), |f| <= 0.1716, series to f^19 (error < 1e-16). x below the
 * smallest normal number is taken as that number (log = -708.4); x = 0 is the caller's business. */
static inline double log_poly(double x)
{
    x = x > 2.2250738585072014e-308 ? x : 2.2250738585072014e-308;
    uint64_t bits;
    memcpy(&bits, &x, sizeof bits);
    uint64_t mantissa = (bits & 0x000FFFFFFFFFFFFFull) | 0x3FF0000000000000ull;
    uint64_t exponent = (bits >> 52) | 0x4330000000000000ull; /* 2^52 + biased exponent */
    double m, e;
    memcpy(&m, &mantissa, sizeof m);
    memcpy(&e, &exponent, sizeof e);
    e -= 4503599627370496.0 + 1023.0;
    double big = m > 1.4142135623730951 ? 1.0 : 0.0;
    m *= 1.0 - 0.5 * big;
    e += big;
    double f = (m - 1.0) / (m + 1.0), f2 = f * f;
    double p = 1.0 / 19.0;
    p = p * f2 + 1.0 / 17.0;
    p = p * f2 + 1.0 / 15.0;
    p = p * f2 + 1.0 / 13.0;
    p = p * f2 + 1.0 / 11.0;
    p = p * f2 + 1.0 / 9.0;
    p = p * f2 + 1.0 / 7.0;
    p = p * f2 + 1.0 / 5.0;
    p = p * f2 + 1.0 / 3.0;
    p = p * f2 + 1.0;
    return e * 6.93147180369123816490e-01 + (2.0 * f * p + e * 1.90821492927058770002e-10);
}

/* Gauss-Legendre rules on [0, 1] (nodes, half weights), handed over by Python at load time. */
#define CG_MAX_RULES 4
static int rule_order[CG_MAX_RULES];
static const double *rule_t[CG_MAX_RULES], *rule_w[CG_MAX_RULES];
static double rho_switch = 0.925, rho_more_nodes = 0.8;

void cg_set_rule(int slot, int order, const double *t, const double *half_weight)
{
    if (slot < 0 || slot >= CG_MAX_RULES)
        return;
    rule_order[slot] = order;
    rule_t[slot] = t;
    rule_w[slot] = half_weight;
}

void cg_set_rho_limits(double switch_to_identical, double more_nodes)
{
    rho_switch = switch_to_identical;
    rho_more_nodes = more_nodes;
}

static int rule_slot(int order)
{
    for (int s = 0; s < CG_MAX_RULES; s++)
        if (rule_order[s] == order)
            return s;
    return -1;
}

/* Per object of a block: the reference exponent (the maximum of -Q(r) over [0, rho], at r* in
 * closed form), and the coefficients of -Q(r) (1 - r^2) = c1 t - c2 at r = rho t. */
CG_CLONES
static void orthant_setup(idx m, const double *restrict h, const double *restrict k,
                          const double *restrict rho, double *restrict c1, double *restrict c2,
                          double *restrict rho2, double *restrict ref)
{
    for (idx i = 0; i < m; i++) {
        double a = h[i] * h[i] + k[i] * k[i], b = 2.0 * h[i] * k[i];
        double disc = a * a - b * b;
        disc = disc > 0.0 ? disc : 0.0;
        double root = a + sqrt(disc);
        double r_star = root > 0.0 ? b / (root > 0.0 ? root : 1.0) : 0.0;
        r_star = r_star > 0.0 ? r_star : 0.0;
        r_star = r_star < rho[i] ? r_star : rho[i];
        ref[i] = -0.5 * (a - b * r_star) / (1.0 - r_star * r_star);
        c1[i] = 0.5 * b * rho[i];
        c2[i] = 0.5 * a;
        rho2[i] = rho[i] * rho[i];
    }
}

/* acc[i] = sum over nodes of half_weight[j] exp((t_j c1 - c2) / (1 - t_j^2 rho2) - ref) / sqrt(1 - t_j^2 rho2). */
CG_CLONES
static void plackett_sum(idx m, int slot, const double *restrict c1, const double *restrict c2,
                         const double *restrict rho2, const double *restrict ref, double *restrict acc)
{
    const double *t = rule_t[slot], *w = rule_w[slot];
    for (idx i = 0; i < m; i++)
        acc[i] = 0.0;
    for (int j = 0; j < rule_order[slot]; j++) {
        double tj = t[j], tj2 = t[j] * t[j], wj = w[j];
        for (idx i = 0; i < m; i++) {
            double inv = 1.0 / (1.0 - tj2 * rho2[i]);
            double exponent = (tj * c1[i] - c2[i]) * inv - ref[i];
            acc[i] += wj * (exp_poly(exponent) * sqrt(inv));
        }
    }
}

/* log[Phi(-h)Phi(-k) + exp(ref) acc rho / 2 pi], NaN to -inf, clipped to Slepian's bounds. */
CG_CLONES
static void orthant_finish(idx m, const double *restrict log_h, const double *restrict log_k,
                           const double *restrict rho, const double *restrict ref,
                           const double *restrict acc, double *restrict out)
{
    for (idx i = 0; i < m; i++) {
        double lo = log_h[i] + log_k[i], hi = log_h[i] < log_k[i] ? log_h[i] : log_k[i];
        double scaled = acc[i] * rho[i] * 0.15915494309189533577;
        double log_int = scaled > 0.0 ? ref[i] + log_poly(scaled) : -INFINITY;
        double top = log_int > lo ? log_int : lo, low = log_int > lo ? lo : log_int;
        double value = top + log_poly(1.0 + exp_poly(low - top));
        value = value == value ? value : -INFINITY;
        value = value > lo ? value : lo;
        out[i] = value < hi ? value : hi;
    }
}

static void negate(idx m, const double *restrict x, double *restrict out)
{
    for (idx i = 0; i < m; i++)
        out[i] = -x[i];
}

/* log P(X > h, Y > k) for a block of m <= CG_BLOCK objects with rho < rho_switch (from rho = 0). */
static void orthant_block(idx m, const double *h, const double *k, const double *rho, int slot,
                          double *out)
{
    double neg[CG_BLOCK], log_h[CG_BLOCK], log_k[CG_BLOCK];
    double c1[CG_BLOCK], c2[CG_BLOCK], rho2[CG_BLOCK], ref[CG_BLOCK], acc[CG_BLOCK];
    negate(m, h, neg);
    log_phi_block(m, neg, log_h);
    negate(m, k, neg);
    log_phi_block(m, neg, log_k);
    orthant_setup(m, h, k, rho, c1, c2, rho2, ref);
    plackett_sum(m, slot, c1, c2, rho2, ref, acc);
    orthant_finish(m, log_h, log_k, rho, ref, acc, out);
}

/* 1-d: log P(X > h, Y > k) for rho < rho_switch with the rule of `order` nodes; -1 if no such rule. */
int cg_orthant_independent(idx n, const double *h, const double *k, const double *rho, int order,
                           double *out)
{
    int slot = rule_slot(order);
    if (slot < 0)
        return -1;
    for (idx start = 0; start < n; start += CG_BLOCK)
        orthant_block(n - start < CG_BLOCK ? n - start : CG_BLOCK, h + start, k + start, rho + start,
                      slot, out + start);
    return 0;
}

/* Two cuts on one object (kinds "oo", "io", "ii" of selection/terms.py): the (h, k, rho) of the
 * normaliser and of the numerator (an orthant for "ii", one probit for "io", none for "oo"). */
enum { TWO_OO = 0, TWO_IO = 1, TWO_II = 2 };

CG_CLONES
static void two_cut_args(int kind, idx m, const double *restrict mu, const double *restrict delta,
                         const double *restrict var, const double *restrict lim_a,
                         const double *restrict lim_b, const double *restrict w2a,
                         const double *restrict w2b, const double *restrict m_obs,
                         const double *restrict e2, double *restrict h, double *restrict k,
                         double *restrict rho, double *restrict nh, double *restrict nk,
                         double *restrict nrho)
{
    for (idx i = 0; i < m; i++) {
        double v = var[i];
        if (kind == TWO_OO) {
            double spread = v + e2[i], var1 = spread + w2a[i], var2 = spread + w2b[i];
            double centre = mu[i] + delta[i];
            rho[i] = spread / sqrt(var1 * var2);
            h[i] = (lim_a[i] - centre) / sqrt(var1);
            k[i] = (lim_b[i] - centre) / sqrt(var2);
            continue;
        }
        double total = v + e2[i], post = v * e2[i] / total;
        double mu_p = (mu[i] * e2[i] + (m_obs[i] - delta[i]) * v) / total;
        double var1 = v + w2a[i];
        if (kind == TWO_IO) {
            double var2 = v + e2[i] + w2b[i];
            rho[i] = v / sqrt(var1 * var2);
            h[i] = (lim_a[i] - mu[i]) / sqrt(var1);
            k[i] = (lim_b[i] - mu[i] - delta[i]) / sqrt(var2);
            nh[i] = (mu_p - lim_a[i]) / sqrt(post + w2a[i]); /* the numerator's probit argument */
        } else {
            double var2 = v + w2b[i], nvar1 = post + w2a[i], nvar2 = post + w2b[i];
            rho[i] = v / sqrt(var1 * var2);
            h[i] = (lim_a[i] - mu[i]) / sqrt(var1);
            k[i] = (lim_b[i] - mu[i]) / sqrt(var2);
            nrho[i] = post / sqrt(nvar1 * nvar2);
            nh[i] = (lim_a[i] - mu_p) / sqrt(nvar1);
            nk[i] = (lim_b[i] - mu_p) / sqrt(nvar2);
        }
    }
}

/* The largest correlation of a block (normaliser and, for "ii", numerator), or NaN when one is
 * NaN or reaches rho_switch (then the caller falls back to numpy). */
CG_CLONES
static double block_max_rho(int kind, idx m, const double *restrict var, const double *restrict w2a,
                            const double *restrict w2b, const double *restrict e2)
{
    double largest = 0.0, beyond = 0.0;
    for (idx i = 0; i < m; i++) {
        double v = var[i], rho, nrho = 0.0;
        if (kind == TWO_OO)
            rho = (v + e2[i]) / sqrt((v + e2[i] + w2a[i]) * (v + e2[i] + w2b[i]));
        else if (kind == TWO_IO)
            rho = v / sqrt((v + w2a[i]) * (v + e2[i] + w2b[i]));
        else {
            double post = v * e2[i] / (v + e2[i]);
            rho = v / sqrt((v + w2a[i]) * (v + w2b[i]));
            nrho = post / sqrt((post + w2a[i]) * (post + w2b[i]));
        }
        double top = rho > nrho ? rho : nrho;
        largest = top > largest ? top : largest;
        beyond += (rho < rho_switch && nrho < rho_switch) ? 0.0 : 1.0; /* NaN counts */
    }
    return beyond > 0.0 ? NAN : largest;
}

/* out = log numerator - log normaliser of two cuts per object, over (rows x cols). Returns 0, or -1
 * when some correlation reaches rho_switch (or is NaN) and the caller must use its numpy code (the
 * integral from rho = 1 is not compiled). The quadrature order is one for the whole call, as in
 * probit.log_upper_orthant: 12 nodes when every rho < rho_more_nodes, else 20. */
int cg_two_cuts(int kind, idx rows, idx cols, const cg_source *in, const double *lim_a, const double *lim_b, const double *w2a, const double *w2b,
                const double *m_obs, const double *e2, double *out, idx out_r)
{
    double b_mu[CG_BLOCK], b_de[CG_BLOCK], b_va[CG_BLOCK];
    double h[CG_BLOCK], k[CG_BLOCK], rho[CG_BLOCK], nh[CG_BLOCK], nk[CG_BLOCK], nrho[CG_BLOCK];
    double num[CG_BLOCK], norm[CG_BLOCK];
    const double *mu, *delta, *var;
    double largest = 0.0; /* the largest correlation decides the rule, or the fallback */
    for (idx r = 0; r < rows; r++)
        for (idx j0 = 0; j0 < cols; j0 += CG_BLOCK) {
            idx m = cols - j0 < CG_BLOCK ? cols - j0 : CG_BLOCK;
            load_block(in, r, j0, m, b_mu, b_de, b_va, &mu, &delta, &var);
            double top = block_max_rho(kind, m, var, w2a + j0, w2b + j0, e2 + j0);
            if (top != top)
                return -1;
            largest = top > largest ? top : largest;
        }
    int slot = rule_slot(largest < rho_more_nodes ? 12 : 20);
    if (slot < 0)
        return -1;
    for (idx r = 0; r < rows; r++)
        for (idx j0 = 0; j0 < cols; j0 += CG_BLOCK) {
            idx m = cols - j0 < CG_BLOCK ? cols - j0 : CG_BLOCK;
            load_block(in, r, j0, m, b_mu, b_de, b_va, &mu, &delta, &var);
            two_cut_args(kind, m, mu, delta, var, lim_a + j0, lim_b + j0,
                         w2a + j0, w2b + j0, m_obs + j0, e2 + j0, h, k, rho, nh, nk, nrho);
            orthant_block(m, h, k, rho, slot, norm);
            if (kind == TWO_OO)
                for (idx i = 0; i < m; i++)
                    num[i] = 0.0;
            else if (kind == TWO_IO)
                log_phi_block(m, nh, num);
            else
                orthant_block(m, nh, nk, nrho, slot, num);
            difference(m, num, norm, out + r * out_r + j0);
        }
    return 0;
}

/* ---------------------------------------------------------------- an (empty) extension module */
static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_kernels",
                                    "Compiled loops of the selection correction, called through ctypes.",
                                    -1, NULL};

PyMODINIT_FUNC PyInit__kernels(void) { return PyModule_Create(&module); }
