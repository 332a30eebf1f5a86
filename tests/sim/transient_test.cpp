// The three time-domain pieces agree: shooting, settling by the period-to-period transition and
// brute-force trapezoidal integration; and the small-signal steady state matches AC analysis.
#include <cmath>
#include <numbers>

#include <catch2/catch.hpp>

#include "fit/circuit/ac.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/steady_state.h"
#include "fit/circuit/transient.h"
#include "sim_support.h"

using namespace ampbench;
using namespace ampbench::circuit;

namespace {

struct Fixture {
    Netlist nl;
    OperatingPoint op;
    TransientEngine engine;
    explicit Fixture(double cap_scale)
        : nl(build_netlist(sim::test::ce_design(cap_scale), {})), op(solve_operating_point(nl)), engine(nl) {}
};

// Amplitude of node `node` over one period integrated from `s` (a state at phase 0).
double period_amplitude(TransientEngine& e, TransientState s, const SineStimulus& g, int steps, int node) {
    std::vector<double> y;
    e.integrate(s, 0.0, g.period_s() / steps, steps, g, nullptr,
                [&](double, const double* x) { y.push_back(TransientEngine::node_voltage({x, x + s.x.size()}, node)); });
    return sim::test::fit_sine(y, g.period_s() / steps, g.period_s() / steps, g.freq_hz).amplitude;
}

double max_abs_diff(const std::vector<double>& a, const std::vector<double>& b, size_t n) {
    double m = 0;
    for (size_t i = 0; i < n; ++i) m = std::max(m, std::abs(a[i] - b[i]));
    return m;
}

}  // namespace

TEST_CASE("shooting finds the state brute-force integration converges to", "[sim][transient]") {
    Fixture f(0.01);  // coupling capacitors /100: the slowest time constant is a few periods
    const SineStimulus g{5e-3, 20e3, 0.0, 0.0};
    ShootingOptions opt;
    opt.steps_per_period = 100;
    const TransientState guess = ac_initial_guess(f.engine, f.op.x, AcAnalysis(f.nl, f.op).solution(g.freq_hz), g);
    const PeriodicSteadyState pss = shoot_periodic(f.engine, g, guess, opt);
    REQUIRE(pss.converged);

    // Brute force from rest (the sine switched on at t = 0) for many periods.
    TransientState s = f.engine.state_at_rest(f.op.x);
    const double h = g.period_s() / opt.steps_per_period;
    f.engine.integrate(s, 0.0, h, 400L * opt.steps_per_period, g);
    const size_t n = s.x.size();
    const double scale = period_amplitude(f.engine, pss.start, g, opt.steps_per_period, f.nl.out);
    CHECK(scale > 0.1);  // the stage has gain
    CHECK(max_abs_diff(s.x, pss.start.x, n) < 1e-3 * scale);
    const double brute_amp = period_amplitude(f.engine, s, g, opt.steps_per_period, f.nl.out);
    CHECK(brute_amp == Approx(scale).epsilon(1e-3));
}

TEST_CASE("settling by the monodromy matrix matches integration after a frequency step", "[sim][transient]") {
    Fixture f(0.01);
    ShootingOptions opt;
    opt.steps_per_period = 100;
    AcAnalysis ac(f.nl, f.op);
    const SineStimulus g1{5e-3, 5e3, 0.0, 0.0}, g2{5e-3, 20e3, 0.0, 0.0};
    const PeriodicSteadyState p1 = shoot_periodic(f.engine, g1, ac_initial_guess(f.engine, f.op.x, ac.solution(g1.freq_hz), g1), opt);
    const PeriodicSteadyState p2 = shoot_periodic(f.engine, g2, ac_initial_guess(f.engine, f.op.x, ac.solution(g2.freq_hz), g2), opt);
    // The step happens at phase 0 of both (phase-continuous).
    for (long long k : {3LL, 20LL}) {
        TransientState brute = p1.start;
        f.engine.integrate(brute, 0.0, g2.period_s() / opt.steps_per_period, k * opt.steps_per_period, g2);
        const TransientState jumped = settle_periods(p2, p1.start, k);
        const size_t n = brute.x.size();
        const double deviation = max_abs_diff(brute.x, p2.start.x, n);
        INFO("k = " << k << ", deviation from the new orbit " << deviation);
        CHECK(deviation > 1e-5);  // still settling: the comparison means something
        CHECK(max_abs_diff(brute.x, jumped.x, n) < 1e-3 * deviation + 1e-7);
        const double a_b = period_amplitude(f.engine, brute, g2, opt.steps_per_period, f.nl.out);
        const double a_j = period_amplitude(f.engine, jumped, g2, opt.steps_per_period, f.nl.out);
        CHECK(a_j == Approx(a_b).epsilon(1e-3));
    }
}

TEST_CASE("small-signal periodic steady state agrees with AC analysis", "[sim][transient]") {
    Fixture f(1.0);
    AcAnalysis ac(f.nl, f.op);
    for (double freq : {30.0, 1e3, 1e6}) {
        const SineStimulus g{1e-4, freq, 0.0, 0.0};
        const PeriodicSteadyState pss = shoot_periodic(f.engine, g, ac_initial_guess(f.engine, f.op.x, ac.solution(freq), g));
        const double amp = period_amplitude(f.engine, pss.start, g, pss.steps_per_period, f.nl.out);
        const double in_amp = period_amplitude(f.engine, pss.start, g, pss.steps_per_period, f.nl.in);
        INFO("f = " << freq);
        // Source: fit/circuit AC analysis, the engine written independently of this one.
        CHECK(amp / in_amp == Approx(std::abs(ac.gain(freq))).epsilon(1e-3));
    }
}

TEST_CASE("matrix_power squares correctly", "[sim][transient]") {
    const std::vector<double> m{0.5, 0.25, 0.0, 0.5};
    const auto m3 = matrix_power(m, 2, 3);
    // (0.5 0.25; 0 0.5)^3 = (0.125 0.1875; 0 0.125): the corner is 3·0.5²·0.25
    CHECK(m3[0] == Approx(0.125));
    CHECK(m3[1] == Approx(0.1875));
    CHECK(m3[3] == Approx(0.125));
}
