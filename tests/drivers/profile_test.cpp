// Instrument profile loading and validation.
#include <catch2/catch.hpp>

#include "core/errors.h"
#include "drivers/profiles/profile.h"

using namespace ampbench;
using namespace ampbench::drivers;

TEST_CASE("the shipped scpi-generic profile loads and covers every role", "[profile]") {
    const Profile p = find_profile("scpi-generic", {}, "", "profile");
    CHECK(p.name == "scpi-generic");
    // Source: IEEE 488.2-1992 §10.14 *IDN?, §10.18 *OPC?; SCPI-1999 Vol. 2 §21.8 SYSTem:ERRor?.
    CHECK(p.session.identify == "*IDN?");
    CHECK(p.session.operation_complete == "*OPC?");
    CHECK(p.session.error_query == "SYSTem:ERRor?");
    for (const char* op : {"generator.frequency", "generator.output", "scope.preamble", "scope.waveform_binary",
                           "meter.route_close", "supply.current_limit", "supply.output"}) {
        const std::string key = op;
        CHECK(p.has(key.substr(0, key.find('.')), key.substr(key.find('.') + 1)));
    }
    CHECK(p.require("generator", "load").token("high-z") == "INFinity");
    CHECK(expand_template(p.require("meter", "route_close").send, "", "101") == "ROUTe:CLOSe (@101)");
}

TEST_CASE("a bad profile names the file and the key", "[profile]") {
    const std::string head = R"({"format":"ampbench-profile/1","name":"x",)";
    CHECK_THROWS_WITH(parse_profile(head + R"("scope":{"prob_ratio":{"send":"X {value}"}}})", "my.json"),
                      Catch::Contains("my.json") && Catch::Contains("prob_ratio"));
    CHECK_THROWS_WITH(parse_profile(head + R"("scope":{"timebase":{"send":"T {val}"}}})", "my.json"),
                      Catch::Contains("scope.timebase.send") && Catch::Contains("{val}"));
    CHECK_THROWS_WITH(parse_profile(head + R"("meter":{"read_dc":{"query":"READ?","reply":"float"}}})", "my.json"),
                      Catch::Contains("meter.read_dc.reply"));
    CHECK_THROWS_WITH(parse_profile(head + R"("supply":{"voltage":{"send":"VOLT"}}})", "my.json"),
                      Catch::Contains("{value}"));
    CHECK_THROWS_AS(parse_profile(R"({"format":"ampbench-profile/2","name":"x"})", "my.json"), InputError);
    CHECK_THROWS_AS(parse_profile("{not json", "my.json"), InputError);
    CHECK_THROWS_WITH(find_profile("no-such-profile", {}, "b.json", "scope.profile"),
                      Catch::Contains("b.json") && Catch::Contains("scope.profile"));
    const Profile p = parse_profile(head + R"("meter":{"read_dc":{"query":"READ?","reply":"number"}}})", "my.json");
    CHECK_THROWS_WITH(p.require("meter", "route_close"), Catch::Contains("meter.route_close"));
}
