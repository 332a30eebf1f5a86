// Unit tests for the acceptance probabilities of (n, c) plans: against the definitions summed
// directly for small cases, and for the properties a probability law must have at large n.
#include <catch2/catch.hpp>

#include <cmath>

#include "core/errors.h"
#include "fit/lot/sampling.h"

using namespace ampbench;
using namespace ampbench::lot;
using Catch::Matchers::Contains;

namespace {

// Binomial coefficient by the multiplicative formula, exact in long double for small n.
long double choose(long n, long k) {
    if (k < 0 || k > n) return 0.0L;
    long double r = 1.0L;
    for (long i = 1; i <= k; ++i) r = r * static_cast<long double>(n - k + i) / i;
    return r;
}

}  // namespace

TEST_CASE("binomial acceptance equals the definition summed directly", "[fit][lot]") {
    // Source: the binomial law, P(X <= c) = sum_k C(n,k) p^k (1-p)^(n-k).
    for (long n : {1L, 5L, 32L, 50L}) {
        for (long c = 0; c < n && c < 6; ++c) {
            for (double p : {0.001, 0.01, 0.05, 0.2, 0.5, 0.9}) {
                long double direct = 0.0L;
                for (long k = 0; k <= c; ++k)
                    direct += choose(n, k) * std::pow(static_cast<long double>(p), k) *
                              std::pow(1.0L - p, n - k);
                CHECK(accept_binomial(n, c, p) ==
                      Approx(static_cast<double>(direct)).epsilon(1e-12).margin(1e-15));
            }
        }
    }
    // n = 32, c = 1, p = 1 %: 0.99^32 + 32 * 0.01 * 0.99^31, worked by hand.
    CHECK(accept_binomial(32, 1, 0.01) ==
          Approx(std::pow(0.99, 32) + 0.32 * std::pow(0.99, 31)).epsilon(1e-14));
}

TEST_CASE("hypergeometric acceptance equals the definition summed directly", "[fit][lot]") {
    // Source: the hypergeometric law, P(X = k) = C(D,k) C(N-D,n-k) / C(N,n).
    for (long lot : {10L, 40L, 100L}) {
        for (long n : {1L, 5L, 10L}) {
            for (long d = 0; d <= lot; d += 3) {
                for (long c = 0; c < n; ++c) {
                    long double direct = 0.0L;
                    for (long k = 0; k <= c; ++k)
                        direct += choose(d, k) * choose(lot - d, n - k) / choose(lot, n);
                    CHECK(accept_hypergeometric(lot, d, n, c) ==
                          Approx(static_cast<double>(direct)).epsilon(1e-12).margin(1e-15));
                }
            }
        }
    }
}

TEST_CASE("the laws are proper at large sample sizes", "[fit][lot]") {
    for (long n : {1000L, 100000L, 3000000L}) {
        for (double p : {1e-4, 0.03, 0.5}) {
            double total = 0.0;
            bool finite = true;
            for (long k = 0; k <= n; ++k) {
                const double term = binomial_pmf(k, n, p);
                finite = finite && std::isfinite(term);
                total += term;
                if (k > static_cast<long>(static_cast<double>(n) * p) + 100 && term < 1e-300) break;
            }
            CHECK(finite);
            CHECK(total == Approx(1.0).epsilon(1e-11));
            CHECK(accept_binomial(n, n - 1, p) == Approx(1.0 - std::pow(p, static_cast<double>(n))).margin(1e-11));
        }
    }
    // Large lot: the hypergeometric law tends to the binomial as N grows at fixed n and D/N.
    const double hyper = accept_hypergeometric(10000000, 200000, 80, 2);
    CHECK(hyper == Approx(accept_binomial(80, 2, 0.02)).epsilon(1e-4));
    double total = 0.0;
    for (long k = 0; k <= 2000; ++k) total += hypergeometric_pmf(k, 50000, 1500, 2000);
    CHECK(total == Approx(1.0).epsilon(1e-11));
}

TEST_CASE("edges of the acceptance probability", "[fit][lot]") {
    CHECK(accept_binomial(32, 1, 0.0) == 1.0);
    CHECK(accept_binomial(32, 1, 1.0) == 0.0);
    CHECK(accept_binomial(32, 32, 0.7) == 1.0);
    CHECK(accept_hypergeometric(100, 0, 32, 0) == 1.0);
    CHECK(accept_hypergeometric(100, 100, 32, 31) == 0.0);
    // All of the lot sampled: accepted exactly when the lot holds at most c defectives.
    CHECK(accept_hypergeometric(50, 2, 50, 1) == 0.0);
    CHECK(accept_hypergeometric(50, 1, 50, 1) == 1.0);
    CHECK_THROWS_AS(accept_binomial(10, 1, 1.5), FitInputError);
    CHECK_THROWS_AS(accept_hypergeometric(10, 11, 5, 1), FitInputError);
}

TEST_CASE("the OC curve falls with the defective fraction", "[fit][lot]") {
    const auto curve = oc_curve({32, 1}, default_oc_grid(), 500);
    REQUIRE(curve.size() == default_oc_grid().size());
    for (size_t i = 1; i < curve.size(); ++i) {
        CHECK(curve[i].accept_binomial < curve[i - 1].accept_binomial);
        CHECK(*curve[i].accept_hypergeometric <= *curve[i - 1].accept_hypergeometric);
    }
    CHECK(*curve[1].lot_defectives == 5);  // 1 % of 500
    const auto stream = oc_curve({32, 1}, {0.01});
    CHECK_FALSE(stream[0].accept_hypergeometric.has_value());
    CHECK_THROWS_WITH(oc_curve({32, 32}, {0.01}), Contains("below the sample size"));
    CHECK_THROWS_WITH(oc_curve({32, 1}, {0.01}, 20), Contains("exceeds the lot quantity 20"));
    CHECK_THROWS_AS(oc_curve({0, 0}, {0.01}), FitInputError);
}

TEST_CASE("the fraction at a given acceptance probability", "[fit][lot]") {
    for (double target : {0.95, 0.5, 0.10}) {
        const double p = fraction_at_acceptance({32, 1}, target);
        CHECK(accept_binomial(32, 1, p) == Approx(target).margin(1e-9));
    }
    // n = 1, c = 0 accepts with probability 1 - p.
    CHECK(fraction_at_acceptance({1, 0}, 0.25) == Approx(0.75).margin(1e-10));
}
