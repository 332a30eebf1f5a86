// Frequency plan: spacing, limits, mains clearance and corner refinement against a known response.
#include <cmath>

#include <catch2/catch.hpp>

#include "cli/procedures/frequency_plan.h"

using namespace ampbench::procedures;

TEST_CASE("the base plan spans a decade beyond each predicted corner, log-spaced", "[plan]") {
    FrequencyPlanOptions o;
    o.per_decade = 5;
    o.mains_hz = 0;
    const auto plan = base_plan(o, 20.0, 200e3);
    REQUIRE(plan.size() == 31);  // 6 decades × 5 + 1
    CHECK(plan.front() == Approx(2.0));
    CHECK(plan.back() == Approx(2e6));
    for (size_t i = 1; i < plan.size(); ++i) CHECK(plan[i] / plan[i - 1] == Approx(std::pow(10.0, 0.2)));
}

TEST_CASE("no planned point lies within 1 % of a mains harmonic", "[plan]") {
    for (double mains : {50.0, 60.0}) {
        FrequencyPlanOptions o;
        o.mains_hz = mains;
        o.per_decade = 40;
        o.from_hz = 10;
        o.to_hz = 1e4;
        for (double f : base_plan(o, {}, {}))
            for (int h = 1; h <= 10; ++h) CHECK(std::abs(f - h * mains) >= 0.01 * h * mains);
    }
    // 100 Hz is the 2nd harmonic of 50 Hz: moved to the nearer side, just outside 1 %.
    CHECK(clear_of_mains(100.3, 50, 10, 0.01) == Approx(101.05));
    CHECK(clear_of_mains(99.9, 50, 10, 0.01) == Approx(98.95));
    CHECK(clear_of_mains(1000.0, 50, 10, 0.01) == 1000.0);  // the 20th harmonic is not avoided
}

TEST_CASE("adaptive points locate both corners of a band-pass to 2 %", "[plan]") {
    // |H| of a first-order high-pass at 30 Hz times a first-order low-pass at 80 kHz (hand formula).
    auto gain_db = [](double f) {
        const double hp = (f / 30) / std::sqrt(1 + (f / 30) * (f / 30));
        const double lp = 1 / std::sqrt(1 + (f / 80e3) * (f / 80e3));
        return 20 * std::log10(100 * hp * lp);
    };
    FrequencyPlanOptions o;
    o.per_decade = 4;
    std::vector<MeasuredGain> m;
    for (double f : base_plan(o, 30.0, 80e3)) m.push_back({f, gain_db(f)});
    int rounds = 0;
    for (; rounds < 20; ++rounds) {
        const auto more = adaptive_points(m, o);
        if (more.empty()) break;
        for (double f : more) m.push_back({f, gain_db(f)});
    }
    CHECK(rounds < 20);
    auto bracket = [&](double corner) {
        double below = 0, above = 1e12;
        for (const auto& p : m) {
            if (p.freq_hz <= corner) below = std::max(below, p.freq_hz);
            if (p.freq_hz >= corner) above = std::min(above, p.freq_hz);
        }
        return above / below - 1;
    };
    // The −3 dB points of the product differ from 30 Hz / 80 kHz by far less than 0.1 %.
    CHECK(bracket(30.0) <= 0.0201);
    CHECK(bracket(80e3) <= 0.0201);
}
