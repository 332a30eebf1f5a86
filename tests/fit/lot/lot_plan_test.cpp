// Tests for the lot plan reader and its checks against the lot quantity and the jig design.
#include <catch2/catch.hpp>

#include <string>

#include "core/errors.h"
#include "fit/lot/lot_plan.h"

using namespace ampbench;
using namespace ampbench::lot;
using Catch::Matchers::Contains;

namespace {

std::string sample(const std::string& name) {
    // Appended piecewise: GCC 12 warns falsely (-Warray-bounds) on a chained operator+ here.
    std::string path = AMPBENCH_SOURCE_DIR;
    path += "/sample_sessions/";
    path += name;
    return path;
}

// The sample plan's text with one substring replaced, parsed as if it lived beside the jig.
LotPlan edited(const std::string& from, const std::string& to) {
    const std::string text = R"({
  "format": "ampbench-lot-plan/1", "part": "test", "jig": "jig-bc1.design.json", "dut": "Q1",
  "readings": ["vcc", "b", "c", "e"],
  "jig_measured": { "RB": "389.6k", "RC": "679.4", "measured_on": "2026-11-20" },
  "spec": { "conditions": { "ic_a": "5m", "vce_v": "5" },
            "hfe": {"min": "100", "max": "300"}, "vbe_v": {"min": "0.55", "max": "0.75"} },
  "sampling": { "n": 32, "c": 1 } })";
    const auto at = text.find(from);
    REQUIRE(at != std::string::npos);
    std::string changed = text;
    changed.replace(at, from.size(), to);
    return parse_lot_plan(changed, sample("test.lot-plan.json"));
}

}  // namespace

TEST_CASE("the sample plan loads and fits its jig", "[fit][lot]") {
    const LotPlan plan = load_lot_plan(sample("bc1.lot-plan.json"));
    CHECK(plan.dut == "Q1");
    CHECK(plan.sampling.n == 32);
    CHECK(plan.sampling.c == 1);
    CHECK(plan.readings.size() == 4);
    CHECK(*plan.spec.at("hfe").min == Approx(100));
    CHECK(*plan.spec.at("vbe_v").max == Approx(0.75));
    CHECK(*plan.condition_ic_a == Approx(5e-3));
    CHECK(plan.measured_on == "2026-11-20");
    const JigDesign jig = load_plan_jig(plan);
    CHECK(jig.resistor("RB")->ohms == Approx(389.6e3));
    CHECK(*jig.resistor("RB")->measured_rel_u == Approx(0.0005));
    CHECK(jig.resistor("RE")->measured_rel_u.has_value());
    CHECK(jig.supply_v == Approx(10));
    CHECK_NOTHROW(validate_plan_quantity(plan, 32));
    CHECK(plan.spec.at("hfe").contains(100));
    CHECK_FALSE(plan.spec.at("hfe").contains(300.5));
}

TEST_CASE("a plan without measured values keeps the nominal jig", "[fit][lot]") {
    const LotPlan plan = edited(R"("RB": "389.6k", "RC": "679.4", )", "");
    CHECK(plan.jig_measured.empty());
    const JigDesign jig = load_plan_jig(plan);
    CHECK(jig.resistor("RB")->ohms == Approx(390e3));
    CHECK_FALSE(jig.resistor("RB")->measured_rel_u.has_value());
    CHECK(jig.resistor("RB")->tolerance == Approx(0.01));
}

TEST_CASE("bad plans give one line naming file and key", "[fit][lot]") {
    const auto bad = [](const std::string& from, const std::string& to, const char* key,
                        const char* why) {
        INFO(from << " -> " << to);
        CHECK_THROWS_WITH(edited(from, to),
                          Contains("test.lot-plan.json") && Contains(key) && Contains(why));
    };
    bad(R"("c": 1)", R"("c": 32)", "sampling.c", "below the sample size n = 32");
    bad(R"("c": 1)", R"("c": 40)", "sampling.c", "below the sample size");
    bad(R"("c": 1)", R"("c": -1)", "sampling.c", "negative");
    bad(R"("n": 32)", R"("n": 0)", "sampling.n", "at least 1");
    bad(R"("n": 32)", R"("n": 3.5)", "sampling.n", "whole number");
    bad(R"("min": "100")", R"("min": "400")", "spec.hfe.min", "above max");
    bad(R"("max": "0.75")", R"("max": "0.5")", "spec.vbe_v.min", "above max");
    bad(R"("min": "100")", R"("min": "1x0")", "spec.hfe.min", "not a value");
    bad(R"("hfe": {)", R"("gain": {)", "spec.gain", "unknown quantity");
    bad(R"("vce_v": "5")", R"("vce_v": "-5")", "spec.conditions.vce_v", "positive");
    bad(R"("readings": ["vcc", "b", "c", "e"])", R"("readings": [])", "readings", "no node");
    bad(R"("readings": ["vcc", "b", "c", "e"])", R"("readings": ["b", "b"])", "readings[1]",
        "twice");
    bad(R"("measured_on": "2026-11-20")", R"("measured_on": "20 Nov")", "jig_measured.measured_on",
        "not a date");
    bad(R"(, "measured_on": "2026-11-20")", "", "jig_measured.measured_on", "missing");
    bad(R"("RC": "679.4")", R"("RC": "-3")", "jig_measured.RC", "positive");
    bad(R"("part": "test")", R"("parts": "test")", "parts", "unknown key");
    bad(R"("format": "ampbench-lot-plan/1")", R"("format": "ampbench-lot-plan/2")", "format",
        "newer");
}

TEST_CASE("plan checks against the lot quantity and the jig", "[fit][lot]") {
    const LotPlan plan = edited("", "");
    CHECK_THROWS_WITH(validate_plan_quantity(plan, 20),
                      Contains("test.lot-plan.json") && Contains("sampling.n") &&
                          Contains("sample size 32 exceeds the lot quantity 20"));
    CHECK_THROWS_WITH(validate_plan_quantity(plan, 0), Contains("at least 1"));

    const auto bad_with_jig = [](const std::string& from, const std::string& to, const char* key,
                                 const char* why) {
        INFO(from << " -> " << to);
        const LotPlan p = edited(from, to);
        CHECK_THROWS_WITH(load_plan_jig(p),
                          Contains("test.lot-plan.json") && Contains(key) && Contains(why));
    };
    bad_with_jig(R"("dut": "Q1")", R"("dut": "Q7")", "dut", "'Q7' is not a transistor");
    bad_with_jig(R"("dut": "Q1")", R"("dut": "RB")", "dut", "'RB' is not a transistor");
    bad_with_jig(R"("vcc", "b", "c", "e")", R"("vcc", "b", "c", "x")", "readings[3]",
                 "node 'x' is not in");
    bad_with_jig(R"("RC": "679.4")", R"("RQ": "998.7")", "jig_measured.RQ", "no part 'RQ'");
    bad_with_jig(R"("RC": "679.4")", R"("C1": "998.7")", "jig_measured.C1", "not a resistor");
    bad_with_jig(R"("jig-bc1.design.json")", R"("nowhere.design.json")", "jig", "cannot open");
}
