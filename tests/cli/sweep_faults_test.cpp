// `ampbench sweep --json` on faulted HVE-PA1 boards of the virtual bench: each planted fault
// puts the response out of band and the diagnosis names the faulted part first.
#include <string>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "cli_support.h"

using namespace ampbench::cli::testing;

namespace {

// The sample virtual bench with its sim:// address replaced by `uri`.
std::string bench_for(const std::string& uri) {
    std::string text = read_text(std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/virtual.bench.json");
    const std::string from = "sim://?seed=2611";
    for (size_t at = text.find(from); at != std::string::npos; at = text.find(from, at + uri.size())) text.replace(at, from.size(), uri);
    return text;
}

nlohmann::json sweep_json(const CliTempDir& dir, const std::string& uri, const std::string& serial) {
    const std::string bench = dir.path(serial + ".bench.json");
    // The faults show in midband gain and f_low; the plan stops at 150 kHz, below where the
    // virtual bench's periodic-steady-state solver stops converging.
    write_text(bench, bench_for(uri));
    const CliResult r = run_cli({"--db", dir.db(), "sweep", "--bench", bench, "--design",
                                 std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/pa1.design.json", "--board", serial, "--yes",
                                 "--json", "--no-progress", "--per-decade", "5", "--to", "150e3", "--tolerance-runs", "400"});
    INFO(r.out << r.err);
    REQUIRE(r.code == 0);
    return nlohmann::json::parse(r.out);
}

std::string verdict(const nlohmann::json& j, const std::string& quantity) {
    for (const auto& row : j.at("gap"))
        if (row.at("quantity") == quantity) return row.at("verdict").get<std::string>();
    return "(row missing)";
}

}  // namespace

TEST_CASE("planted faults are out of band and diagnosed by part", "[sweep][fault]") {
    struct Case {
        std::string uri, serial, part, kind;
    };
    // C2 bypasses the emitter resistor (open: gain falls from ~45 dB to ~13 dB), R3 is the
    // collector resistor (2.7 kΩ instead of 5.6 kΩ: gain −6 dB, bias moves), C1 couples the
    // input probe's node to the base (open: the output sinks into the scope's noise while the
    // bias stays where it was, so only the DC readings tell it from a starved transistor).
    const Case cases[] = {{"sim://?seed=2701&fault=C2:open", "PA1-2611-0101", "C2", "open"},
                          {"sim://?seed=2702&value=R3:2k7", "PA1-2611-0102", "R3", "value"},
                          {"sim://?seed=2703&fault=C1:open", "PA1-2611-0103", "C1", "open"}};
    CliTempDir dir;
    for (const Case& c : cases) {
        SECTION(c.part + " " + c.kind) {
            const nlohmann::json j = sweep_json(dir, c.uri, c.serial);
            INFO(j.dump(1));
            CHECK(verdict(j, "midband_gain_db") == "out of band");
            REQUIRE_FALSE(j.at("diagnosis").empty());
            CHECK(j.at("diagnosis")[0].at("ref") == c.part);
            CHECK(j.at("diagnosis")[0].at("kind") == c.kind);
            // 2.7 kΩ for 5.6 kΩ: at the same collector current R3 drops less than half the
            // voltage, so V(c) rises out of its band.
            if (c.part == "R3") CHECK(verdict(j, "V(c)") == "out of band");
        }
    }
}
