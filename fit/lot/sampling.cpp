// Binomial and hypergeometric probabilities by Loader's saddle-point method, which forms no
// factorials and so stays accurate (to a few ulp per term) for sample sizes in the millions.
// Source: C. Loader, "Fast and Accurate Computation of Binomial Probabilities" (2000), the
// algorithm behind R's dbinom/dhyper.
#include "fit/lot/sampling.h"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::lot {
namespace {

constexpr double kLnSqrt2Pi = 0.918938533204672741780329736406;  // log(sqrt(2 pi))
constexpr double kLn2Pi = 1.837877066409345483560659472811;       // log(2 pi)

// stirlerr(n) = log(n!) - log(sqrt(2 pi n) (n/e)^n), the error of Stirling's formula.
double stirlerr(double n) {
    constexpr double s0 = 1.0 / 12.0, s1 = 1.0 / 360.0, s2 = 1.0 / 1260.0, s3 = 1.0 / 1680.0,
                     s4 = 1.0 / 1188.0;
    // Below 16 the series converges too slowly; lgamma of a small argument loses only ~1e-15.
    if (n <= 15.0) return std::lgamma(n + 1.0) - (n + 0.5) * std::log(n) + n - kLnSqrt2Pi;
    const double nn = n * n;
    if (n > 500) return (s0 - s1 / nn) / n;
    if (n > 80) return (s0 - (s1 - s2 / nn) / nn) / n;
    if (n > 35) return (s0 - (s1 - (s2 - s3 / nn) / nn) / nn) / n;
    return (s0 - (s1 - (s2 - (s3 - s4 / nn) / nn) / nn) / nn) / n;
}

// bd0(x, np) = x log(x / np) + np - x, summed as a series when x is near np to avoid the
// cancellation of the closed form.
double bd0(double x, double np) {
    if (std::fabs(x - np) < 0.1 * (x + np)) {
        double v = (x - np) / (x + np);
        double s = (x - np) * v;
        double ej = 2.0 * x * v;
        v = v * v;
        for (int j = 1; j < 1000; ++j) {
            ej *= v;
            const double s1 = s + ej / (2 * j + 1);
            if (s1 == s) return s1;
            s = s1;
        }
    }
    return x * std::log(x / np) + np - x;
}

// P(X = x) for X ~ Binomial(n, p) with q = 1 - p given separately (so 1 - p is exact).
double dbinom_raw(double x, double n, double p, double q) {
    if (p == 0.0) return x == 0.0 ? 1.0 : 0.0;
    if (q == 0.0) return x == n ? 1.0 : 0.0;
    if (x == 0.0) {
        if (n == 0.0) return 1.0;
        return std::exp(p < 0.1 ? -bd0(n, n * q) - n * p : n * std::log(q));
    }
    if (x == n) return std::exp(q < 0.1 ? -bd0(n, n * p) - n * q : n * std::log(p));
    if (x < 0.0 || x > n) return 0.0;
    const double lc =
        stirlerr(n) - stirlerr(x) - stirlerr(n - x) - bd0(x, n * p) - bd0(n - x, n * q);
    const double lf = kLn2Pi + std::log(x) + std::log1p(-x / n);
    return std::exp(lc - 0.5 * lf);
}

void check_plan(SamplingPlan plan) {
    if (plan.n < 1) throw FitInputError(fmt::format("sample size n = {} must be at least 1", plan.n));
    if (plan.c < 0)
        throw FitInputError(fmt::format("acceptance number c = {} must not be negative", plan.c));
    if (plan.c >= plan.n)
        throw FitInputError(fmt::format(
            "acceptance number c = {} must be below the sample size n = {} (the plan would "
            "accept every lot)",
            plan.c, plan.n));
}

}  // namespace

double binomial_pmf(long k, long n, double p) {
    if (k < 0 || k > n || n < 0) return 0.0;
    return dbinom_raw(static_cast<double>(k), static_cast<double>(n), p, 1.0 - p);
}

double hypergeometric_pmf(long k, long lot_size, long defectives, long n) {
    const long good = lot_size - defectives;
    if (k < 0 || k < n - good || k > defectives || k > n) return 0.0;
    if (n == 0) return k == 0 ? 1.0 : 0.0;
    // dhyper as the ratio of three binomial terms sharing p = n / N (Loader 2000, section 4).
    const double total = static_cast<double>(lot_size);
    const double p = static_cast<double>(n) / total;
    const double q = static_cast<double>(lot_size - n) / total;
    const double p1 = dbinom_raw(static_cast<double>(k), static_cast<double>(defectives), p, q);
    const double p2 = dbinom_raw(static_cast<double>(n - k), static_cast<double>(good), p, q);
    const double p3 = dbinom_raw(static_cast<double>(n), total, p, q);
    return p1 * p2 / p3;
}

double accept_binomial(long n, long c, double p) {
    if (!(p >= 0.0 && p <= 1.0))
        throw FitInputError(fmt::format("defective fraction {} is outside 0..1", p));
    if (c < 0) return 0.0;
    if (c >= n) return 1.0;
    // Terms more than ~40 standard deviations below the mean are below 1e-300; skip them.
    const double mean = static_cast<double>(n) * p;
    const double sd = std::sqrt(mean * (1.0 - p));
    const long low = std::max(0L, static_cast<long>(std::floor(mean - 40.0 * sd - 10.0)));
    double sum = 0.0;
    for (long k = low; k <= c; ++k) sum += binomial_pmf(k, n, p);
    return std::min(sum, 1.0);
}

double accept_hypergeometric(long lot_size, long defectives, long n, long c) {
    if (lot_size < 1 || defectives < 0 || defectives > lot_size || n < 0 || n > lot_size)
        throw FitInputError(fmt::format(
            "hypergeometric law needs 0 <= defectives ({}) <= lot ({}) and sample ({}) <= lot",
            defectives, lot_size, n));
    const long good = lot_size - defectives;
    const long low = std::max(0L, n - good);
    const long high = std::min(c, std::min(n, defectives));
    double sum = 0.0;
    for (long k = low; k <= high; ++k) sum += hypergeometric_pmf(k, lot_size, defectives, n);
    return std::min(sum, 1.0);
}

long lot_defectives(long lot_size, double p) {
    return static_cast<long>(std::llround(p * static_cast<double>(lot_size)));
}

std::vector<double> default_oc_grid() {
    return {0.005, 0.01, 0.015, 0.02, 0.03, 0.04, 0.05, 0.06, 0.07,
            0.08,  0.10, 0.12,  0.15, 0.20, 0.25, 0.30};
}

std::vector<OcPoint> oc_curve(SamplingPlan plan, const std::vector<double>& grid,
                              std::optional<long> lot_size) {
    check_plan(plan);
    if (lot_size && *lot_size < plan.n)
        throw FitInputError(fmt::format("sample size n = {} exceeds the lot quantity {}", plan.n,
                                        *lot_size));
    std::vector<OcPoint> out;
    out.reserve(grid.size());
    for (double p : grid) {
        OcPoint point;
        point.p = p;
        point.accept_binomial = accept_binomial(plan.n, plan.c, p);
        if (lot_size) {
            point.lot_defectives = lot_defectives(*lot_size, p);
            point.accept_hypergeometric =
                accept_hypergeometric(*lot_size, *point.lot_defectives, plan.n, plan.c);
        }
        out.push_back(point);
    }
    return out;
}

double fraction_at_acceptance(SamplingPlan plan, double accept) {
    check_plan(plan);
    if (!(accept > 0.0 && accept < 1.0))
        throw FitInputError(fmt::format("acceptance probability {} is outside (0, 1)", accept));
    // The acceptance probability falls monotonically in p from 1 at p = 0 to 0 at p = 1.
    double lo = 0.0, hi = 1.0;
    for (int i = 0; i < 200 && hi - lo > 1e-13; ++i) {
        const double mid = 0.5 * (lo + hi);
        if (accept_binomial(plan.n, plan.c, mid) > accept)
            lo = mid;
        else
            hi = mid;
    }
    return 0.5 * (lo + hi);
}

}  // namespace ampbench::lot
