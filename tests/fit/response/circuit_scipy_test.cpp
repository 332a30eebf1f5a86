// Circuit-model fit against scipy: the same problem (HVE-PA1 on a beta jig, tolerance priors,
// optional DC readings) fitted by scipy.optimize.least_squares on the numpy port of the model in
// tests/bench/circuit_fit_reference.py, run with /usr/bin/python3. The fitted parameters must
// agree within 1e-5 relative.
#include <catch2/catch.hpp>

#include <cmath>
#include <filesystem>
#include <numbers>

#include <unistd.h>

#include "core/random.h"
#include "fit/circuit/design.h"
#include "fit/response/circuit_fit.h"
#include "fit/response/circuit_scipy_support.h"

using namespace ampbench;

namespace {

circuit::BenchLoading scope_loading() {
    circuit::BenchLoading bench;
    bench.probes = {{"in", 10e6, 12e-12}, {"out", 10e6, 12e-12}};
    return bench;
}

void check_against_scipy(const fit::CircuitFitOptions& opt, const fit::GainData& g, const std::string& tag) {
    const circuit::Design d = testing::pa1_on_beta_jig();
    const circuit::BenchLoading bench = scope_loading();
    const fit::CircuitFit ours = fit::fit_circuit(d, bench, g, opt);
    INFO(ours.brief());
    REQUIRE(ours.usable());
    const auto dir =
        std::filesystem::temp_directory_path() / fmt::format("ampbench-circuit-scipy-{}-{}", tag, getpid());
    const nlohmann::json theirs = testing::run_circuit_scipy(testing::circuit_scipy_problem(d, bench, g, opt, 1), dir);
    std::filesystem::remove_all(dir);
    REQUIRE(theirs.is_object());
    INFO(theirs.dump());
    // Source: scipy.optimize.least_squares (method 'lm') on the numpy port of the same model.
    CHECK(theirs.at("status").get<int>() > 0);
    const std::vector<double> p = theirs.at("params").get<std::vector<double>>();
    REQUIRE(p.size() == ours.report.params.size());
    for (std::size_t j = 0; j < p.size(); ++j) {
        INFO(ours.report.params[j].name << ": ampbench " << ours.report.params[j].value << ", scipy " << p[j]);
        CHECK(std::abs(ours.report.params[j].value / p[j] - 1) < 1e-5);
    }
    // The sum of squares at both solutions agrees too.
    CHECK(ours.report.rss == Approx(theirs.at("cost").get<double>()).epsilon(1e-7));
}

}  // namespace

TEST_CASE("circuit fit agrees with scipy's least_squares on the same model", "[fit][circuit_fit][scipy]") {
    fit::CircuitFitOptions opt;
    opt.free = {"Q1.beta", "C3"};
    check_against_scipy(opt, testing::off_nominal_response(testing::pa1_on_beta_jig(), scope_loading(), 40, 29, nullptr), "ac");
}

TEST_CASE("circuit fit with DC readings agrees with scipy's least_squares", "[fit][circuit_fit][scipy]") {
    fit::CircuitFitOptions opt;
    opt.free = {"Q1.beta", "C3"};
    const fit::GainData g =
        testing::off_nominal_response(testing::pa1_on_beta_jig(), scope_loading(), 30, 29, &opt.dc_readings);
    REQUIRE(opt.dc_readings.size() == 3);
    check_against_scipy(opt, g, "dc");
}
