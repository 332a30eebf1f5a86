// Predictions cross-checked against hand formulas (common practice, named handbook methods) and
// the definitions of DESIGN.md §5.
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include "core/errors.h"
#include "fit/circuit/ac.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/predict.h"
#include "fit/circuit/circuit_support.h"

using namespace ampbench;
using namespace ampbench::circuit;
using ampbench::testing::sample_design;
using ampbench::testing::test_design;

namespace {
double par(double a, double b) { return a * b / (a + b); }
double value(const Design& d, const char* ref) { return d.find_part(ref)->value; }
}  // namespace

TEST_CASE("one-pole RC low-pass: 1 kΩ and 1 µF give 159.15 Hz", "[circuit][predict]") {
    const Design d = parse_design(R"({"format": "ampbench-design/1",
      "supply": {"node": "vcc", "volts": 5, "current_limit": "1m"}, "stimulus": {"node": "in"},
      "parts": [{"ref": "RB", "kind": "resistor", "nodes": ["vcc", "0"], "value": "10k"},
                {"ref": "R1", "kind": "resistor", "nodes": ["in", "out"], "value": "1k"},
                {"ref": "C1", "kind": "capacitor", "nodes": ["out", "0"], "value": "1u"}],
      "probes": {"in": "in", "out": "out"}})", "rc");
    const Prediction p = predict(build_netlist(d));
    // Source: f = 1/(2πRC) of a one-pole RC (REFERENCES.md's ngspice self-test value).
    REQUIRE(p.response.f_high_hz);
    CHECK(*p.response.f_high_hz == Approx(1 / (2 * std::numbers::pi * 1e3 * 1e-6)).epsilon(1e-8));
    CHECK_FALSE(p.response.f_low_hz);
    CHECK(p.response.midband_gain == Approx(1).epsilon(1e-6));
    CHECK_FALSE(p.response.inverting);
    // Thevenin at out: (R1 + generator 50 Ω) at 0.01 Hz, where C1 is nearly open.
    CHECK(p.response.output_impedance_ohm == Approx(1050).epsilon(1e-4));
    CHECK(p.op.supply_current_a == Approx(5.0 / 10e3));
}

TEST_CASE("Thevenin bias estimate of I_C for HVE-PA1", "[circuit][predict]") {
    const Design d = load_design(sample_design("pa1"));
    const Prediction p = predict(build_netlist(d));
    const BjtOperatingPoint& q = p.op.transistors.at(0);
    const double vcc = d.supply_volts, r1 = value(d, "R1"), r2 = value(d, "R2"), re = value(d, "R4");
    const double vth = vcc * r2 / (r1 + r2), rth = par(r1, r2);
    const double beta = q.hfe;
    // common practice: I_E = (V_TH − V_BE)/(R_E + R_TH/(β + 1)) with V_BE ≈ 0.65 V; good to a
    // few per cent because V_BE is only guessed.
    const double ie_estimate = (vth - 0.65) / (re + rth / (beta + 1));
    CHECK(-q.ie_a == Approx(ie_estimate).epsilon(0.05));
    // With the engine's own V_BE the same loop equation holds to the base resistance's drop.
    const double ie_loop = (vth - q.vbe_v) / (re + rth / (beta + 1));
    CHECK(-q.ie_a == Approx(ie_loop).epsilon(0.002));
    CHECK(q.region == std::string("active"));
}

TEST_CASE("bypassed stage: r_e = V_T/I_E and gain ≈ g_m·(R_C ‖ R_L)", "[circuit][predict]") {
    const Design d = load_design(sample_design("pa1"));
    const Prediction p = predict(build_netlist(d));
    const BjtOperatingPoint& q = p.op.transistors.at(0);
    const double vt = thermal_voltage();
    // common practice: r_e = V_T / I_E (about 26 Ω at 1 mA); the model's emitter small-signal
    // resistance is 1/(g_m + g_π).
    const double re_small = 1 / (q.gm_s + 1 / q.rpi_ohm);
    CHECK(re_small == Approx(vt / -q.ie_a).epsilon(0.01));
    const double rl = par(value(d, "R3"), value(d, "RL"));
    const double gm = q.ic_a / vt;
    // common practice: A ≈ g_m·(R_C ‖ R_L); it ignores r_o = (V_A + V_CE)/I_C, worth ~6 % here.
    CHECK(p.response.midband_gain == Approx(gm * rl).epsilon(0.08));
    const double ro = (d.models.begin()->second.early_voltage_v + q.vce_v) / q.ic_a;
    const double rpi = q.rpi_ohm, rb = d.models.begin()->second.base_resistance_ohm;
    // The same with r_o and the r_π/(r_π + r_b) divider: within 1 %.
    CHECK(p.response.midband_gain == Approx(gm * par(rl, ro) * rpi / (rpi + rb)).epsilon(0.01));
    CHECK(p.response.inverting);
    CHECK(std::abs(p.response.midband_phase_deg) == Approx(180).margin(1.0));
}

TEST_CASE("emitter follower gain is just under 1", "[circuit][predict]") {
    const Design d = load_design(test_design("follower"));
    const Prediction p = predict(build_netlist(d));
    const BjtOperatingPoint& q = p.op.transistors.at(0);
    CHECK(p.response.midband_gain < 1.0);
    CHECK(p.response.midband_gain > 0.95);
    CHECK_FALSE(p.response.inverting);
    // common practice: A = R_E'/(R_E' + r_e + (R_S' + r_b)/(β0 + 1)), R_E' = R_E ‖ R_L.
    const double re_load = par(value(d, "R3"), value(d, "RL"));
    const double rs = par(50.0, par(value(d, "R1"), value(d, "R2")));
    const double rb = d.models.begin()->second.base_resistance_ohm;
    const double re_small = thermal_voltage() / -q.ie_a;
    const double a = re_load / (re_load + re_small + (rs + rb) / (q.beta0 + 1));
    CHECK(p.response.midband_gain == Approx(a).epsilon(0.005));
    // common practice: output resistance ≈ r_e + (R_S' + r_b)/(β0 + 1), in parallel with R_E'.
    CHECK(p.response.output_impedance_ohm ==
          Approx(par(re_load, re_small + (rs + rb) / (q.beta0 + 1))).epsilon(0.02));
}

// Gain is V(out)/V(in) with V(in) measured at the board, so in both time-constant estimates the
// in node acts as an ideal source: the generator's resistance does not enter.
TEST_CASE("short-circuit time constants estimate f_low of HVE-PA1", "[circuit][predict]") {
    const Design d = load_design(sample_design("pa1"));
    const Prediction p = predict(build_netlist(d));
    const BjtOperatingPoint& q = p.op.transistors.at(0);
    const double rb = d.models.begin()->second.base_resistance_ohm;
    const double rbias = par(value(d, "R1"), value(d, "R2"));
    const double rin_base = rb + q.rpi_ohm;
    const double ro = (d.models.begin()->second.early_voltage_v + q.vce_v) / q.ic_a;
    // Source: Gray & Meyer, Analysis and Design of Analog Integrated Circuits, short-circuit
    // time-constant method: ω_low ≈ Σ 1/(R_i·C_i), R_i seen by C_i with the others shorted.
    const double r_c1 = par(rbias, rin_base);
    const double r_c2 = par(value(d, "R4"), rin_base / (q.beta0 + 1));
    const double r_c3 = par(value(d, "R3"), ro) + value(d, "RL");
    const double w = 1 / (r_c1 * value(d, "C1")) + 1 / (r_c2 * value(d, "C2")) +
                     1 / (r_c3 * value(d, "C3"));
    const double f_est = w / (2 * std::numbers::pi);
    REQUIRE(p.response.f_low_hz);
    // The estimate errs high when the poles are close; within 15 % here, where the emitter
    // bypass dominates.
    CHECK(f_est >= *p.response.f_low_hz * 0.99);
    CHECK(f_est == Approx(*p.response.f_low_hz).epsilon(0.15));
}

TEST_CASE("open-circuit time constants estimate f_high of HVE-PA1", "[circuit][predict]") {
    const Design d = load_design(sample_design("pa1"));
    const Prediction p = predict(build_netlist(d));
    const BjtOperatingPoint& q = p.op.transistors.at(0);
    const double rb = d.models.begin()->second.base_resistance_ohm;
    const double ro = (d.models.begin()->second.early_voltage_v + q.vce_v) / q.ic_a;
    const double rl = par(par(value(d, "R3"), value(d, "RL")), ro);
    const double cpi = q.eval.dqbe_dvbe, cmu = q.eval.dqbc_dvbc;
    // Source: Gray & Meyer, open-circuit time-constant method: ω_high ≈ 1/Σ R_i°·C_i, with
    // R_π° = r_π ‖ (R_S + r_b), R_μ° = R_x + R_L' + g_m·R_x·R_L' (Miller) and R_S = 0 here.
    const double rx = par(q.rpi_ohm, rb);
    const double tau = rx * cpi + (rx + rl + q.gm_s * rx * rl) * cmu;
    const double f_est = 1 / (2 * std::numbers::pi * tau);
    REQUIRE(p.response.f_high_hz);
    // Σ τ is the first denominator coefficient, so the estimate errs low; with one dominant
    // pole it is within about 10 %.
    CHECK(f_est <= *p.response.f_high_hz * 1.01);
    CHECK(f_est == Approx(*p.response.f_high_hz).epsilon(0.10));
}

TEST_CASE("probe loading and a slower generator lower f_high", "[circuit][predict]") {
    const Design d = load_design(sample_design("pa1"));
    const Prediction bare = predict(build_netlist(d));
    const Prediction loaded =
        predict(build_netlist(d, {600.0, {{"in", 1e6, 100e-12}, {"out", 1e6, 100e-12}}}));
    CHECK(*loaded.response.f_high_hz < 0.9 * *bare.response.f_high_hz);
    CHECK(loaded.response.midband_gain < bare.response.midband_gain);
}

TEST_CASE("a pnp stage reports negative collector current and its region", "[circuit][predict]") {
    const Design d = load_design(sample_design("sb3"));
    const Prediction p = predict(build_netlist(d));
    const BjtOperatingPoint& q = p.op.transistors.at(0);
    CHECK(q.ic_a < 0);
    CHECK(q.ib_a < 0);
    CHECK(q.vbe_v < 0);
    CHECK(q.region == std::string("active"));
    CHECK(q.hfe > 0);
    // common practice: partly bypassed CE gain ≈ R_C‖R_L / (r_e + R_E,unbypassed).
    const double est = par(value(d, "R5"), value(d, "RL")) /
                       (thermal_voltage() / q.ie_a + value(d, "R4"));
    CHECK(p.response.midband_gain == Approx(est).epsilon(0.05));
}

TEST_CASE("largest undistorted swing: cutoff at I_C·R_ac, saturation at V_CE(sat)", "[circuit][predict]") {
    const Design d = load_design(sample_design("pa1"));
    const Prediction p = predict(build_netlist(d));
    const BjtOperatingPoint& q = p.op.transistors.at(0);
    const double rac = par(value(d, "R3"), value(d, "RL"));
    // common practice: load-line limits of a fully bypassed CE stage, peak swing
    // min(I_C·R_ac, V_CE − V_CE(sat)) with V_CE(sat) ≈ 0.2 V and R_ac = R_C ‖ R_L, the load the
    // collector current flows into.
    const double peak = std::min(q.ic_a * rac, q.vce_v - 0.2);
    CHECK(p.response.max_output_vpp == Approx(2 * peak).epsilon(0.02));
}

TEST_CASE("the fast AC path equals a dense complex LU", "[circuit][ac]") {
    for (const std::string& path : {sample_design("pa1"), sample_design("sb3"), sample_design("ld2"),
                                    test_design("follower"), test_design("choke_cs")}) {
        INFO(path);
        const Netlist nl = build_netlist(load_design(path), {50, {{"out", 1e6, 100e-12}}});
        const OperatingPoint op = solve_operating_point(nl);
        AcAnalysis ac(nl, op);
        for (double f : log_frequencies(0.01, 1e9, 23)) {
            const auto fast = ac.solution(f);
            const auto ref = ac.solution_direct(f);
            double scale = 0;
            for (auto v : ref) scale = std::max(scale, std::abs(v));
            // Forming G⁻¹C costs digits to its conditioning; 1e-6 is still 5000 times below the
            // tightest acceptance tolerance (0.5 %).
            for (size_t i = 0; i < fast.size(); ++i)
                CHECK(std::abs(fast[i] - ref[i]) <= 1e-6 * scale);
            const int out = nl.out - 1, in = nl.in - 1;
            CHECK(std::abs(fast[out] / fast[in] - ref[out] / ref[in]) <=
                  1e-5 * std::abs(ref[out] / ref[in]));
            // The modal form behind point() and output_impedance().
            const AcPoint pt = ac.point(f);
            CHECK(std::abs(pt.gain - ref[out] / ref[in]) <= 1e-5 * std::abs(ref[out] / ref[in]));
            CHECK(std::abs(pt.v_out - ref[out]) <= 1e-6 * scale);
        }
    }
}

TEST_CASE("a DC solve that cannot converge gives one clear error", "[circuit][dc]") {
    const Netlist nl = build_netlist(load_design(sample_design("ld2")));
    DcOptions opt;
    opt.max_iterations = 1;
    try {
        solve_operating_point(nl, opt);
        FAIL("converged in one iteration");
    } catch (const InputError& e) {
        const std::string msg = e.what();
        CHECK(msg.find("ld2.design.json") != std::string::npos);
        CHECK(msg.find("did not converge") != std::string::npos);
    }
}

TEST_CASE("Newton converges from an earlier solution", "[circuit][dc]") {
    const Netlist nl = build_netlist(load_design(sample_design("ld2")));
    const OperatingPoint cold = solve_operating_point(nl);
    const OperatingPoint warm = solve_operating_point(nl, {}, &cold.x);
    CHECK(warm.iterations < cold.iterations);
    for (size_t i = 0; i < cold.node_volts.size(); ++i)
        CHECK(warm.node_volts[i] == Approx(cold.node_volts[i]).margin(1e-9));
}
