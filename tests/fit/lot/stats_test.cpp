// Unit tests for the lot statistics and the capability index.
#include <catch2/catch.hpp>

#include <cmath>

#include "core/errors.h"
#include "fit/lot/stats.h"

using namespace ampbench;
using namespace ampbench::lot;

TEST_CASE("summary statistics", "[fit][lot]") {
    const Summary s = summarize({2, 4, 4, 4, 5, 5, 7, 9});
    CHECK(s.count == 8);
    CHECK(s.mean == Approx(5.0));
    // Sum of squared deviations 32 over n - 1 = 7.
    CHECK(*s.sd == Approx(std::sqrt(32.0 / 7.0)));
    CHECK(s.min == 2);
    CHECK(s.max == 9);
    // A large offset with a small spread keeps its variance (the two-pass form).
    const Summary big = summarize({1e9 + 1, 1e9 + 2, 1e9 + 3});
    CHECK(*big.sd == Approx(1.0).epsilon(1e-12));
    const Summary one = summarize({3.5});
    CHECK_FALSE(one.sd.has_value());
    CHECK_THROWS_AS(summarize({}), FitInputError);
    CHECK_THROWS_AS(summarize({1.0, NAN}), FitInputError);
}

TEST_CASE("Cpk by its standard definition", "[fit][lot]") {
    // Source: ISO 22514-2 / NIST/SEMATECH e-Handbook of Statistical Methods §6.1.6:
    // Cpk = min(USL - mu, mu - LSL) / (3 sigma). From memory, its example: USL 20, LSL 8,
    // sigma 2, mean 16 gives Cp = 1 and Cpk = 4 / 6 = 0.667.
    CHECK(*cpk(16.0, 2.0, 8.0, 20.0) == Approx(4.0 / 6.0));
    // A centred process: Cpk equals Cp = (USL - LSL) / 6 sigma.
    CHECK(*cpk(14.0, 2.0, 8.0, 20.0) == Approx(1.0));
    // One-sided specifications use the single limit (CPU or CPL).
    CHECK(*cpk(200.0, 20.0, 100.0, std::nullopt) == Approx(100.0 / 60.0));
    CHECK(*cpk(0.70, 0.01, std::nullopt, 0.75) == Approx(0.05 / 0.03));
    // A mean outside the limits gives a negative index.
    CHECK(*cpk(320.0, 10.0, 100.0, 300.0) == Approx(-20.0 / 30.0));
    CHECK_FALSE(cpk(5.0, 0.0, 1.0, 9.0).has_value());
    CHECK_FALSE(cpk(5.0, std::nullopt, 1.0, 9.0).has_value());
    CHECK_FALSE(cpk(5.0, 1.0, std::nullopt, std::nullopt).has_value());
    const Summary s = summarize({190, 200, 210});
    CHECK(*cpk(s, 100.0, 300.0) == Approx(100.0 / 30.0));
}
