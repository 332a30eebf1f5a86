// Acceptance 7 of the lot-inspection issue: bad input gives one clear line each (c >= n,
// n > qty, min > max, an unknown node or dut, a reading out of the meter's range, more devices
// than the plan), and nothing is stored for a refused lot.
#include <catch2/catch.hpp>

#include <nlohmann/json.hpp>

#include "cli_support.h"
#include "lot_support.h"

using namespace ampbench::cli::testing;
using Catch::Matchers::Contains;

namespace {

void check_one_line(const CliResult& r, int code) {
    INFO(r.err);
    CHECK(r.code == code);
    REQUIRE_FALSE(r.err.empty());
    CHECK(r.err.find('\n') == r.err.size() - 1);
}

CliResult start(const CliTempDir& dir, const LotFiles& f, const std::string& qty = "500") {
    return run_cli({"--db", dir.db(), "lot", "start", "--plan", f.plan, "--lot", "LOT-2611-BC1", "--qty", qty});
}

}  // namespace

TEST_CASE("lot start refuses bad plans with one line naming the key", "[cli][lot]") {
    const std::string q = "sim://?tray=1";
    {
        CliTempDir dir;
        const auto f = write_lot_files(dir, q, [](nlohmann::json& p) { p["sampling"]["c"] = 32; });
        const auto r = start(dir, f);
        check_one_line(r, 2);
        CHECK_THAT(r.err, Contains("tray.lot-plan.json") && Contains("sampling.c") && Contains("below the sample size"));
    }
    {
        CliTempDir dir;
        const auto r = start(dir, write_lot_files(dir, q), "20");
        check_one_line(r, 2);
        CHECK_THAT(r.err, Contains("sampling.n") && Contains("sample size 32 exceeds the lot quantity 20"));
    }
    {
        CliTempDir dir;
        const auto f = write_lot_files(dir, q, [](nlohmann::json& p) { p["spec"]["hfe"] = {{"min", "400"}, {"max", "100"}}; });
        const auto r = start(dir, f);
        check_one_line(r, 2);
        CHECK_THAT(r.err, Contains("spec.hfe.min") && Contains("min 400 is above max 100"));
    }
    {
        CliTempDir dir;
        const auto f = write_lot_files(dir, q, [](nlohmann::json& p) { p["readings"] = {"b", "c", "x9"}; });
        const auto r = start(dir, f);
        check_one_line(r, 2);
        CHECK_THAT(r.err, Contains("readings") && Contains("x9"));
    }
    {
        CliTempDir dir;
        const auto f = write_lot_files(dir, q, [](nlohmann::json& p) { p["dut"] = "Q7"; });
        const auto r = start(dir, f);
        check_one_line(r, 2);
        CHECK_THAT(r.err, Contains("dut") && Contains("Q7"));
        // Nothing stored for a refused lot.
        const auto lots = run_cli({"--db", dir.db(), "lots", "--json"});
        CHECK(nlohmann::json::parse(lots.out).empty());
    }
}

TEST_CASE("lot measure refuses an unknown lot or tray or channel and more devices than the plan", "[cli][lot][sim]") {
    CliTempDir dir;
    const auto f = write_lot_files(dir, "sim://?tray=3", [](nlohmann::json& p) { p["sampling"] = {{"n", 3}, {"c", 0}}; });
    const auto unknown = run_cli({"--db", dir.db(), "lot", "measure", "LOT-NOPE", "--bench", f.bench});
    check_one_line(unknown, 2);
    CHECK_THAT(unknown.err, Contains("no lot 'LOT-NOPE'"));

    REQUIRE(run_cli({"--db", dir.db(), "lot", "start", "--plan", f.plan, "--lot", "LOT-2611-BC1", "--qty", "10",
                     "--supplier", "Harrow <Vale> & \"Sons\""})
                .code == 0);
    const auto again = start(dir, f, "10");
    check_one_line(again, 2);
    CHECK_THAT(again.err, Contains("already in the archive"));

    // A virtual bench without a tray.
    write_text(dir.path("plain.bench.json"),
               R"({"format":"ampbench-bench/1","meter":{"uri":"sim://?seed=4","channels":{"101":"b","102":"c","103":"e","104":"vcc"}},"supply":{"uri":"sim://?seed=4"}})");
    const auto no_tray = run_cli({"--db", dir.db(), "lot", "measure", "LOT-2611-BC1", "--bench", dir.path("plain.bench.json")});
    check_one_line(no_tray, 2);
    CHECK_THAT(no_tray.err, Contains("needs a tray"));

    // A plan reading with no meter channel wired to it.
    write_text(dir.path("short.bench.json"),
               R"({"format":"ampbench-bench/1","meter":{"uri":"sim://?tray=3","channels":{"101":"b","102":"c"}},"supply":{"uri":"sim://?tray=3"}})");
    const auto no_channel = run_cli({"--db", dir.db(), "lot", "measure", "LOT-2611-BC1", "--bench", dir.path("short.bench.json")});
    check_one_line(no_channel, 2);
    CHECK_THAT(no_channel.err, Contains("meter.channels") && Contains("'vcc'"));

    // The whole sample, then one more run.
    REQUIRE(run_cli({"--db", dir.db(), "lot", "measure", "LOT-2611-BC1", "--bench", f.bench}).code == 0);
    const auto more = run_cli({"--db", dir.db(), "lot", "measure", "LOT-2611-BC1", "--bench", f.bench});
    check_one_line(more, 2);
    CHECK_THAT(more.err, Contains("all 3 devices of the plan are measured"));
    const auto v = nlohmann::json::parse(run_cli({"--db", dir.db(), "lot", "verdict", "LOT-2611-BC1", "--json"}).out);
    CHECK(v["devices"].size() == 3);

    // The report escapes what the user typed (as the sweep report does).
    const auto rep = run_cli({"--db", dir.db(), "lot", "report", "LOT-2611-BC1", "--html", dir.path("r.html")});
    REQUIRE(rep.code == 0);
    const std::string html = read_text(dir.path("r.html"));
    CHECK_THAT(html, Contains("Harrow &lt;Vale&gt; &amp;") && Contains("id=\"devices\""));
    CHECK(html.find("<Vale>") == std::string::npos);
    CHECK(html.find("<script") == std::string::npos);
}

TEST_CASE("lot measure --manual: a typed reading beyond the meter's range is one line and stays stored", "[cli][lot]") {
    CliTempDir dir;
    const auto f = write_lot_files(dir, "sim://?tray=3");
    REQUIRE(start(dir, f).code == 0);
    // Enter to measure, then vcc, b (an overload display), ...
    write_text(dir.path("answers.txt"), "\n10\n9.9E37\n");
    const auto r = run_cli({"--db", dir.db(), "lot", "measure", "LOT-2611-BC1", "--manual", "--answers", dir.path("answers.txt")});
    check_one_line(r, 3);
    CHECK_THAT(r.err, Contains("node 'b'") && Contains("out of the meter's range"));
    const auto v = nlohmann::json::parse(run_cli({"--db", dir.db(), "lot", "verdict", "LOT-2611-BC1", "--json"}).out);
    REQUIRE(v["devices"].size() == 1);
    CHECK_THAT(v["devices"][0]["skipped_reason"].get<std::string>(), Contains("out of the meter's range"));
    CHECK(v["tested"] == 0);
}
