// Rational transfer-function fits: model Jacobians, recovery of known models, order choice,
// derived quantities against closed forms, magnitude-only data, CSV reading and bad input.
#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>

#include "core/errors.h"
#include "core/random.h"
#include "fit/response/gain_points.h"
#include "fit/response/rational_model.h"
#include "fit/response/response_fit.h"
#include "response_support.h"

using namespace ampbench;
using namespace ampbench::fit;
using ampbench::fit::testing::synthetic_gain;

namespace {
// An inverting RC-coupled stage: two coupling-capacitor sections, two high poles.
const RationalOrder kOrder22{2, 0, 2, 0};
const std::vector<double> kTruth22 = {32.0, 40.0, 8.0, 250e3, 2.5e6};
}  // namespace

TEST_CASE("rational model Jacobians agree with finite differences", "[response]") {
    const std::vector<std::pair<RationalOrder, std::vector<double>>> cases = {
        {{2, 0, 2, 0}, {32.0, 40.0, 8.0, 250e3, 2.5e6}},
        {{3, 1, 1, 0}, {20.0, 50.0, 15.0, 300.0, 40.0, 1e6}},
        {{1, 0, 1, 1}, {10.0, 20.0, 2e5, 1e6, 1.8}},
        {{0, 0, 0, 1}, {0.0, 1e4, 0.4}},
    };
    for (const auto& [order, p] : cases)
        for (bool phase : {true, false}) {
            const GainData d = synthetic_gain(order, -1.0, p, 1.0, 1e7, 30, nullptr, 0, 0, true, phase);
            const RationalResiduals model(d, order, -1.0);
            std::vector<double> jac(model.residual_count() * p.size());
            REQUIRE(model.jacobian(p, jac));
            const std::vector<double> num = numeric_jacobian(model, p);
            for (std::size_t i = 0; i < jac.size(); ++i) {
                INFO(order.name() << " entry " << i);
                CHECK(jac[i] == Approx(num[i]).margin(1e-6).epsilon(1e-5));
            }
        }
}

TEST_CASE("rational Jacobian matches central differences at seeded random parameter points", "[response]") {
    // Every column within 1e-6 of its largest entry: the central difference (fit/lsq
    // numeric_jacobian, step 6e-6 relative) is good to about 1e-9 there, so 1e-6 catches any
    // wrong factor, sign or scaling while not tripping on the difference's own rounding.
    const std::vector<RationalOrder> orders = {{2, 1, 2, 0}, {3, 1, 1, 0}, {2, 0, 0, 1}, {1, 1, 1, 1}, {0, 0, 2, 0}};
    Random rng(2027);
    for (const RationalOrder& order : orders)
        for (int trial = 0; trial < 4; ++trial) {
            // Corners log-uniform: low ones 1–300 Hz, high ones 10 kHz–10 MHz, Q 0.3–5.
            std::vector<double> p = {rng.uniform(-10.0, 40.0)};
            const auto log_uniform = [&](double lo, double hi) { return std::exp(rng.uniform(std::log(lo), std::log(hi))); };
            for (int i = 0; i < order.low_poles + order.low_zeros; ++i) p.push_back(log_uniform(1.0, 300.0));
            for (int i = 0; i < order.high_poles; ++i) p.push_back(log_uniform(1e4, 1e7));
            for (int i = 0; i < order.complex_pairs; ++i) {
                p.push_back(log_uniform(1e4, 1e7));
                p.push_back(log_uniform(0.3, 5.0));
            }
            // Data from another random point of the same order, so the residuals are not near zero.
            std::vector<double> truth = p;
            for (std::size_t j = 1; j < truth.size(); ++j) truth[j] *= std::exp(rng.uniform(-0.5, 0.5));
            const GainData d = synthetic_gain(order, 1.0, truth, 0.5, 5e7, 60, &rng, 0.05, 0.3, true);
            const RationalResiduals model(d, order, 1.0);
            const std::size_t m = model.residual_count(), n = p.size();
            std::vector<double> jac(m * n), r(m);
            REQUIRE(model.jacobian(p, jac));
            model.residuals(p, r);
            const std::vector<double> num = numeric_jacobian(model, p);
            for (std::size_t j = 0; j < n; ++j) {
                double scale = 0;
                for (std::size_t i = 0; i < m; ++i) scale = std::max(scale, std::abs(num[i * n + j]));
                REQUIRE(scale > 0);
                for (std::size_t i = 0; i < m; ++i) {
                    // A phase residual at the ±180° wrap has no derivative; skip those rows.
                    if (i >= d.points.size() && std::abs(std::abs(r[i] * d.points[i - d.points.size()].phase_deg_sd) - 180.0) < 1.0)
                        continue;
                    INFO(order.name() << " trial " << trial << " row " << i << " column " << j);
                    CHECK(std::abs(jac[i * n + j] - num[i * n + j]) <= 1e-6 * scale);
                }
            }
        }
}

TEST_CASE("model names round-trip and bad names are refused", "[response]") {
    for (const char* name : {"rational:2,2", "rational:3/1,2", "rational:2,1+1c", "rational:0,0"})
        CHECK(RationalOrder::parse(name).name() == name);
    CHECK_THROWS_AS(RationalOrder::parse("rational:2"), FitInputError);
    CHECK_THROWS_AS(RationalOrder::parse("rational:1/2,1"), FitInputError);
    CHECK_THROWS_AS(RationalOrder::parse("poly:3"), FitInputError);
}

TEST_CASE("a known rational response is recovered, wrapped or unwrapped", "[response]") {
    Random rng(11);
    for (bool wrapped : {false, true}) {
        const GainData d = synthetic_gain(kOrder22, -1.0, kTruth22, 1.0, 2e7, 120, &rng, 0.05, 0.3, wrapped);
        ResponseFitOptions opt;
        opt.model = "rational:2,2";
        const ResponseFit fit = fit_response(d, opt);
        INFO(fit.brief());
        REQUIRE(fit.usable());
        CHECK(fit.sign == -1.0);
        CHECK(fit.inverting == true);
        const std::vector<double> p = fit.report.values();
        std::vector<double> lows = {p[1], p[2]}, highs = {p[3], p[4]};
        std::sort(lows.begin(), lows.end());
        std::sort(highs.begin(), highs.end());
        CHECK(lows[0] == Approx(8.0).epsilon(0.05));
        CHECK(lows[1] == Approx(40.0).epsilon(0.02));
        CHECK(highs[0] == Approx(250e3).epsilon(0.02));
        CHECK(highs[1] == Approx(2.5e6).epsilon(0.05));
        CHECK(fit.report.chi2_reduced == Approx(1.0).margin(0.3));
    }
}

TEST_CASE("automatic order selection finds the generating order and reports its choice", "[response]") {
    Random rng(3);
    const GainData d = synthetic_gain(kOrder22, -1.0, kTruth22, 1.0, 2e7, 100, &rng, 0.05, 0.3, true);
    const ResponseFit fit = fit_response(d);
    INFO(fit.brief());
    REQUIRE(fit.usable());
    CHECK(fit.order.low_poles == 2);
    CHECK(fit.order.high_poles + 2 * fit.order.complex_pairs == 2);
    CHECK(fit.candidates.size() > 10);
    REQUIRE_FALSE(fit.notes.empty());
    CHECK(fit.notes[0].find("chosen by BIC") != std::string::npos);
}

TEST_CASE("derived corners match the closed form of a one-pole low-pass", "[response]") {
    // |H|² = K²/(1+(f/p)²); the maximum over [f_min, f_max] is at f_min, so the −3 dB point is
    // f = p·sqrt(1 + 2(f_min/p)²) (algebra from the definition in DESIGN.md §5).
    const RationalOrder order{0, 0, 1, 0};
    const std::vector<double> truth = {6.0, 1000.0};
    const GainData d = synthetic_gain(order, 1.0, truth, 10.0, 1e5, 60, nullptr, 0, 0, false);
    ResponseFitOptions opt;
    opt.model = "rational:0,1";
    const ResponseFit fit = fit_response(d, opt);
    REQUIRE(fit.report.status != FitStatus::diverged);
    const double f_min = 10.0;
    CHECK(fit.f_high_hz.present);
    CHECK(fit.f_high_hz.value == Approx(1000.0 * std::sqrt(1 + 2 * std::pow(f_min / 1000.0, 2))).epsilon(1e-7));
    CHECK(fit.midband_gain_db.value == Approx(6.0 - 10 * std::log10(1 + std::pow(f_min / 1000.0, 2))).epsilon(1e-7));
    CHECK_FALSE(fit.f_low_hz.present);
    CHECK(fit.inverting == false);
    CHECK(fit.brief().find("f_low not reached") != std::string::npos);
}

TEST_CASE("magnitude-only data are fitted under a stated minimum-phase assumption", "[response]") {
    Random rng(21);
    const GainData d = synthetic_gain(kOrder22, -1.0, kTruth22, 1.0, 2e7, 120, &rng, 0.05, 0.3, true, false);
    ResponseFitOptions opt;
    opt.model = "rational:2,2";
    const ResponseFit fit = fit_response(d, opt);
    INFO(fit.brief());
    REQUIRE(fit.usable());
    CHECK_FALSE(fit.inverting.has_value());
    bool stated = false;
    for (const std::string& n : fit.notes) stated = stated || n.find("minimum-phase") != std::string::npos;
    CHECK(stated);
    const ResponseFit with_phase = fit_response(synthetic_gain(kOrder22, -1.0, kTruth22, 1.0, 2e7, 120, nullptr, 0, 0, true), opt);
    CHECK(fit.f_low_hz.value == Approx(with_phase.f_low_hz.value).epsilon(0.02));
    CHECK(fit.f_high_hz.value == Approx(with_phase.f_high_hz.value).epsilon(0.02));
}

TEST_CASE("gain CSV: both forms, comments, unsorted rows", "[response]") {
    const GainData a = parse_gain_csv("# board PA1-2611-0042\nfreq_hz,gain_db,phase_deg,gain_db_sd,phase_deg_sd\n"
                                      "1000,20,-170,0.05,0.3\n10,12,-100,0.05,0.3\n100,19.5,-160,0.05,0.3\n",
                                      "a.csv");
    REQUIRE(a.points.size() == 3);
    CHECK(a.points[0].freq_hz == 10);
    CHECK(a.points[2].freq_hz == 1000);
    CHECK(a.has_phase);
    CHECK(a.has_sd);
    const GainData b = parse_gain_csv("freq_hz,vin_vpp,vout_vpp\n100,0.1,1.0\n200,0.1,2.0\n", "b.csv");
    CHECK_FALSE(b.has_phase);
    CHECK(b.points[0].gain_db == Approx(20.0));
    CHECK(b.points[1].gain_db == Approx(20 * std::log10(20.0)));
    const GainData c = parse_gain_csv("freq_hz,vin_vpp,vout_vpp,phase_deg\n100,0.1,1.0,179\n200,0.1,1.0,-179\n", "c.csv");
    CHECK(c.has_phase);
    CHECK_FALSE(c.has_sd);
}

TEST_CASE("bad response input gives FitInputError or InputError with one clear line", "[response]") {
    const std::string head = "freq_hz,gain_db,phase_deg\n";
    CHECK_THROWS_WITH(parse_gain_csv(head + "100,1,0\nabc,2,0\n", "x.csv"),
                      Catch::Contains("x.csv") && Catch::Contains("line 3") && Catch::Contains("abc"));
    CHECK_THROWS_AS(parse_gain_csv("freq,gain_db\n1,2\n", "x.csv"), InputError);
    CHECK_THROWS_AS(parse_gain_csv(head + "100,1,0\n100,2,0\n", "x.csv"), FitInputError);  // repeated
    CHECK_THROWS_WITH(parse_gain_csv(head + "100,1,0\n100,2,0\n", "x.csv"), Catch::Contains("more than once"));
    CHECK_THROWS_AS(parse_gain_csv(head + "-5,1,0\n100,2,0\n", "x.csv"), FitInputError);   // negative
    CHECK_THROWS_AS(parse_gain_csv(head + "nan,1,0\n100,2,0\n", "x.csv"), FitInputError);  // NaN
    CHECK_THROWS_WITH(parse_gain_csv(head + "100,1,0\n", "x.csv"), Catch::Contains("1 frequency"));  // one only
    CHECK_THROWS_WITH(parse_gain_csv("freq_hz,vin_vpp,vout_vpp\n100,0.1,0\n200,0.1,1\n", "x.csv"),
                      Catch::Contains("amplitudes must be positive"));  // zero amplitude
    GainData few = synthetic_gain(kOrder22, -1.0, kTruth22, 10, 1e6, 4, nullptr, 0, 0, true);
    ResponseFitOptions opt;
    opt.model = "rational:2,2";
    CHECK_THROWS_WITH(fit_response(few, opt), Catch::Contains("cannot determine the 5 parameters"));
    GainData zero = few;
    zero.points[1].gain_db = -INFINITY;
    CHECK_THROWS_WITH(fit_response(zero, opt), Catch::Contains("zero amplitude"));
    opt.model = "rational:x";
    CHECK_THROWS_AS(fit_response(synthetic_gain(kOrder22, -1.0, kTruth22, 10, 1e6, 40, nullptr, 0, 0, true), opt),
                    FitInputError);
}
