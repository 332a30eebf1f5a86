// Tests for the bench file reader (DESIGN.md §4.3).
#include <catch2/catch.hpp>

#include <string>

#include "core/bench_file.h"
#include "core/errors.h"

using namespace ampbench;
using Catch::Matchers::Contains;

namespace {
std::string sample(const std::string& name) {
    return std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/" + name;
}
}  // namespace

TEST_CASE("the sample benches load", "[core][bench]") {
    const BenchFile v = load_bench_file(sample("virtual.bench.json"));
    CHECK(v.is_virtual());
    CHECK(v.instruments().size() == 4);
    REQUIRE(v.scope.channels.size() == 2);
    const auto* out = v.scope.channel_for_probe("out");
    REQUIRE(out != nullptr);
    CHECK(out->name == "2");
    CHECK(out->ohms == Approx(10e6));
    CHECK(out->farads == Approx(12e-12));
    CHECK(v.meter.channels.size() == 3);
    CHECK(v.meter.accuracy == Approx(0.0005));

    const BenchFile r = load_bench_file(sample("station-a1.bench.json"));
    CHECK_FALSE(r.is_virtual());
    CHECK(r.generator.output_ohms == Approx(50));
    CHECK(r.scope.cal_due == "2027-01-15");
    CHECK(r.scope.channels[0].bandwidth_hz == Approx(20e6));
    CHECK(r.limits.max_generator_vpp.value() == Approx(2));
}

TEST_CASE("bench errors name the file and key", "[core][bench]") {
    auto bad = [](const std::string& json, const char* needle) {
        INFO(json);
        CHECK_THROWS_WITH(parse_bench_file(json, "b.json"), Contains("b.json") && Contains(needle));
    };
    const std::string head = R"({"format":"ampbench-bench/1",)";
    bad(head + R"("generator":{"uri":"sim://"},"scope":{"uri":"tcp://h"}})", "mixes");
    bad(head + R"("generator":{"uri":"sim://?seed=1"},"scope":{"uri":"sim://?seed=2"}})",
        "scope.uri");
    bad(head + R"("generator":{"uri":"tcp://h","output_ohms":"5x"}})", "generator.output_ohms");
    bad(head + R"("generator":{"uri":"tcp://h","load_setting":"75"}})", "generator.load_setting");
    bad(head + R"("scope":{"uri":"tcp://h","channels":{"1":{"probe":"in","ratio":0}}}})",
        "scope.channels.1.ratio");
    bad(head + R"("scope":{"uri":"tcp://h","cal_due":"31/12/2026"}})", "scope.cal_due");
    bad(head + R"("oscilloscope":{"uri":"tcp://h"}})", "unknown key");
    bad(head + R"("limits":{"calibration":"ignore"}})", "limits.calibration");
    bad(R"({"format":"ampbench-bench/9","scope":{"uri":"tcp://h"}})", "newer");
    bad(head + R"("mains_hz":50})", "names no instrument");
}

TEST_CASE("the default virtual bench", "[core][bench]") {
    const BenchFile b = default_virtual_bench("sim://?seed=3");
    CHECK(b.is_virtual());
    CHECK(b.scope.channel_for_probe("in")->ratio == Approx(10));
    CHECK(b.generator.output_ohms == Approx(50));
}
