// Unit tests for the jig computation: KCL currents, GUM sensitivities against the analytic
// derivatives, GUM against Monte Carlo, and the one-line errors.
#include <catch2/catch.hpp>

#include <cmath>
#include <map>
#include <string>

#include "core/errors.h"
#include "fit/lot/jig_measurement.h"

using namespace ampbench;
using namespace ampbench::lot;
using Catch::Matchers::Contains;

namespace {

JigDesign sample_jig() {
    // Built in two steps: GCC 12 warns falsely (-Warray-bounds) on string(literal) + literal at -O2.
    std::string path = AMPBENCH_SOURCE_DIR;
    path += "/sample_sessions/jig-bc1.design.json";
    return load_jig_design(path, "Q1");
}

// A plausible set of readings of the sample jig (npn, beta near 200).
const std::map<std::string, double> kReadings = {
    {"vcc", 10.0}, {"b", 1.1682}, {"c", 6.7995}, {"e", 0.47382}};

JigDesign jig_from(const std::string& parts, const std::string& supply = "vcc") {
    return parse_jig_design(R"({"format": "ampbench-design/1", "supply": {"node": ")" + supply +
                                R"(", "volts": "10"}, "parts": [)" + parts +
                                R"(], "models": {"m": {"beta": "200"}}})",
                            "jig.json", "Q1");
}

}  // namespace

TEST_CASE("currents by KCL with an ideal meter", "[fit][lot]") {
    const JigMeasurement m(sample_jig(), {"vcc", "b", "c", "e"}, MeterModel{0.0, 0.0005});
    const auto op = m.evaluate(kReadings);
    const double ib = (10.0 - 1.1682) / 390e3, ic = (10.0 - 6.7995) / 680.0, ie = 0.47382 / 100.0;
    CHECK(op.ib_a.value == Approx(ib).epsilon(1e-12));
    CHECK(op.ic_a.value == Approx(ic).epsilon(1e-12));
    CHECK(op.ie_a.value == Approx(ie).epsilon(1e-12));
    CHECK(op.hfe.value == Approx(ic / ib).epsilon(1e-12));
    CHECK(op.vbe_v.value == Approx(1.1682 - 0.47382).epsilon(1e-12));
    CHECK(op.vce_v.value == Approx(6.7995 - 0.47382).epsilon(1e-12));
    CHECK(op.problem.empty());
}

TEST_CASE("GUM sensitivities match the analytic derivatives", "[fit][lot]") {
    // Source: JCGM 100:2008 eq. (10); hFE = RB (Vcc - Vc) / (RC (Vcc - Vb)) with an ideal meter,
    // so the relative variance is the sum of the squared relative terms below.
    const JigMeasurement m(sample_jig(), {"vcc", "b", "c", "e"}, MeterModel{0.0, 0.0005});
    const auto op = m.evaluate(kReadings);
    const double vcc = 10.0, vb = 1.1682, vc = 6.7995;
    const double u_r = 0.01 / std::sqrt(3.0);              // 1 % tolerance, uniform
    const auto u_v = [](double v) { return 0.0005 * v / std::sqrt(3.0); };  // meter, uniform
    const double rel2 = 2 * u_r * u_r + std::pow(u_v(vc) / (vcc - vc), 2) +
                        std::pow(u_v(vb) / (vcc - vb), 2) +
                        std::pow(u_v(vcc) * (1 / (vcc - vc) - 1 / (vcc - vb)), 2);
    CHECK(op.hfe.u == Approx(op.hfe.value * std::sqrt(rel2)).epsilon(1e-6));
    REQUIRE(op.hfe_budget.size() >= 2);
    CHECK((op.hfe_budget[0].name == "R:RB" || op.hfe_budget[0].name == "R:RC"));
    for (const auto& line : op.hfe_budget)
        if (line.name == "R:RB") CHECK(line.sensitivity == Approx(op.hfe.value / 390e3).epsilon(1e-6));
}

TEST_CASE("GUM and Monte Carlo propagation agree", "[fit][lot]") {
    // Source: JCGM 101:2008 §8 (validation of the GUM framework by a Monte Carlo method); the
    // acceptance asks for agreement of the standard uncertainties within 10 %.
    JigDesign jig = sample_jig();
    jig.resistor("RB")->measured_rel_u = 0.002;  // one measured (normal) input among uniform ones
    jig.resistor("RB")->measured_on = "2026-11-20";
    const JigMeasurement m(jig, {"vcc", "b", "c", "e"}, MeterModel{10e6, 0.0005});
    const auto gum = m.evaluate(kReadings);
    const auto mc = m.monte_carlo(kReadings, 20000, 2611);
    CHECK(mc.hfe.u == Approx(gum.hfe.u).epsilon(0.10));
    CHECK(mc.ic_a.u == Approx(gum.ic_a.u).epsilon(0.10));
    CHECK(mc.ib_a.u == Approx(gum.ib_a.u).epsilon(0.10));
    CHECK(mc.vbe_v.u == Approx(gum.vbe_v.u).epsilon(0.10));
    CHECK(mc.hfe.value == Approx(gum.hfe.value).epsilon(0.002));
    // The same seed replays the same draws.
    CHECK(m.monte_carlo(kReadings, 500, 7).hfe.u == m.monte_carlo(kReadings, 500, 7).hfe.u);
    const auto inputs = m.inputs(kReadings);
    CHECK(inputs[0].basis == "measured 2026-11-20, u 0.2%");
    CHECK(inputs[1].basis == "tolerance 1%");
}

TEST_CASE("an unread supply is an input with an assumed setting accuracy", "[fit][lot]") {
    const JigMeasurement m(sample_jig(), {"b", "c", "e"}, MeterModel{});
    const auto inputs = m.inputs(kReadings);
    CHECK(inputs.back().name == "V:supply");
    CHECK(inputs.back().value == 10.0);
    CHECK_THAT(inputs.back().basis, Contains("assumed"));
    CHECK(m.evaluate(kReadings).hfe.value == Approx(208).epsilon(0.01));
}

TEST_CASE("a grounded emitter gets its current from the other two", "[fit][lot]") {
    const JigDesign jig = jig_from(R"({"ref": "RB", "kind": "resistor", "nodes": ["vcc", "b"], "value": "470k"},
        {"ref": "RC", "kind": "resistor", "nodes": ["vcc", "c"], "value": "1k"},
        {"ref": "Q1", "kind": "npn", "nodes": {"c": "c", "b": "b", "e": "gnd"}, "model": "m"})");
    const JigMeasurement m(jig, {"b", "c"}, MeterModel{0.0, 0.0005});
    const auto op = m.evaluate({{"b", 0.68}, {"c", 5.0}});
    CHECK(op.ie_a.value == Approx(op.ic_a.value + op.ib_a.value).epsilon(1e-12));
    CHECK(op.vbe_v.value == Approx(0.68));
}

TEST_CASE("a pnp jig gives positive currents and voltages", "[fit][lot]") {
    const JigDesign jig = jig_from(R"({"ref": "RE", "kind": "resistor", "nodes": ["vcc", "e"], "value": "100"},
        {"ref": "RB", "kind": "resistor", "nodes": ["b", "0"], "value": "390k"},
        {"ref": "RC", "kind": "resistor", "nodes": ["c", "0"], "value": "1k"},
        {"ref": "Q1", "kind": "pnp", "nodes": {"c": "c", "b": "b", "e": "e"}, "model": "m"})");
    const JigMeasurement m(jig, {"vcc", "b", "c", "e"}, MeterModel{0.0, 0.0005});
    const auto op = m.evaluate({{"vcc", 10.0}, {"e", 9.526}, {"b", 8.832}, {"c", 4.716}});
    CHECK(op.ic_a.value == Approx(4.716e-3));
    CHECK(op.ib_a.value == Approx(8.832 / 390e3));
    CHECK(op.ie_a.value == Approx(0.474 / 100));
    CHECK(op.vbe_v.value == Approx(0.694));
    CHECK(op.vce_v.value == Approx(9.526 - 4.716));
    CHECK(op.hfe.value > 0);
}

TEST_CASE("an open base junction or a saturated device is reported", "[fit][lot]") {
    const JigMeasurement m(sample_jig(), {"vcc", "b", "c", "e"}, MeterModel{});
    const auto open = m.evaluate({{"vcc", 10.0}, {"b", 10.0}, {"c", 10.0}, {"e", 0.0}});
    CHECK_THAT(open.problem, Contains("no forward base current"));
    const auto saturated = m.evaluate({{"vcc", 10.0}, {"b", 2.0}, {"c", 1.4}, {"e", 1.3}});
    CHECK_THAT(saturated.problem, Contains("saturated"));
    CHECK(m.evaluate(kReadings).problem.empty());
}

TEST_CASE("jig computation errors name the node", "[fit][lot]") {
    CHECK_THROWS_WITH(JigMeasurement(sample_jig(), {"vcc", "c", "e"}, MeterModel{}),
                      Contains("jig-bc1.design.json") && Contains("base of Q1 (node 'b')"));
    CHECK_THROWS_WITH(JigMeasurement(sample_jig(), {"b", "c", "e", "zz"}, MeterModel{}),
                      Contains("no node 'zz'"));
    CHECK_THROWS_WITH(JigMeasurement(sample_jig(), {"b", "c", "c", "e"}, MeterModel{}),
                      Contains("read twice"));
    const JigMeasurement m(sample_jig(), {"vcc", "b", "c", "e"}, MeterModel{});
    CHECK_THROWS_WITH(m.evaluate({{"vcc", 10.0}, {"b", 1.0}, {"c", 5.0}}),
                      Contains("no reading for the planned node 'e'"));
    const JigDesign divider = jig_from(R"({"ref": "R1", "kind": "resistor", "nodes": ["vcc", "mid"], "value": "10k"},
        {"ref": "R2", "kind": "resistor", "nodes": ["mid", "b"], "value": "100k"},
        {"ref": "RC", "kind": "resistor", "nodes": ["vcc", "c"], "value": "1k"},
        {"ref": "Q1", "kind": "npn", "nodes": {"c": "c", "b": "b", "e": "0"}, "model": "m"})");
    CHECK_THROWS_WITH(JigMeasurement(divider, {"b", "c"}, MeterModel{}),
                      Contains("R2 joins the base node 'b' to node 'mid'") &&
                          Contains("add 'mid'"));
    CHECK_NOTHROW(JigMeasurement(divider, {"mid", "b", "c"}, MeterModel{}));
    CHECK_THROWS_WITH(parse_jig_design(R"({"format": "ampbench-design/1", "supply": {"node": "vcc", "volts": 10},
        "parts": [], "models": {}})", "j.json", "Q1"),
                      Contains("j.json") && Contains("no transistor 'Q1'"));
}
