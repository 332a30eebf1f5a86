// Circuit-model fit and effective beta on the HVE-PA1 sample design: bad free names and too few
// points, the prior rows, and the 50 Ω verdict. The ngspice-measured cases are in
// tests/reference/fit_beta_test.cpp.
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include "core/errors.h"
#include "core/random.h"
#include "fit/circuit/design.h"
#include "fit/extract/beta.h"
#include "fit/response/circuit_fit.h"

using namespace ampbench;

namespace {

circuit::Design pa1() {
    // Built in two steps: GCC 12 warns falsely (-Warray-bounds) on string(literal) + literal at -O2.
    std::string path = AMPBENCH_SOURCE_DIR;
    path += "/sample_sessions/pa1.design.json";
    return circuit::load_design(path);
}

// The response of the design at its nominal values with BF changed, 0.05 dB / 0.3° noise.
fit::GainData response_of(const circuit::Design& d, double bf, int points) {
    fit::CircuitModel m(d, {}, {"Q1.beta"});
    std::vector<double> p = m.nominal();
    p[0] = bf;
    REQUIRE(m.set(p));
    fit::GainData g;
    g.has_sd = true;
    Random rng(11);
    for (int i = 0; i < points; ++i) {
        const double f = std::pow(1e7, i / double(points - 1));
        const std::complex<double> h = m.gain(f);
        g.points.push_back({f, 20 * std::log10(std::abs(h)) + rng.normal(0, 0.05),
                            std::arg(h) * 180 / std::numbers::pi + rng.normal(0, 0.3), 0.05, 0.3});
    }
    return g;
}

}  // namespace

TEST_CASE("circuit fit names the part or parameter it does not know", "[fit][circuit_fit]") {
    const circuit::Design d = pa1();
    const fit::GainData g = response_of(d, 400, 30);
    fit::CircuitFitOptions o;
    o.free = {"Q7.beta"};
    CHECK_THROWS_WITH(fit::fit_circuit(d, {}, g, o), Catch::Contains("Q7"));
    o.free = {"Q1.gain"};
    CHECK_THROWS_WITH(fit::fit_circuit(d, {}, g, o), Catch::Contains("gain"));
    o.free = {"R3.beta"};
    CHECK_THROWS_AS(fit::fit_circuit(d, {}, g, o), InputError);
    o.free = {"C3", "C3"};
    CHECK_THROWS_WITH(fit::fit_circuit(d, {}, g, o), Catch::Contains("twice"));
    CHECK(fit::parse_free_list(" Q1.beta, C3,,") == std::vector<std::string>{"Q1.beta", "C3"});
}

TEST_CASE("circuit fit refuses fewer points than free parameters", "[fit][circuit_fit]") {
    const circuit::Design d = pa1();
    fit::GainData g = response_of(d, 400, 3);
    g.has_phase = false;
    fit::CircuitFitOptions o;
    o.free = {"Q1.beta", "C3", "C1"};
    CHECK_THROWS_AS(fit::fit_circuit(d, {}, g, o), FitInputError);
}

TEST_CASE("tolerance priors become nuisance parameters with sigma tol/3", "[fit][circuit_fit]") {
    const circuit::Design d = pa1();
    const fit::CircuitModel m(d, {}, {"Q1.beta", "C3"});
    const auto& params = m.parameters();
    REQUIRE(params.size() == 9);  // Q1.beta, C3 free; C1 R1 R2 R3 R4 C2 RL as priors
    CHECK(params[0].free);
    CHECK(params[1].free);
    for (std::size_t j = 2; j < params.size(); ++j) {
        CHECK_FALSE(params[j].free);
        const circuit::Part* part = d.find_part(params[j].name);
        REQUIRE(part);
        CHECK(params[j].prior_sd_ln == Approx(std::log1p(part->tolerance) / 3));
    }
}

TEST_CASE("beta behind a 50 ohm generator probed at the board input is not identifiable", "[fit][circuit_fit]") {
    const circuit::Design d = pa1();
    const fit::GainData g = response_of(d, 330, 60);
    fit::CircuitFitOptions o;
    o.free = {"Q1.beta"};
    const fit::CircuitFit f = fit::fit_circuit(d, {}, g, o);
    INFO(f.brief());
    REQUIRE(f.report.status != fit::FitStatus::diverged);
    CHECK(f.report.chi2_reduced < 2);
    const extract::EffectiveBeta b = extract::effective_beta(f, d, {});
    INFO(b.brief());
    CHECK(b.verdict == extract::kBetaNotIdentifiable);
    CHECK(b.advice.find("series resistance") != std::string::npos);
    CHECK(b.ci_high / b.beta0 > 1.2);
}
