// E-series tables and snapping, checked against IEC 60063.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "core/errors.h"
#include "fit/units/eseries.h"

using namespace ampbench::units;

namespace {
std::vector<int> values(ESeries s) {
    const auto v = series_values(s);
    return {v.begin(), v.end()};
}
}  // namespace

TEST_CASE("E6, E12 and E24 hold the values IEC 60063 lists", "[units]") {
    // Source: IEC 60063:2015, Table 1 (E24 and its E12/E6 subsets), two significant figures.
    CHECK(values(ESeries::e24) == std::vector<int>{10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
                                                   33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91});
    CHECK(values(ESeries::e12) == std::vector<int>{10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82});
    CHECK(values(ESeries::e6) == std::vector<int>{10, 15, 22, 33, 47, 68});
    // Source: IEC 60063 builds each series as every other member of the next finer one.
    for (auto [coarse, fine] : {std::pair{ESeries::e6, ESeries::e12}, std::pair{ESeries::e12, ESeries::e24},
                                std::pair{ESeries::e48, ESeries::e96}}) {
        const auto c = values(coarse), f = values(fine);
        REQUIRE(f.size() == 2 * c.size());
        for (size_t i = 0; i < c.size(); ++i) CHECK(c[i] == f[2 * i]);
    }
}

TEST_CASE("E48 and E96 follow IEC 60063's rule 10^(i/n) rounded to three figures", "[units]") {
    // Source: IEC 60063:2015, clause 3: the E48/E96/E192 values are 10^(i/n) rounded to three
    // significant figures (the listed E96 values have no exceptions to the rule).
    for (ESeries s : {ESeries::e48, ESeries::e96}) {
        const auto v = values(s);
        const int n = series_size(s);
        REQUIRE(static_cast<int>(v.size()) == n);
        for (int i = 0; i < n; ++i)
            CHECK(v[static_cast<size_t>(i)] ==
                  static_cast<int>(std::lround(100.0 * std::pow(10.0, i / static_cast<double>(n)))));
    }
    // Source: IEC 60063:2015, Table 2: spot values of E96.
    const auto e96 = values(ESeries::e96);
    CHECK(e96[0] == 100);
    CHECK(e96[24] == 178);
    CHECK(e96[48] == 316);
    CHECK(e96[95] == 976);
    CHECK(values(ESeries::e48)[47] == 953);
}

TEST_CASE("snapping works across decades", "[units]") {
    // Source: IEC 60063 E24 members 4.3k, 4.7k; E12 members 8.2, 10, 12.
    CHECK(snap_nearest(4500, ESeries::e24) == Approx(4700));  // geometric midpoint is 4.496k
    CHECK(snap_nearest(4490, ESeries::e24) == Approx(4300));
    CHECK(snap_up(4301, ESeries::e24) == Approx(4700));
    CHECK(snap_down(4699, ESeries::e24) == Approx(4300));
    CHECK(snap_up(4700, ESeries::e24) == Approx(4700));
    CHECK(snap_down(4700, ESeries::e24) == Approx(4700));
    CHECK(snap_up(8.5, ESeries::e12) == Approx(10));     // into the next decade
    CHECK(snap_down(9.9, ESeries::e12) == Approx(8.2));
    CHECK(snap_down(10.5e-9, ESeries::e12) == Approx(10e-9));
    CHECK(snap_nearest(9.5e6, ESeries::e6) == Approx(10e6));
    CHECK(snap_nearest(0.0123, ESeries::e96) == Approx(0.0124));
    CHECK(snap_down(0.99, ESeries::e6) == Approx(0.68));
    CHECK_THROWS_AS(snap_nearest(0, ESeries::e12), ampbench::InputError);
    CHECK_THROWS_AS(snap_up(-3, ESeries::e12), ampbench::InputError);
}

TEST_CASE("series names parse", "[units]") {
    CHECK(parse_series("e24") == ESeries::e24);
    CHECK(parse_series("E96") == ESeries::e96);
    CHECK_THROWS_WITH(parse_series("E7", "snap"), Catch::Contains("snap") && Catch::Contains("E7"));
}
