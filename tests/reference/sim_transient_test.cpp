// The virtual bench's time-domain truth against ngspice `.tran`: the periodic steady state of the
// HVE-PA1 sample design at 1 kHz (amplitude and DC levels) and an overdriven, clipping case.
#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <tuple>
#include <vector>

#include <catch2/catch.hpp>

#include "circuit_deck_support.h"
#include "fit/circuit/ac.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/steady_state.h"
#include "fit/circuit/transient.h"

using namespace ampbench;
using namespace ampbench::circuit;

namespace {

constexpr double kFreqHz = 1e3;
constexpr double kSmallPeakV = 1e-3;      // well inside the linear range (gain ≈ 190)
constexpr double kOverdrivePeakV = 40e-3;  // drives the collector into saturation and cutoff
// Long enough for the slowest coupling time constant (C3 with R3 + RL, about 0.5 s) to die out
// to well below the tolerances, also after the bias shift an overdriven stage rectifies.
constexpr double kSettleS = 4.0;

// One period of node voltages on a uniform grid.
struct Waveform {
    std::vector<double> out, c, e, b;
    static double mean(const std::vector<double>& v) {
        double s = 0;
        for (double x : v) s += x;
        return s / static_cast<double>(v.size());
    }
    static double peak_high(const std::vector<double>& v) { return *std::max_element(v.begin(), v.end()); }
    static double peak_low(const std::vector<double>& v) { return *std::min_element(v.begin(), v.end()); }
};

// Amplitude of the fundamental over whole periods of uniform samples (a DFT bin).
double fundamental_amplitude(const std::vector<double>& v) {
    const double n = static_cast<double>(v.size());
    double re = 0, im = 0;
    for (size_t i = 0; i < v.size(); ++i) {
        const double w = 2 * std::numbers::pi * static_cast<double>(i) / n;
        re += v[i] * std::cos(w);
        im += v[i] * std::sin(w);
    }
    return 2 * std::hypot(re, im) / n;
}

BenchLoading probe_loading() {
    BenchLoading bench;
    bench.probes = {{"in", 10e6, 12e-12}, {"out", 10e6, 12e-12}};
    return bench;
}

// The engine's periodic orbit, sampled at `steps` points of one period.
Waveform engine_orbit(const Design& design, double peak_v, int steps) {
    const Netlist nl = build_netlist(design, probe_loading());
    const OperatingPoint op = solve_operating_point(nl);
    TransientEngine engine(nl);
    AcAnalysis ac(nl, op);
    const SineStimulus g{peak_v, kFreqHz, 0.0, 0.0};
    ShootingOptions opt;
    opt.steps_per_period = steps;
    const PeriodicSteadyState pss =
        shoot_periodic(engine, g, ac_initial_guess(engine, op.x, ac.solution(kFreqHz), g), opt);
    REQUIRE(pss.converged);
    const int n_out = nl.node_index("out"), n_c = nl.node_index("c"), n_e = nl.node_index("e"),
              n_b = nl.node_index("b");
    Waveform w;
    TransientState s = pss.start;
    auto record = [&](const std::vector<double>& x) {
        w.out.push_back(TransientEngine::node_voltage(x, n_out));
        w.c.push_back(TransientEngine::node_voltage(x, n_c));
        w.e.push_back(TransientEngine::node_voltage(x, n_e));
        w.b.push_back(TransientEngine::node_voltage(x, n_b));
    };
    record(s.x);
    const size_t size = s.x.size();
    engine.integrate(s, 0.0, pss.step_s(), steps - 1, g, nullptr,
                     [&](double, const double* x) { record(std::vector<double>(x, x + size)); });
    return w;
}

// ngspice's waveforms over the last period after kSettleS, for each drive level, from one deck.
std::vector<Waveform> ngspice_orbits(const Design& design, const std::vector<double>& peaks_v, int steps) {
    std::string circuit = testing::spice_circuit(design, probe_loading());
    // The generator as a sine from t = 0 (the deck writer's source is for AC analysis).
    const std::string ac_source = "Vgen ngen 0 DC 0 AC 1";
    const size_t at = circuit.find(ac_source);
    REQUIRE(at != std::string::npos);
    circuit.replace(at, ac_source.size(), "Vgen ngen 0 DC 0 SIN(0 " + testing::spice_number(peaks_v[0]) + " " +
                                              testing::spice_number(kFreqHz) + " 0 0 0)");
    const double period = 1.0 / kFreqHz, step = period / steps;
    const std::string tran = "tran " + testing::spice_number(step) + " " + testing::spice_number(kSettleS + period) +
                             " " + testing::spice_number(kSettleS) + " " + testing::spice_number(step) + "\n";
    std::string control = ".options reltol=1e-5\n.control\nset wr_singlescale\nset wr_vecnames\n";
    for (size_t k = 0; k < peaks_v.size(); ++k) {
        if (k > 0)
            control += "alter @vgen[sin] = [ 0 " + testing::spice_number(peaks_v[k]) + " " +
                       testing::spice_number(kFreqHz) + " 0 0 0 ]\n";
        control += tran + "linearize v(n_out) v(n_c) v(n_e) v(n_b)\n" + "wrdata run" + std::to_string(k) +
                   ".txt v(n_out) v(n_c) v(n_e) v(n_b)\n";
    }
    control += ".endc\n.end\n";
    const auto dir = testing::scratch_dir("sim-tran");
    REQUIRE(testing::run_ngspice(dir, circuit + control));
    std::vector<Waveform> out;
    for (size_t k = 0; k < peaks_v.size(); ++k) {
        const testing::WrData data = testing::read_wrdata((dir / ("run" + std::to_string(k) + ".txt")).string());
        REQUIRE(data.rows.size() >= static_cast<size_t>(steps));
        Waveform w;
        // `linearize` puts points at tstart + i·step; the first `steps` cover one whole period.
        for (int i = 0; i < steps; ++i) {
            const auto& r = data.rows[static_cast<size_t>(i)];
            REQUIRE(r.size() == 5);
            w.out.push_back(r[1]);
            w.c.push_back(r[2]);
            w.e.push_back(r[3]);
            w.b.push_back(r[4]);
        }
        out.push_back(std::move(w));
    }
    return out;
}

}  // namespace

TEST_CASE("steady state of HVE-PA1 at 1 kHz matches ngspice .tran", "[reference][sim]") {
    const Design design = load_design(AMPBENCH_SOURCE_DIR "/sample_sessions/pa1.design.json");
    constexpr int kSteps = 200;
    // Source: ngspice `.tran` (trapezoidal, reltol 1e-5) run kSettleS from the operating point
    // with the same Gummel–Poon model card; the engine's orbit comes from shooting.
    const std::vector<Waveform> spice = ngspice_orbits(design, {kSmallPeakV, kOverdrivePeakV}, kSteps);

    SECTION("small signal: output amplitude within 1 %, DC levels within 2 mV") {
        const Waveform ours = engine_orbit(design, kSmallPeakV, kSteps);
        const Waveform& ref = spice[0];
        const double amp_ours = fundamental_amplitude(ours.out), amp_ref = fundamental_amplitude(ref.out);
        INFO("output amplitude: engine " << amp_ours << " V, ngspice " << amp_ref << " V");
        CHECK(amp_ref > 0.1);  // the stage really amplifies 1 mV
        CHECK(amp_ours == Approx(amp_ref).epsilon(0.01));
        for (auto [name, a, b] : {std::tuple{"collector", &ours.c, &ref.c}, std::tuple{"emitter", &ours.e, &ref.e},
                                  std::tuple{"base", &ours.b, &ref.b}, std::tuple{"output", &ours.out, &ref.out}}) {
            INFO(name << " DC level: engine " << Waveform::mean(*a) << " V, ngspice " << Waveform::mean(*b) << " V");
            CHECK(std::abs(Waveform::mean(*a) - Waveform::mean(*b)) < 2e-3);
        }
    }

    SECTION("overdriven: clipped positive and negative output peaks within 2 %") {
        const Waveform ours = engine_orbit(design, kOverdrivePeakV, kSteps);
        const Waveform& ref = spice[1];
        const double hi_ours = Waveform::peak_high(ours.out), hi_ref = Waveform::peak_high(ref.out);
        const double lo_ours = Waveform::peak_low(ours.out), lo_ref = Waveform::peak_low(ref.out);
        INFO("positive peak: engine " << hi_ours << " V, ngspice " << hi_ref << " V");
        INFO("negative peak: engine " << lo_ours << " V, ngspice " << lo_ref << " V");
        // Clipping is real: the linear gain would swing far beyond the supply.
        CHECK(hi_ref - lo_ref < 0.75 * 2 * kOverdrivePeakV * fundamental_amplitude(spice[0].out) / kSmallPeakV);
        CHECK(hi_ours == Approx(hi_ref).epsilon(0.02));
        CHECK(lo_ours == Approx(lo_ref).epsilon(0.02));
        // The collector's own peaks, where the clipping happens, agree too.
        CHECK(Waveform::peak_high(ours.c) == Approx(Waveform::peak_high(ref.c)).epsilon(0.02));
        CHECK(Waveform::peak_low(ours.c) == Approx(Waveform::peak_low(ref.c)).epsilon(0.02));
    }
}
