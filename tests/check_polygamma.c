/* check_polygamma.c - tests of src/common/polygamma.c's differences of
 * log Gamma, digamma and trigamma, and of the negative binomial's sums for
 * theta that are built on them (src/family/negative_binomial.c).
 *
 * Oracles, all analytic identities:
 *   - for a whole a, Gamma(x + a) / Gamma(x) = x (x + 1) ... (x + a - 1), so
 *     the three differences are sums of log(x + k), 1/(x + k) and
 *     1/(x + k)^2 over k < a, positive terms summed here in long double;
 *   - for any a, the recurrences f(x, a + 1) - f(x, a) = log(x + a),
 *     1/(x + a) and 1/(x + a)^2;
 *   - the negative binomial's log density and theta's score in long double
 *     (with the first identity), and, as
 *     theta grows, its information in theta against the series in 1/theta:
 *     with A = (y - (y - mu)^2) / 2 the score is A / theta^2 + O(theta^-3)
 *     (from log Gamma(y + theta) - log Gamma(theta) = y log theta +
 *     y (y - 1) / (2 theta) + O(theta^-2) and the expansion of the log
 *     terms), so the information is 2 A / theta^3 + O(theta^-4).
 */
#include <check.h>
#include <float.h>
#include <math.h>
#include <string.h>

#include "check_common.h"
#include "common/probability.h"
#include "family/family.h"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))

static const double XS[] = {0.3, 2.5, 9.99, 10.0, 10.5, 1234.5, 1e6, 1e7, 1e8, 1e12};
static const int AS[] = {1, 2, 3, 17, 250};

static int close_rel(double got, long double want, double tol)
{
    return fabsl((long double)got - want) <= tol * fabsl(want);
}

START_TEST(whole_a_against_products)
{
    for (size_t i = 0; i < N_OF(XS); i++)
        for (size_t j = 0; j < N_OF(AS); j++) {
            double x = XS[i];
            long double lg = 0, dg = 0, tg = 0;
            for (int k = 0; k < AS[j]; k++) {
                long double t = (long double)x + k;
                lg += logl(t);
                dg += 1 / t;
                tg += 1 / (t * t);
            }
            ck_assert_msg(close_rel(mr__log_gamma_ratio(x, AS[j]), lg, 2e-14), "lgamma ratio (%g, %d)", x, AS[j]);
            ck_assert_msg(close_rel(mr__digamma_diff(x, AS[j]), dg, 2e-14), "digamma diff (%g, %d)", x, AS[j]);
            /* below 10, psi'(x) - psi'(x + a) is the plain difference,
             * which loses the digits psi'(x + a) shares with psi'(x) */
            ck_assert_msg(close_rel(mr__trigamma_diff(x, AS[j]), tg, x < 10 ? 1e-13 : 2e-14), "trigamma diff (%g, %d)",
                          x, AS[j]);
        }
}
END_TEST

START_TEST(recurrences_for_any_a)
{
    static const double as[] = {0.5, 2.25, 40.75};
    for (size_t i = 0; i < N_OF(XS); i++)
        for (size_t j = 0; j < N_OF(as); j++) {
            double x = XS[i], a = as[j], xa = x + a;
            double lg = mr__log_gamma_ratio(x, a + 1) - mr__log_gamma_ratio(x, a);
            double dg = mr__digamma_diff(x, a + 1) - mr__digamma_diff(x, a);
            double tg = mr__trigamma_diff(x, a + 1) - mr__trigamma_diff(x, a);
            /* each difference of two values loses what they share */
            ck_assert_msg(fabs(lg - log(xa)) <= 1e-14 * fmax(1, fabs(mr__log_gamma_ratio(x, a + 1))), "lg %g %g", x, a);
            ck_assert_msg(fabs(dg - 1 / xa) <= 1e-14 * mr__digamma_diff(x, a + 1), "dg %g %g", x, a);
            ck_assert_msg(fabs(tg - 1 / (xa * xa)) <= 1e-13 * mr__trigamma_diff(x, a + 1), "tg %g %g", x, a);
        }
}
END_TEST

/* a = 0 is exactly 0; below 10 the plain differences, bit for bit (a fit
 * with theta below 10 keeps its bits). */
START_TEST(zero_and_plain_below_ten)
{
    for (size_t i = 0; i < N_OF(XS); i++) {
        ck_assert(mr__log_gamma_ratio(XS[i], 0) == 0 && mr__digamma_diff(XS[i], 0) == 0);
        ck_assert(mr__trigamma_diff(XS[i], 0) == 0);
        if (XS[i] >= 10) continue;
        for (size_t j = 0; j < N_OF(AS); j++) {
            double x = XS[i], a = AS[j], got[3], want[3];
            got[0] = mr__log_gamma_ratio(x, a), want[0] = mr__log_gamma(x + a) - mr__log_gamma(x);
            got[1] = mr__digamma_diff(x, a), want[1] = mr__digamma(x + a) - mr__digamma(x);
            got[2] = mr__trigamma_diff(x, a), want[2] = mr__trigamma(x) - mr__trigamma(x + a);
            ck_assert(memcmp(got, want, sizeof got) == 0);
        }
    }
}
END_TEST

/* One row's log density and theta's score in long double, the gamma
 * functions' differences as the products' sums (y whole), and the terms
 * that would cancel even there rewritten exactly: log(theta/(theta + mu))
 * as -log1p(mu/theta), 1 - (y + theta)/(theta + mu) as
 * (mu - y)/(theta + mu).  The score's terms of the size of mu/theta then
 * leave its sum of the size of mu/theta^2 to about theta x 1e-19
 * relative: 1e-11 at theta = 10^8. */
static void nb_long_double(double th, double y, double mu, long double *ll, long double *score)
{
    long double t = th, m = mu, lg = 0, dg = 0, lt = -log1pl(m / t);
    for (int k = 0; k < (int)y; k++) lg += logl(t + k), dg += 1 / (t + k);
    *ll = lg - lgammal((long double)y + 1) + t * lt + (y > 0 ? y * logl(m / (t + m)) : 0);
    *score = dg + lt + (m - y) / (t + m);
}

/* Near poisson, where the plain formulas had kept none of the score's
 * digits by theta = 10^7: the log density and the score against
 * nb_long_double, the information against the series in 1/theta (the
 * file's comment; its next term is within 10 (mu + y + 1)^4 / theta^4). */
START_TEST(negative_binomial_sums_near_poisson)
{
    static const double thetas[] = {1e6, 1e7, 1e8};
    static const double ys[] = {0, 1, 3, 7, 12};
    static const double mus[] = {0.3, 2.0, 5.5, 9.0};
    mr__family f = {mr__family_ops_of(MR_NEGATIVE_BINOMIAL), 0, 1, NAN};
    for (size_t t = 0; t < N_OF(thetas); t++)
        for (size_t i = 0; i < N_OF(ys); i++)
            for (size_t j = 0; j < N_OF(mus); j++) {
                double th = thetas[t], y = ys[i], mu = mus[j], s[MR__PARAM_SUMS] = {0};
                double A = 0.5 * (y - (y - mu) * (y - mu)), c = mu + y + 1;
                long double ll, score;
                f.param = th;
                f.ops->param_sums_n(&f, &y, &mu, NULL, 1, s);
                nb_long_double(th, y, mu, &ll, &score);
                /* y log theta is added and taken away again */
                ck_assert_msg(fabsl(s[MR__PS_LOGLIK] - ll) <= 1e-14 * fabsl(ll) + 4 * DBL_EPSILON * y * log(th), "loglik theta %g y %g mu %g: %.17g vs %.17Lg",
                              th, y, mu, s[MR__PS_LOGLIK], ll);
                /* the terms are of the size of (mu + y)/theta: a few
                 * of their ulps, where the sum is far smaller still */
                ck_assert_msg(fabsl(s[MR__PS_SCORE] - score) <= 1e-9 * fabsl(score) + 8 * DBL_EPSILON * (c / th), "score theta %g y %g mu %g: %.17g vs %.17Lg",
                              th, y, mu, s[MR__PS_SCORE], score);
                ck_assert_msg(fabs(s[MR__PS_INFO] - 2 * A / (th * th * th)) <= 10 * pow(c / th, 4),
                              "info theta %g y %g mu %g: %.17g vs %.17g", th, y, mu, s[MR__PS_INFO],
                              2 * A / (th * th * th));
            }
}
END_TEST

int main(void)
{
    Suite *s = suite_create("polygamma");
    TCase *tc = tcase_create("identities");
    tcase_add_test(tc, whole_a_against_products);
    tcase_add_test(tc, recurrences_for_any_a);
    tcase_add_test(tc, zero_and_plain_below_ten);
    tcase_add_test(tc, negative_binomial_sums_near_poisson);
    suite_add_tcase(s, tc);
    return mr_check_run(s, 0);
}
