// Response fits against the outside world: ngspice-simulated boards, the same fit done by
// scipy.optimize.least_squares, and interval coverage over 200 perturbed boards.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>

#include "core/random.h"
#include "fit/response/response_fit.h"
#include "fit_support.h"

using namespace ampbench;
using namespace ampbench::fit;
using namespace ampbench::fit::testing;

namespace {

GainData noisy_points(const SpiceResponse& r, std::size_t stride, Random& rng, double sd_db, double sd_deg, bool wrap) {
    GainData d;
    d.origin = "ngspice";
    d.has_sd = true;
    for (std::size_t i = 0; i < r.freq_hz.size(); i += stride) {
        GainPoint p;
        p.freq_hz = r.freq_hz[i];
        p.gain_db = r.gain_db[i] + rng.normal(0, sd_db);
        const double phase = r.phase_deg[i] + rng.normal(0, sd_deg);
        p.phase_deg = wrap ? wrap_deg(phase) : phase;
        p.gain_db_sd = sd_db;
        p.phase_deg_sd = sd_deg;
        d.points.push_back(p);
    }
    return d;
}

}  // namespace

TEST_CASE("rational fit of an ngspice response matches scipy least_squares", "[reference][response]") {
    CeBoard board;
    board.rpar = 20e3;  // a finite low-frequency zero as well as zeros at the origin
    const std::vector<SpiceResponse> sim = simulate_boards({board}, 10, 0.1, 2e7, "fit-scipy");
    Random rng(4242);
    const GainData data = prepare_gain_data(noisy_points(sim[0], 1, rng, 0.05, 0.3, true));
    const RationalOrder order = RationalOrder::parse("rational:2/1,2");
    const std::vector<double> start = rational_start(data, order, true);
    const double sign = choose_sign(data, order, start);
    const ResponseFit ours = fit_response_from(data, order, sign, start);
    INFO(ours.brief());
    REQUIRE(ours.usable());
    CHECK(ours.sign == -1.0);

    nlohmann::json problem;
    for (const GainPoint& p : data.points) {
        problem["freq_hz"].push_back(p.freq_hz);
        problem["gain_db"].push_back(p.gain_db);
        problem["phase_deg"].push_back(p.phase_deg);
        problem["gain_db_sd"].push_back(p.gain_db_sd);
        problem["phase_deg_sd"].push_back(p.phase_deg_sd);
    }
    problem["order"] = {{"low_poles", order.low_poles}, {"low_zeros", order.low_zeros},
                        {"high_poles", order.high_poles}, {"complex_pairs", order.complex_pairs}};
    problem["sign"] = sign;
    problem["start"] = start;
    const nlohmann::json scipy = run_scipy_fit(problem, "fit-scipy");
    const std::vector<double> theirs = scipy.at("params").get<std::vector<double>>();
    const std::vector<double> mine = ours.report.values();
    REQUIRE(theirs.size() == mine.size());
    auto sorted = [](const std::vector<double>& p, std::size_t from, std::size_t count) {
        std::vector<double> v(p.begin() + static_cast<long>(from), p.begin() + static_cast<long>(from + count));
        std::sort(v.begin(), v.end());
        return v;
    };
    // Source: scipy.optimize.least_squares (method "lm", MINPACK) on the same residuals.
    CHECK(mine[0] == Approx(theirs[0]).epsilon(1e-5));
    for (auto [from, count] : {std::pair<std::size_t, std::size_t>{1, 2}, {3, 1}, {4, 2}}) {
        const auto a = sorted(mine, from, count), b = sorted(theirs, from, count);
        for (std::size_t k = 0; k < count; ++k) CHECK(a[k] == Approx(b[k]).epsilon(1e-5));
    }
    CHECK(ours.report.rss == Approx(scipy.at("cost").get<double>()).epsilon(1e-8));
}

TEST_CASE("95 % intervals of f_low and f_high cover the ngspice truth over 200 perturbed boards",
          "[reference][response]") {
    Random rng(20261202);
    std::vector<CeBoard> boards;
    for (int k = 0; k < 200; ++k) {
        CeBoard b;
        // Parts spread by about 8 % (one sd) around the nominal board.
        for (double* v : {&b.rs, &b.cin, &b.rb, &b.rpi, &b.cpi, &b.gm, &b.rc, &b.cout, &b.rl, &b.cl})
            *v *= std::max(0.6, 1.0 + 0.08 * rng.normal());
        boards.push_back(b);
    }
    // One batch run: 100 points per decade for the truth, every tenth point is "measured".
    const std::vector<SpiceResponse> sim = simulate_boards(boards, 100, 1.0, 2e7, "fit-coverage");
    REQUIRE(sim.size() == 200);
    int low_in = 0, high_in = 0, usable = 0;
    double worst_midband_error_db = 0;
    for (std::size_t k = 0; k < sim.size(); ++k) {
        const TrueCorners truth = true_corners(sim[k]);
        REQUIRE(truth.has_low);
        REQUIRE(truth.has_high);
        const GainData data = noisy_points(sim[k], 10, rng, 0.05, 0.3, k % 2 == 1);
        ResponseFitOptions opt;
        opt.model = "rational:2,2";
        const ResponseFit fit = fit_response(data, opt);
        INFO("board " << k << ": " << fit.brief());
        REQUIRE(fit.usable());
        ++usable;
        REQUIRE(fit.f_low_hz.present);
        REQUIRE(fit.f_high_hz.present);
        low_in += fit.f_low_hz.ci_low <= truth.f_low && truth.f_low <= fit.f_low_hz.ci_high;
        high_in += fit.f_high_hz.ci_low <= truth.f_high && truth.f_high <= fit.f_high_hz.ci_high;
        worst_midband_error_db = std::max(worst_midband_error_db, std::abs(fit.midband_gain_db.value - truth.peak_db));
        CHECK(fit.inverting == true);
    }
    INFO("f_low covered " << low_in << "/200, f_high covered " << high_in << "/200, worst midband error "
                          << worst_midband_error_db << " dB");
    // Source: ngspice AC analysis of each board (truth); a 95 % interval must cover in ≥ 90 %.
    CHECK(low_in >= 180);
    CHECK(high_in >= 180);
    CHECK(worst_midband_error_db < 0.05);
    WARN("coverage: f_low " << low_in << "/200, f_high " << high_in << "/200, worst midband error "
                            << worst_midband_error_db << " dB");
}
