/*
 * synth - a seeded generator of an invented person-period registry extract,
 * used to demonstrate and benchmark millrace on files of any size.
 *
 *   synth --rows N [--seed S] [--out PATH] [--zstd [LEVEL]] [--truth PATH]
 *
 * Every value is invented: no person, place or organisation stands behind
 * any row.  The two outcome columns are drawn from GLMs whose coefficients
 * are known (--truth writes them, with the model lines that fit them), so a
 * fit of the output can be checked against the truth at any size.
 *
 * Columns (about 38 bytes a row):
 *   age_band     "00-04" .. "80-84", "85+"      age         years, 1 dp, in band
 *   sex          "F", "M"                       followup    person-years, 0.10..2.00
 *   region       "R01" .. "R40"                 bmi         1 dp; ~3% empty (missing)
 *   deprivation  1 .. 5                         events      Poisson count, exposure followup
 *   year         2010 .. 2024                   flag        0/1, logistic in age, sex,
 *                                                           deprivation, bmi
 * The same seed and row count give the same bytes, compressed or not.
 *
 * Build: gcc -std=c11 -O2 -Wall -Wextra -Werror tools/synth.c -lzstd -lm \
 *            -o build/synth
 *
 * Speed matters more than elegance here because the output is meant to reach
 * tens of gigabytes: every field is copied from a pre-formatted table of
 * short strings, the linear predictors are products of pre-computed
 * exponentials, and the only libm call per row is the exp() of the Poisson
 * sampler.
 */
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <zstd.h>

/* ------------------------------------------------------------------ */
/* The invented scenario.                                              */

enum {
    N_BANDS = 18,
    N_SEXES = 2,
    N_REGIONS = 40,
    N_DEPRIVATION = 5,
    FIRST_YEAR = 2010,
    N_YEARS = 15,
    YEAR_CENTRE = 2017,
    BMI_MIN_TENTHS = 140,
    BMI_MAX_TENTHS = 600,
    N_BMI = BMI_MAX_TENTHS - BMI_MIN_TENTHS + 1,
    FOLLOWUP_MIN_HUNDREDTHS = 10,
    FOLLOWUP_MAX_HUNDREDTHS = 200,
    N_AGE_TENTHS = 1000 /* 0.0 .. 99.9 */
};

/* Relative sizes of the age bands: a greying population, so that the
 * oldest bands are thin but never nearly empty. */
static const double BAND_WEIGHT[N_BANDS] = {
    5.6, 5.8, 5.9, 5.8, 6.3, 6.7, 6.8, 6.6, 6.4,
    6.6, 6.9, 6.6, 5.9, 5.4, 5.0, 3.6, 2.5, 2.4
};
static const double FEMALE_SHARE = 0.51;

/* Unequal region sizes keep the region estimates from all having the same
 * standard error, which would hide indexing bugs in a fitter. */
static const double REGION_WEIGHT[N_REGIONS] = {
    1.18, 1.36, 1.06, 0.97, 1.80, 1.54, 1.64, 1.98, 1.61, 1.27,
    1.07, 0.95, 0.46, 0.48, 1.66, 1.59, 0.99, 1.24, 2.11, 2.10,
    0.69, 1.76, 0.57, 1.80, 1.30, 1.09, 1.71, 1.40, 1.84, 1.89,
    0.92, 1.69, 0.79, 1.30, 0.98, 1.19, 1.80, 1.17, 2.17, 0.73
};

/* bmi: log-normal, median 26, on a 0.1 grid from 14.0 to 60.0. */
static const double BMI_LOG_MEDIAN_VALUE = 26.0;
static const double BMI_LOG_SD = 0.17;
static const double BMI_MISSING_SHARE = 0.03;

/* events ~ Poisson(followup * exp(eta)),
 * eta = EV_INTERCEPT + EV_BAND[band] + EV_SEX_M*[sex=M] + EV_REGION[region]
 *       + EV_DEPRIVATION*deprivation + EV_YEAR*(year - YEAR_CENTRE). */
static const double EV_INTERCEPT = -3.2;
static const double EV_BAND[N_BANDS] = {
    0.00, -0.35, -0.30, 0.05, 0.15, 0.20, 0.30, 0.40, 0.55,
    0.70, 0.90, 1.10, 1.35, 1.60, 1.90, 2.25, 2.60, 3.00
};
static const double EV_SEX_M = 0.22;
static const double EV_REGION[N_REGIONS] = {
     0.000, -0.093,  0.027, -0.322,  0.051, -0.058, -0.131,  0.018,
    -0.351, -0.029, -0.132,  0.074,  0.080, -0.167, -0.168, -0.265,
    -0.142,  0.057,  0.154,  0.041,  0.006, -0.156,  0.035, -0.147,
     0.043, -0.036,  0.154,  0.036,  0.246, -0.073,  0.136,  0.041,
     0.305, -0.353,  0.157, -0.184, -0.156, -0.003, -0.272, -0.215
};
static const double EV_DEPRIVATION = 0.11;
static const double EV_YEAR = -0.015;

/* flag ~ Bernoulli(1 / (1 + exp(-eta))),
 * eta = FL_INTERCEPT + FL_AGE*age + FL_SEX_M*[sex=M] + FL_DEPRIVATION*dep
 *       + FL_BMI*bmi   (bmi replaced by its distribution mean when missing) */
static const double FL_INTERCEPT = -4.2;
static const double FL_AGE = 0.025;
static const double FL_SEX_M = -0.35;
static const double FL_DEPRIVATION = 0.18;
static const double FL_BMI = 0.055;

static const char HEADER[] =
    "age_band,sex,region,deprivation,year,age,followup,bmi,events,flag\n";

/* ------------------------------------------------------------------ */
/* Random numbers: xoshiro256** seeded through splitmix64.             */

typedef struct rng { uint64_t s[4]; } rng;

static uint64_t splitmix64(uint64_t *state)
{
    uint64_t z = (*state += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

static void rng_seed(rng *r, uint64_t seed)
{
    for (int i = 0; i < 4; i++)
        r->s[i] = splitmix64(&seed);
}

static inline uint64_t rotl(uint64_t x, int k)
{
    return (x << k) | (x >> (64 - k));
}

static inline uint64_t rng_next(rng *r)
{
    uint64_t *s = r->s;
    uint64_t result = rotl(s[1] * 5, 7) * 9;
    uint64_t t = s[1] << 17;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = rotl(s[3], 45);
    return result;
}

/* The outcome draws use all 53 bits so that the conditional distributions
 * behind the published coefficients are as exact as a double allows. */
static inline double unit_double(uint64_t bits)
{
    return (double)(bits >> 11) * 0x1.0p-53;
}

/* Lemire's multiply-shift: bias of at most n / 2^32, irrelevant for the
 * covariate distributions, which the truth does not depend on. */
static inline uint32_t below(uint32_t bits32, uint32_t n)
{
    return (uint32_t)(((uint64_t)bits32 * n) >> 32);
}

/* ------------------------------------------------------------------ */
/* Walker/Vose alias tables: one draw of any discrete distribution in  */
/* constant time, which a cumulative search over 461 bmi values is not. */

typedef struct alias_table {
    uint32_t n;
    uint64_t *keep; /* threshold on the low 32 bits, scaled to 2^32 */
    uint32_t *other;
} alias_table;

static int alias_build(alias_table *t, const double *weight, uint32_t n)
{
    double total = 0.0;
    for (uint32_t i = 0; i < n; i++)
        total += weight[i];
    t->n = n;
    t->keep = malloc(n * sizeof *t->keep);
    t->other = malloc(n * sizeof *t->other);
    double *scaled = malloc(n * sizeof *scaled);
    uint32_t *small = malloc(n * sizeof *small);
    uint32_t *large = malloc(n * sizeof *large);
    if (!t->keep || !t->other || !scaled || !small || !large || total <= 0.0) {
        free(scaled), free(small), free(large);
        return -1;
    }
    uint32_t ns = 0, nl = 0;
    for (uint32_t i = 0; i < n; i++) {
        scaled[i] = weight[i] * n / total;
        if (scaled[i] < 1.0)
            small[ns++] = i;
        else
            large[nl++] = i;
    }
    while (ns > 0 && nl > 0) {
        uint32_t s = small[--ns], l = large[nl - 1];
        t->keep[s] = (uint64_t)(scaled[s] * 4294967296.0);
        t->other[s] = l;
        scaled[l] -= 1.0 - scaled[s];
        if (scaled[l] < 1.0) {
            nl--;
            small[ns++] = l;
        }
    }
    /* Leftovers are 1 up to rounding: they always keep themselves. */
    while (nl > 0) {
        uint32_t l = large[--nl];
        t->keep[l] = UINT64_C(1) << 32;
        t->other[l] = l;
    }
    while (ns > 0) {
        uint32_t s = small[--ns];
        t->keep[s] = UINT64_C(1) << 32;
        t->other[s] = s;
    }
    free(scaled), free(small), free(large);
    return 0;
}

static void alias_free(alias_table *t)
{
    free(t->keep);
    free(t->other);
}

static inline uint32_t alias_draw(const alias_table *t, uint64_t bits)
{
    uint32_t i = below((uint32_t)(bits >> 32), t->n);
    return (bits & 0xFFFFFFFFu) < t->keep[i] ? i : t->other[i];
}

/* ------------------------------------------------------------------ */
/* Pre-formatted fields.  Each is at most 8 bytes, so writing one is a  */
/* fixed 8-byte copy followed by advancing the cursor by its length.    */

typedef struct piece {
    char s[8];
    unsigned char len;
} piece;

static void piece_set(piece *p, const char *text)
{
    size_t len = strlen(text);
    memset(p->s, 0, sizeof p->s);
    memcpy(p->s, text, len);
    p->len = (unsigned char)len;
}

static inline char *piece_put(char *out, const piece *p)
{
    memcpy(out, p->s, 8);
    return out + p->len;
}

/* Writes "W.F," where the value is `scaled` / 10^decimals. */
static void fixed_text(char *text, unsigned scaled, int decimals)
{
    unsigned unit = decimals == 1 ? 10u : 100u;
    unsigned whole = scaled / unit, frac = scaled % unit;
    char *p = text;
    if (whole >= 10)
        *p++ = (char)('0' + whole / 10);
    *p++ = (char)('0' + whole % 10);
    *p++ = '.';
    if (decimals == 2)
        *p++ = (char)('0' + frac / 10);
    *p++ = (char)('0' + frac % 10);
    *p++ = ',';
    *p = '\0';
}

static void band_label(char *text, int band)
{
    if (band == N_BANDS - 1) {
        strcpy(text, "85+");
        return;
    }
    int lo = band * 5, hi = lo + 4;
    text[0] = (char)('0' + lo / 10);
    text[1] = (char)('0' + lo % 10);
    text[2] = '-';
    text[3] = (char)('0' + hi / 10);
    text[4] = (char)('0' + hi % 10);
    text[5] = '\0';
}

typedef struct tables {
    piece band[N_BANDS];
    piece sex_region_dep[N_SEXES * N_REGIONS * N_DEPRIVATION];
    piece year[N_YEARS];
    piece age[N_AGE_TENTHS];
    piece followup[FOLLOWUP_MAX_HUNDREDTHS + 1];
    piece bmi[N_BMI + 1]; /* last entry: the empty (missing) cell */
    piece tail[10][2];    /* "events,flag\n" for events 0..9 */
    double followup_value[FOLLOWUP_MAX_HUNDREDTHS + 1];

    alias_table band_draw, region_draw, bmi_draw;
    double bmi_mean;

    /* exp(eta) of the events model as a product of per-term factors */
    double ev_band[N_BANDS], ev_sex[N_SEXES], ev_region[N_REGIONS];
    double ev_dep[N_DEPRIVATION + 1], ev_year[N_YEARS];
    /* exp(-eta) of the flag model, likewise */
    double fl_age[N_AGE_TENTHS], fl_sex[N_SEXES], fl_dep[N_DEPRIVATION + 1];
    double fl_bmi[N_BMI + 1];
} tables;

static void build_text_tables(tables *t)
{
    char text[48]; /* room for any int, which the compiler cannot rule out */
    for (int b = 0; b < N_BANDS; b++) {
        band_label(text, b);
        strcat(text, ",");
        piece_set(&t->band[b], text);
    }
    for (int s = 0; s < N_SEXES; s++)
        for (int r = 0; r < N_REGIONS; r++)
            for (int d = 0; d < N_DEPRIVATION; d++) {
                snprintf(text, sizeof text, "%c,R%02d,%d,", s ? 'M' : 'F', r + 1, d + 1);
                piece_set(&t->sex_region_dep[(s * N_REGIONS + r) * N_DEPRIVATION + d], text);
            }
    for (int y = 0; y < N_YEARS; y++) {
        snprintf(text, sizeof text, "%d,", FIRST_YEAR + y);
        piece_set(&t->year[y], text);
    }
    for (unsigned a = 0; a < N_AGE_TENTHS; a++) {
        fixed_text(text, a, 1);
        piece_set(&t->age[a], text);
    }
    for (unsigned f = 0; f <= FOLLOWUP_MAX_HUNDREDTHS; f++) {
        fixed_text(text, f, 2);
        piece_set(&t->followup[f], text);
        t->followup_value[f] = f / 100.0;
    }
    for (unsigned i = 0; i < N_BMI; i++) {
        fixed_text(text, BMI_MIN_TENTHS + i, 1);
        piece_set(&t->bmi[i], text);
    }
    piece_set(&t->bmi[N_BMI], ",");
    for (int e = 0; e < 10; e++)
        for (int f = 0; f < 2; f++) {
            snprintf(text, sizeof text, "%d,%d\n", e, f);
            piece_set(&t->tail[e][f], text);
        }
}

static double bmi_value(unsigned index)
{
    return (BMI_MIN_TENTHS + index) / 10.0;
}

static int build_bmi_distribution(tables *t)
{
    double weight[N_BMI];
    double mu = log(BMI_LOG_MEDIAN_VALUE), total = 0.0, sum = 0.0;
    for (unsigned i = 0; i < N_BMI; i++) {
        double x = bmi_value(i), z = (log(x) - mu) / BMI_LOG_SD;
        weight[i] = exp(-0.5 * z * z) / x;
        total += weight[i];
        sum += weight[i] * x;
    }
    /* The flag of a row with missing bmi is drawn at the mean of exactly
     * this discrete distribution, so that mean is what --truth reports. */
    t->bmi_mean = sum / total;
    return alias_build(&t->bmi_draw, weight, N_BMI);
}

static void build_predictor_tables(tables *t)
{
    for (int b = 0; b < N_BANDS; b++)
        t->ev_band[b] = exp(EV_INTERCEPT + EV_BAND[b]);
    t->ev_sex[0] = 1.0;
    t->ev_sex[1] = exp(EV_SEX_M);
    for (int r = 0; r < N_REGIONS; r++)
        t->ev_region[r] = exp(EV_REGION[r]);
    for (int d = 0; d <= N_DEPRIVATION; d++)
        t->ev_dep[d] = exp(EV_DEPRIVATION * d);
    for (int y = 0; y < N_YEARS; y++)
        t->ev_year[y] = exp(EV_YEAR * (FIRST_YEAR + y - YEAR_CENTRE));

    for (int a = 0; a < N_AGE_TENTHS; a++)
        t->fl_age[a] = exp(-(FL_INTERCEPT + FL_AGE * (a / 10.0)));
    t->fl_sex[0] = 1.0;
    t->fl_sex[1] = exp(-FL_SEX_M);
    for (int d = 0; d <= N_DEPRIVATION; d++)
        t->fl_dep[d] = exp(-FL_DEPRIVATION * d);
    for (unsigned i = 0; i < N_BMI; i++)
        t->fl_bmi[i] = exp(-FL_BMI * bmi_value(i));
    t->fl_bmi[N_BMI] = exp(-FL_BMI * t->bmi_mean);
}

static int tables_build(tables *t)
{
    memset(t, 0, sizeof *t);
    build_text_tables(t);
    if (alias_build(&t->band_draw, BAND_WEIGHT, N_BANDS) != 0)
        return -1;
    if (alias_build(&t->region_draw, REGION_WEIGHT, N_REGIONS) != 0)
        return -1;
    if (build_bmi_distribution(t) != 0)
        return -1;
    build_predictor_tables(t);
    return 0;
}

static void tables_free(tables *t)
{
    alias_free(&t->band_draw);
    alias_free(&t->region_draw);
    alias_free(&t->bmi_draw);
}

/* ------------------------------------------------------------------ */
/* Row generation.                                                      */

/* Inversion: with means below about 6 the expected number of steps is
 * under one, and most rows stop at the zero test.  That test, u < exp(-mean),
 * is settled without exp() whenever u < 1 - mean (exp(-x) > 1 - x): the
 * exp() call would otherwise be a third of the run time. */
static inline unsigned poisson_draw(double mean, double u)
{
    if (u < 1.0 - mean)
        return 0;
    double p = exp(-mean), cdf = p;
    unsigned n = 0;
    /* The cap only matters if rounding keeps the cdf below u forever. */
    while (u >= cdf && n < 1000) {
        n++;
        p *= mean / n;
        cdf += p;
    }
    return n;
}

static char *put_uint(char *out, unsigned v)
{
    char digits[12];
    int n = 0;
    do {
        digits[n++] = (char)('0' + v % 10);
        v /= 10;
    } while (v);
    while (n)
        *out++ = digits[--n];
    return out;
}

static char *generate_row(char *out, const tables *t, rng *r)
{
    uint32_t band = alias_draw(&t->band_draw, rng_next(r));
    uint32_t region = alias_draw(&t->region_draw, rng_next(r));
    uint64_t bits = rng_next(r);
    uint32_t year = below((uint32_t)(bits >> 32), N_YEARS);
    uint32_t dep = 1 + below((uint32_t)bits, N_DEPRIVATION);
    bits = rng_next(r);
    uint32_t width = band == N_BANDS - 1 ? 150 : 50; /* 85+ runs to 99.9 */
    uint32_t age = band * 50 + below((uint32_t)(bits >> 32), width);
    uint32_t fu = FOLLOWUP_MIN_HUNDREDTHS +
                  below((uint32_t)bits, FOLLOWUP_MAX_HUNDREDTHS - FOLLOWUP_MIN_HUNDREDTHS + 1);
    uint32_t bmi = alias_draw(&t->bmi_draw, rng_next(r));
    bits = rng_next(r);
    uint32_t sex = (bits >> 32) >= (uint64_t)(FEMALE_SHARE * 4294967296.0);
    if ((uint32_t)bits < (uint32_t)(BMI_MISSING_SHARE * 4294967296.0))
        bmi = N_BMI;

    double rate = t->ev_band[band] * t->ev_sex[sex] * t->ev_region[region] *
                  t->ev_dep[dep] * t->ev_year[year];
    unsigned events = poisson_draw(t->followup_value[fu] * rate, unit_double(rng_next(r)));
    double u = unit_double(rng_next(r));
    double exp_neg_eta = t->fl_age[age] * t->fl_sex[sex] * t->fl_dep[dep] * t->fl_bmi[bmi];
    unsigned flag = u * exp_neg_eta < 1.0 - u; /* u < 1/(1+exp(-eta)) */

    out = piece_put(out, &t->band[band]);
    out = piece_put(out, &t->sex_region_dep[(sex * N_REGIONS + region) * N_DEPRIVATION + dep - 1]);
    out = piece_put(out, &t->year[year]);
    out = piece_put(out, &t->age[age]);
    out = piece_put(out, &t->followup[fu]);
    out = piece_put(out, &t->bmi[bmi]);
    if (events < 10)
        return piece_put(out, &t->tail[events][flag]);
    out = put_uint(out, events);
    *out++ = ',';
    *out++ = (char)('0' + flag);
    *out++ = '\n';
    return out;
}

/* ------------------------------------------------------------------ */
/* Output: plain or zstd-compressed, in large blocks.                   */

typedef struct sink {
    FILE *fp;
    ZSTD_CCtx *cctx; /* NULL when writing plain text */
    char *zbuf;
    size_t zcap;
} sink;

static int sink_raw(sink *s, const void *data, size_t len)
{
    if (fwrite(data, 1, len, s->fp) == len)
        return 0;
    fprintf(stderr, "synth: write failed: %s\n", strerror(errno));
    return -1;
}

static int sink_compress(sink *s, const void *data, size_t len, ZSTD_EndDirective mode)
{
    ZSTD_inBuffer in = { data, len, 0 };
    for (;;) {
        ZSTD_outBuffer zout = { s->zbuf, s->zcap, 0 };
        size_t left = ZSTD_compressStream2(s->cctx, &zout, &in, mode);
        if (ZSTD_isError(left)) {
            fprintf(stderr, "synth: zstd: %s\n", ZSTD_getErrorName(left));
            return -1;
        }
        if (sink_raw(s, s->zbuf, zout.pos) != 0)
            return -1;
        int done = mode == ZSTD_e_end ? left == 0 : in.pos == in.size;
        if (done)
            return 0;
    }
}

static int sink_write(sink *s, const void *data, size_t len)
{
    if (!s->cctx)
        return sink_raw(s, data, len);
    return sink_compress(s, data, len, ZSTD_e_continue);
}

static int sink_open(sink *s, const char *path, int zstd_level)
{
    memset(s, 0, sizeof *s);
    s->fp = path ? fopen(path, "wb") : stdout;
    if (!s->fp) {
        fprintf(stderr, "synth: %s: %s\n", path, strerror(errno));
        return -1;
    }
    if (zstd_level == 0)
        return 0;
    s->cctx = ZSTD_createCCtx();
    s->zcap = ZSTD_CStreamOutSize();
    s->zbuf = malloc(s->zcap);
    if (!s->cctx || !s->zbuf) {
        fprintf(stderr, "synth: out of memory\n");
        return -1;
    }
    size_t rc = ZSTD_CCtx_setParameter(s->cctx, ZSTD_c_compressionLevel, zstd_level);
    if (!ZSTD_isError(rc))
        rc = ZSTD_CCtx_setParameter(s->cctx, ZSTD_c_checksumFlag, 1);
    if (ZSTD_isError(rc)) {
        fprintf(stderr, "synth: zstd: %s\n", ZSTD_getErrorName(rc));
        return -1;
    }
    return 0;
}

/* Finishes the frame and closes the file; a failed flush or close (a full
 * disk) is an error like any failed write.  `ok` is 0 when an error was
 * already reported. */
static int sink_close(sink *s, int ok)
{
    if (ok && s->cctx && sink_compress(s, "", 0, ZSTD_e_end) != 0)
        ok = 0;
    ZSTD_freeCCtx(s->cctx);
    free(s->zbuf);
    int closed = 1;
    if (s->fp && (fflush(s->fp) != 0 || ferror(s->fp)))
        closed = 0;
    if (s->fp && s->fp != stdout && fclose(s->fp) != 0)
        closed = 0;
    if (ok && !closed)
        fprintf(stderr, "synth: write failed: %s\n", strerror(errno));
    return ok && closed ? 0 : -1;
}

enum { OUT_BLOCK = 1 << 20, ROW_MAX = 128 };

static int write_rows(sink *s, const tables *t, uint64_t rows, uint64_t seed)
{
    char *buf = malloc(OUT_BLOCK + ROW_MAX);
    if (!buf) {
        fprintf(stderr, "synth: out of memory\n");
        return -1;
    }
    rng r;
    rng_seed(&r, seed);
    int rc = 0;
    char *p = buf;
    memcpy(p, HEADER, sizeof HEADER - 1);
    p += sizeof HEADER - 1;
    for (uint64_t i = 0; i < rows && rc == 0; i++) {
        p = generate_row(p, t, &r);
        if (p - buf >= OUT_BLOCK) {
            rc = sink_write(s, buf, (size_t)(p - buf));
            p = buf;
        }
    }
    if (rc == 0 && p > buf)
        rc = sink_write(s, buf, (size_t)(p - buf));
    free(buf);
    return rc;
}

/* ------------------------------------------------------------------ */
/* --truth: the coefficients as a fitter of this file should find them. */

static void json_number(FILE *fp, double v)
{
    char text[32];
    snprintf(text, sizeof text, "%.15g", v);
    if (strtod(text, NULL) != v)
        snprintf(text, sizeof text, "%.17g", v);
    fputs(text, fp);
}

static void json_coef(FILE *fp, const char *name, double v, int *first)
{
    fprintf(fp, "%s\n      \"%s\": ", *first ? "" : ",", name);
    json_number(fp, v);
    *first = 0;
}

static void truth_events(FILE *fp)
{
    char name[32], label[8];
    int first = 1;
    fputs("  \"events\": {\n"
          "    \"outcome\": \"events\",\n"
          "    \"family\": \"poisson\",\n"
          "    \"link\": \"log\",\n"
          "    \"exposure\": \"followup\",\n"
          "    \"model_lines\": [\"outcome events\", \"family poisson\", \"link log\","
          " \"exposure followup\", \"factor age_band ref=00-04\", \"factor sex ref=F\","
          " \"factor region ref=R01\", \"numeric deprivation\", \"numeric year\"],\n"
          "    \"parametrisation\": \"treatment contrasts; reference levels age_band=00-04, "
          "sex=F, region=R01 (the first level of each, in both sorted and natural order); "
          "deprivation is numeric 1..5 and not centred; year is numeric and NOT centred in "
          "these coefficients, so intercept is the log rate at year 0 and equals "
          "intercept_year_centred_2017 - 2017 * year; log(followup) is an offset with "
          "coefficient 1\",\n"
          "    \"intercept_year_centred_2017\": ", fp);
    json_number(fp, EV_INTERCEPT);
    fputs(",\n    \"coefficients\": {", fp);
    json_coef(fp, "intercept", EV_INTERCEPT - YEAR_CENTRE * EV_YEAR, &first);
    for (int b = 1; b < N_BANDS; b++) {
        band_label(label, b);
        snprintf(name, sizeof name, "age_band=%s", label);
        json_coef(fp, name, EV_BAND[b], &first);
    }
    json_coef(fp, "sex=M", EV_SEX_M, &first);
    for (int r = 1; r < N_REGIONS; r++) {
        snprintf(name, sizeof name, "region=R%02d", r + 1);
        json_coef(fp, name, EV_REGION[r], &first);
    }
    json_coef(fp, "deprivation", EV_DEPRIVATION, &first);
    json_coef(fp, "year", EV_YEAR, &first);
    fputs("\n    }\n  },\n", fp);
}

static void truth_flag(FILE *fp, const tables *t)
{
    int first = 1;
    fputs("  \"flag\": {\n"
          "    \"outcome\": \"flag\",\n"
          "    \"family\": \"binomial\",\n"
          "    \"link\": \"logit\",\n"
          "    \"model_lines\": [\"outcome flag\", \"family binomial\", \"link logit\","
          " \"numeric age\", \"factor sex ref=F\", \"numeric deprivation\", \"numeric bmi\"],\n"
          "    \"parametrisation\": \"reference level sex=F; age, deprivation and bmi are "
          "numeric and not centred; a row whose bmi cell is empty had its flag drawn with "
          "bmi = bmi_mean_used_when_missing, independently of everything else, so fitting "
          "the complete cases only (empty bmi = missing) recovers these coefficients\",\n"
          "    \"bmi_missing_share\": ", fp);
    json_number(fp, BMI_MISSING_SHARE);
    fputs(",\n    \"bmi_mean_used_when_missing\": ", fp);
    json_number(fp, t->bmi_mean);
    fputs(",\n    \"coefficients\": {", fp);
    json_coef(fp, "intercept", FL_INTERCEPT, &first);
    json_coef(fp, "age", FL_AGE, &first);
    json_coef(fp, "sex=M", FL_SEX_M, &first);
    json_coef(fp, "deprivation", FL_DEPRIVATION, &first);
    json_coef(fp, "bmi", FL_BMI, &first);
    fputs("\n    }\n  }\n", fp);
}

static int write_truth(const char *path, const tables *t, uint64_t rows, uint64_t seed)
{
    FILE *fp = fopen(path, "w");
    if (!fp) {
        fprintf(stderr, "synth: %s: %s\n", path, strerror(errno));
        return -1;
    }
    fprintf(fp, "{\n  \"generator\": \"synth (millrace tools)\",\n"
                "  \"note\": \"invented data: no real people, places or organisations\",\n"
                "  \"seed\": %llu,\n  \"rows\": %llu,\n",
            (unsigned long long)seed, (unsigned long long)rows);
    truth_events(fp);
    truth_flag(fp, t);
    fputs("}\n", fp);
    if (ferror(fp) | (fclose(fp) != 0)) {
        fprintf(stderr, "synth: %s: write failed\n", path);
        return -1;
    }
    return 0;
}

/* ------------------------------------------------------------------ */
/* Command line.                                                        */

typedef struct options {
    uint64_t rows;
    int have_rows;
    uint64_t seed;
    const char *out;
    const char *truth;
    int zstd_level; /* 0: plain text */
} options;

static void usage(FILE *fp)
{
    fputs("usage: synth --rows N [--seed S] [--out PATH] [--zstd [LEVEL]] [--truth PATH]\n"
          "  --rows N      data rows to write (integer, 1e9 style accepted)\n"
          "  --seed S      PRNG seed (default 1); same seed and N give identical bytes\n"
          "  --out PATH    output file (default stdout); a .zst name implies --zstd 3\n"
          "  --zstd LEVEL  compress with zstd at LEVEL (default 3)\n"
          "  --truth PATH  write the true model coefficients as JSON\n", fp);
}

/* Accepts plain integers and exact forms like 1e9, which is how row counts
 * are usually written in benchmark scripts. */
static int parse_count(const char *text, uint64_t *value)
{
    char *end;
    errno = 0;
    if (text[0] == '-' || text[0] == '\0')
        return -1;
    unsigned long long n = strtoull(text, &end, 10);
    if (*end == '\0' && errno == 0) {
        *value = n;
        return 0;
    }
    double d = strtod(text, &end);
    if (*end != '\0' || !(d >= 0.0) || d > 1e15 || d != floor(d))
        return -1;
    *value = (uint64_t)d;
    return 0;
}

static int parse_level(const char *text, int *level)
{
    char *end;
    long v = strtol(text, &end, 10);
    if (*end != '\0' || end == text || v < 1 || v > ZSTD_maxCLevel())
        return -1;
    *level = (int)v;
    return 0;
}

static int ends_with(const char *s, const char *suffix)
{
    size_t n = strlen(s), m = strlen(suffix);
    return n >= m && strcmp(s + n - m, suffix) == 0;
}

static int parse_options(int argc, char **argv, options *o)
{
    memset(o, 0, sizeof *o);
    o->seed = 1;
    int zstd_flag = 0;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i], *next = i + 1 < argc ? argv[i + 1] : NULL;
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            usage(stdout);
            exit(0);
        } else if (strcmp(a, "--zstd") == 0) {
            zstd_flag = 1;
            o->zstd_level = 3;
            if (next && next[0] != '-') {
                if (parse_level(next, &o->zstd_level) != 0) {
                    fprintf(stderr, "synth: bad zstd level '%s' (1..%d)\n", next, ZSTD_maxCLevel());
                    return -1;
                }
                i++;
            }
        } else if (!next) {
            fprintf(stderr, "synth: %s needs a value\n", a);
            return -1;
        } else if (strcmp(a, "--rows") == 0) {
            if (parse_count(next, &o->rows) != 0) {
                fprintf(stderr, "synth: bad row count '%s'\n", next);
                return -1;
            }
            o->have_rows = 1;
            i++;
        } else if (strcmp(a, "--seed") == 0) {
            char *end;
            errno = 0;
            o->seed = strtoull(next, &end, 0);
            if (*end != '\0' || errno != 0 || next[0] == '-') {
                fprintf(stderr, "synth: bad seed '%s'\n", next);
                return -1;
            }
            i++;
        } else if (strcmp(a, "--out") == 0) {
            o->out = next;
            i++;
        } else if (strcmp(a, "--truth") == 0) {
            o->truth = next;
            i++;
        } else {
            fprintf(stderr, "synth: unknown option '%s'\n", a);
            return -1;
        }
    }
    if (!o->have_rows) {
        fprintf(stderr, "synth: --rows is required\n");
        return -1;
    }
    if (!zstd_flag && o->out && ends_with(o->out, ".zst"))
        o->zstd_level = 3;
    return 0;
}

int main(int argc, char **argv)
{
    options o;
    if (parse_options(argc, argv, &o) != 0) {
        usage(stderr);
        return 2;
    }
    static tables t; /* about 30 KB: kept off the stack */
    if (tables_build(&t) != 0) {
        fprintf(stderr, "synth: out of memory\n");
        return 1;
    }
    int rc = 0;
    if (o.truth)
        rc = write_truth(o.truth, &t, o.rows, o.seed);
    if (rc == 0) {
        sink s;
        int ok = sink_open(&s, o.out, o.zstd_level) == 0;
        ok = ok && write_rows(&s, &t, o.rows, o.seed) == 0;
        rc = sink_close(&s, ok);
    }
    tables_free(&t);
    return rc == 0 ? 0 : 1;
}
