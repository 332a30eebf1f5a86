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

// The model's own response with parts off nominal, 0.05 dB / 0.3° noise, and its DC node
// voltages (with 2 mV of meter noise) when `dc` is set.
fit::GainData off_nominal_response(const circuit::Design& d, const circuit::BenchLoading& bench, int points,
                                   std::vector<fit::DcReading>* dc) {
    fit::CircuitModel m(d, bench, {"Q1.beta", "C3"});
    std::vector<double> p = m.nominal();
    for (std::size_t j = 0; j < p.size(); ++j) {
        const std::string& name = m.parameters()[j].name;
        if (name == "Q1.beta") p[j] = 330;
        if (name == "C3") p[j] *= 0.88;
        if (name == "R1") p[j] *= 1.02;
        if (name == "C1") p[j] *= 0.93;
    }
    REQUIRE(m.set(p));
    fit::GainData g;
    g.has_sd = true;
    Random rng(29);
    for (int i = 0; i < points; ++i) {
        const double f = std::pow(1e7, i / double(points - 1));
        const std::complex<double> h = m.gain(f);
        g.points.push_back({f, 20 * std::log10(std::abs(h)) + rng.normal(0, 0.05),
                            fit::wrap_deg(std::arg(h) * 180 / std::numbers::pi + rng.normal(0, 0.3)), 0.05, 0.3});
    }
    if (dc)
        for (const char* node : {"b", "e", "c"}) {
            const double v = m.operating_point().node_volts[static_cast<std::size_t>(m.netlist().node_index(node))];
            dc->push_back({node, v + rng.normal(0, 0.002), 0.002});
        }
    return g;
}

void check_against_scipy(const fit::CircuitFitOptions& opt, const fit::GainData& g, const std::string& tag) {
    const circuit::Design d = testing::pa1_on_beta_jig();
    circuit::BenchLoading bench;
    bench.probes = {{"in", 10e6, 12e-12}, {"out", 10e6, 12e-12}};
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
    const circuit::Design d = testing::pa1_on_beta_jig();
    circuit::BenchLoading bench;
    bench.probes = {{"in", 10e6, 12e-12}, {"out", 10e6, 12e-12}};
    fit::CircuitFitOptions opt;
    opt.free = {"Q1.beta", "C3"};
    check_against_scipy(opt, off_nominal_response(d, bench, 40, nullptr), "ac");
}

TEST_CASE("circuit fit with DC readings agrees with scipy's least_squares", "[fit][circuit_fit][scipy]") {
    const circuit::Design d = testing::pa1_on_beta_jig();
    circuit::BenchLoading bench;
    bench.probes = {{"in", 10e6, 12e-12}, {"out", 10e6, 12e-12}};
    fit::CircuitFitOptions opt;
    opt.free = {"Q1.beta", "C3"};
    const fit::GainData g = off_nominal_response(d, bench, 30, &opt.dc_readings);
    REQUIRE(opt.dc_readings.size() == 3);
    check_against_scipy(opt, g, "dc");
}
