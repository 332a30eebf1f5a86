// The Monte Carlo tolerance band: determinism, ordering, the band's shape and sensitivities.
#include <catch2/catch.hpp>

#include <cmath>

#include "fit/circuit/circuit_support.h"
#include "fit/circuit/design.h"
#include "fit/circuit/tolerance.h"

using namespace ampbench::circuit;
using ampbench::testing::sample_design;

TEST_CASE("the same seed gives the same band and another seed another", "[circuit][tolerance]") {
    const Design d = load_design(sample_design("pa1"));
    ToleranceOptions opt;
    opt.runs = 120;
    opt.seed = 42;
    const ToleranceBand a = tolerance_band(d, {}, opt);
    const ToleranceBand b = tolerance_band(d, {}, opt);
    REQUIRE(a.quantities.size() == b.quantities.size());
    for (size_t i = 0; i < a.quantities.size(); ++i) {
        CHECK(a.quantities[i].low == b.quantities[i].low);
        CHECK(a.quantities[i].median == b.quantities[i].median);
        CHECK(a.quantities[i].high == b.quantities[i].high);
    }
    opt.seed = 43;
    const ToleranceBand c = tolerance_band(d, {}, opt);
    CHECK(c.find("midband_gain_db")->median != a.find("midband_gain_db")->median);
}

TEST_CASE("run r's draws depend only on the seed and r", "[circuit][tolerance]") {
    const Design d = load_design(sample_design("ld2"));
    const auto short_run = draw_part_values(d, 7, 30);
    const auto long_run = draw_part_values(d, 7, 90);
    for (size_t r = 0; r < short_run.size(); ++r) CHECK(short_run[r].value == long_run[r].value);
}

TEST_CASE("draws stay inside tolerance and beta_range with the stated spread", "[circuit][tolerance]") {
    const Design d = load_design(sample_design("pa1"));
    const auto draws = draw_part_values(d, 3, 4000);
    const Part& r1 = *d.find_part("R1");
    const TransistorModel& m = d.models.begin()->second;
    size_t r1_index = 0, q1_index = 0;
    for (size_t i = 0; i < d.parts.size(); ++i) {
        if (d.parts[i].ref == "R1") r1_index = i;
        if (d.parts[i].ref == "Q1") q1_index = i;
    }
    double sum = 0, sum2 = 0, beta_sum = 0;
    for (const auto& v : draws) {
        const double x = v.value[r1_index] / r1.value - 1;
        CHECK(std::abs(x) <= r1.tolerance);
        sum += x;
        sum2 += x * x;
        const double beta = v.value[q1_index];
        CHECK(beta >= *m.beta_low);
        CHECK(beta <= *m.beta_high);
        beta_sum += beta;
    }
    const double n = static_cast<double>(draws.size());
    const double sd = std::sqrt(sum2 / n - (sum / n) * (sum / n));
    // Source: a normal truncated at ±3σ keeps sd = 0.9866·σ (Johnson, Kotz & Balakrishnan,
    // Continuous Univariate Distributions, truncated normal variance); σ = tol/3.
    CHECK(sd == Approx(0.9866 * r1.tolerance / 3).epsilon(0.05));
    CHECK(beta_sum / n == Approx((*m.beta_low + *m.beta_high) / 2).epsilon(0.02));
}

TEST_CASE("the band is ordered and holds the nominal prediction", "[circuit][tolerance]") {
    for (const char* stem : {"pa1", "sb3", "ld2"}) {
        INFO(stem);
        const Design d = load_design(sample_design(stem));
        ToleranceOptions opt;
        opt.runs = 200;
        const ToleranceBand band = tolerance_band(d, {50.0, {{"out", 10e6, 12e-12}}}, opt);
        CHECK(band.failed_runs == 0);
        for (const auto& q : band.quantities) {
            INFO(q.name);
            if (q.samples == 0) continue;
            CHECK(q.low <= q.median);
            CHECK(q.median <= q.high);
            CHECK(q.nominal >= q.low);
            CHECK(q.nominal <= q.high);
        }
        CHECK(band.find("Q1.ic_a") != nullptr);
    }
}

TEST_CASE("sensitivities name the parts that move each quantity", "[circuit][tolerance]") {
    const Design d = load_design(sample_design("pa1"));
    ToleranceOptions opt;
    opt.runs = 400;
    const ToleranceBand band = tolerance_band(d, {}, opt);
    auto top = [&](const std::string& quantity) {
        for (const auto& s : band.sensitivity)
            if (s.quantity == quantity) return s;
        return Sensitivity{};
    };
    // common practice: the emitter bypass capacitor sets f_low of a fully bypassed CE stage, and
    // the collector current (hence the gain) follows the bias divider and the emitter resistor.
    CHECK(top("f_low_hz").ref == "C2");
    const std::string gain_top = top("midband_gain_db").ref;
    CHECK((gain_top == "R1" || gain_top == "R2" || gain_top == "R4" || gain_top == "R3"));
    double total = 0;
    for (const auto& s : band.sensitivity)
        if (s.quantity == "f_low_hz") {
            CHECK(s.share > 0);
            CHECK(s.share <= 1);
            total += s.share;
        }
    CHECK(total <= 1.0 + 1e-12);
    CHECK(total > 0.9);
}

TEST_CASE("a default-size band: 2000 runs", "[circuit][tolerance]") {
    const Design d = load_design(sample_design("sb3"));
    const ToleranceBand band = tolerance_band(d, {}, {});
    CHECK(band.runs == 2000);
    CHECK(band.failed_runs == 0);
    CHECK(band.coverage == 0.99);
    const QuantityBand* gain = band.find("midband_gain");
    REQUIRE(gain);
    CHECK(gain->samples == 2000);
    CHECK(gain->low < gain->nominal);
    CHECK(gain->high > gain->nominal);
}
