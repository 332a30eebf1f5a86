// Acceptance 5 of the lot-inspection issue: the operator stops with `q`, `lot measure` again
// continues at the next device, nothing is measured twice, and a skipped device is replaced.
#include <catch2/catch.hpp>

#include <set>

#include <nlohmann/json.hpp>

#include "cli_support.h"
#include "lot_support.h"

using namespace ampbench::cli::testing;
using Catch::Matchers::Contains;

TEST_CASE("lot measure stops on q and resumes at the next device and replaces a skip", "[cli][lot][sim]") {
    CliTempDir dir;
    const LotFiles f = write_lot_files(dir, "sim://?tray=5&defective=0.03");
    REQUIRE(run_cli({"--db", dir.db(), "lot", "start", "--plan", f.plan, "--lot", "LOT-2611-BC1", "--qty", "500"}).code == 0);

    // Devices 1 and 2 measured, 3 skipped (bent lead), its replacement measured, then stop.
    write_text(dir.path("answers-1.txt"), "\n\ns bent lead\n\nq\n");
    const auto first = run_cli({"--db", dir.db(), "lot", "measure", "LOT-2611-BC1", "--bench", f.bench, "--answers",
                                dir.path("answers-1.txt")});
    INFO(first.err);
    REQUIRE(first.code == 0);
    CHECK_THAT(first.out, Contains("Insert device 1 of 32") && Contains("Insert device 3 of 32 (a replacement") &&
                              Contains("Device 3: skipped (bent lead)") && Contains("Stopped"));
    CHECK(first.out.find("Insert device 4 of 32") != std::string::npos);  // asked, answered q

    const auto mid = nlohmann::json::parse(run_cli({"--db", dir.db(), "lot", "verdict", "LOT-2611-BC1", "--json"}).out);
    CHECK(mid["tested"] == 3);
    CHECK(mid["verdict"] == "incomplete");

    // The second run starts at device 4.
    write_text(dir.path("answers-2.txt"), "\n\nq\n");
    const auto second = run_cli({"--db", dir.db(), "lot", "measure", "LOT-2611-BC1", "--bench", f.bench, "--answers",
                                 dir.path("answers-2.txt")});
    REQUIRE(second.code == 0);
    CHECK_THAT(second.out, Contains("Insert device 4 of 32") && Contains("Insert device 6 of 32"));
    CHECK(second.out.find("Insert device 1 of 32") == std::string::npos);

    const auto v = nlohmann::json::parse(run_cli({"--db", dir.db(), "lot", "verdict", "LOT-2611-BC1", "--json"}).out);
    CHECK(v["tested"] == 5);
    CHECK(v["skipped"] == 1);
    const auto& d = v["devices"];
    REQUIRE(d.size() == 6);
    std::vector<long> positions;
    std::set<long> measured_positions;
    long skipped_id = 0;
    for (const auto& e : d) {
        positions.push_back(e["position"].get<long>());
        if (!e["skipped_reason"].is_null()) {
            CHECK(e["skipped_reason"] == "bent lead");
            CHECK(e["hfe"].is_null());
            skipped_id = e["id"].get<long>();
        } else {
            // Each position measured exactly once.
            CHECK(measured_positions.insert(e["position"].get<long>()).second);
        }
    }
    CHECK(positions == std::vector<long>{1, 2, 3, 3, 4, 5});
    CHECK(measured_positions == std::set<long>{1, 2, 3, 4, 5});
    // The replacement names the skipped device.
    REQUIRE(skipped_id != 0);
    long replacements = 0;
    for (const auto& e : d)
        if (!e["replacement_of"].is_null()) {
            CHECK(e["replacement_of"] == skipped_id);
            CHECK(e["position"] == 3);
            CHECK_FALSE(e["hfe"].is_null());
            ++replacements;
        }
    CHECK(replacements == 1);
    // Different transistors (the tray hands out a new one each time): no hFE repeats.
    std::set<double> hfes;
    for (const auto& e : d)
        if (!e["hfe"].is_null()) hfes.insert(e["hfe"].get<double>());
    CHECK(hfes.size() == 5);
}
