// `ampbench match` and `ampbench sweep --method amplitude` on the in-process virtual bench.
// The virtual scope gives each channel a vertical gain error and channel 2 a fixed skew behind
// channel 1 (drivers/sim/virtual_bench.h, SimLimits); a match run must find exactly those, and a
// later sweep must divide them out of its readings.
#include <cmath>
#include <string>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "cli_support.h"
#include "drivers/sim/virtual_bench.h"
#include "store/archive.h"

using namespace ampbench;
using namespace ampbench::cli::testing;

namespace {

std::string sample(const std::string& name) {
    std::string path(AMPBENCH_SOURCE_DIR);
    path += "/sample_sessions/" + name;
    return path;
}

nlohmann::json run_json(const std::vector<std::string>& args) {
    const CliResult r = run_cli(args);
    INFO(r.out << r.err);
    REQUIRE(r.code == 0);
    return nlohmann::json::parse(r.out);
}

nlohmann::json sweep(const CliTempDir& dir, const std::string& serial, const std::string& method = "capture") {
    return run_json({"--db", dir.db(), "sweep", "--bench", sample("virtual.bench.json"), "--design", sample("pa1.design.json"),
                     "--board", serial, "--yes", "--json", "--no-progress", "--per-decade", "4", "--to", "150e3",
                     "--tolerance-runs", "200", "--method", method});
}

const nlohmann::json& gap_row(const nlohmann::json& j, const std::string& quantity) {
    for (const auto& row : j.at("gap"))
        if (row.at("quantity") == quantity) return row;
    FAIL("no gap row " << quantity);
    return j;
}

}  // namespace

TEST_CASE("a match run finds the virtual scope's channel mismatch and later sweeps divide it out", "[sweep][match]") {
    CliTempDir dir;
    // The sample bench's sim:// seed is 2611; channel "in" is scope channel 1, "out" channel 2.
    const sim::SimLimits limits;
    const double g_in = sim::virtual_scope_gain_error(2611, 0), g_out = sim::virtual_scope_gain_error(2611, 1);
    const double expected_db = 20 * std::log10((1 + g_out) / (1 + g_in));
    REQUIRE(std::abs(expected_db) > 0.001);  // the mismatch is there to be found

    const nlohmann::json before = sweep(dir, "PA1-2611-0300");
    CHECK(before.at("match").is_null());

    const nlohmann::json m = run_json({"--db", dir.db(), "match", "--bench", sample("virtual.bench.json"), "--yes", "--json",
                                       "--no-progress", "--from", "1", "--to", "200e3", "--per-decade", "3"});
    REQUIRE(m.at("points").get<int>() >= 16);
    // 4σ: about 34 checks, so a 3σ bound would fail by chance in roughly one run in ten.
    for (const auto& row : m.at("mismatch")) {
        const double f = row.at("freq_hz").get<double>();
        INFO("f = " << f << " Hz");
        CHECK(std::abs(row.at("gain_db").get<double>() - expected_db) <= 4 * row.at("gain_db_sd").get<double>() + 2e-3);
        // Channel 2 lags channel 1 by the skew: −360°·f·skew.
        const double expected_deg = -360 * f * limits.scope_skew_s;
        CHECK(std::abs(row.at("phase_deg").get<double>() - expected_deg) <= 4 * row.at("phase_deg_sd").get<double>() + 1e-3);
    }

    const nlohmann::json after = sweep(dir, "PA1-2611-0300");
    REQUIRE_FALSE(after.at("match").is_null());
    CHECK(after.at("match").at("session") == m.at("session"));
    CHECK(after.at("match").at("age_days").get<double>() < 0.01);
    CHECK(after.at("match").at("points_outside") == 0);
    CHECK(after.at("match").at("points_corrected") == after.at("points"));
    // Same board, same draw: dividing the mismatch out moves the midband gain by −mismatch.
    const double moved = after.at("fit").at("midband_gain_db").get<double>() - before.at("fit").at("midband_gain_db").get<double>();
    CHECK(moved == Approx(-expected_db).margin(0.01));
    // The match run's uncertainty replaces the scope's 2 % gain accuracy: U shrinks.
    CHECK(gap_row(after, "midband_gain_db").at("u").get<double>() < gap_row(before, "midband_gain_db").at("u").get<double>());

    const CliResult report = run_cli({"--db", dir.db(), "report", std::to_string(after.at("session").get<int>())});
    CHECK(report.out.find("channel match: session " + std::to_string(m.at("session").get<int>())) != std::string::npos);
    const CliResult old_report = run_cli({"--db", dir.db(), "report", std::to_string(before.at("session").get<int>())});
    CHECK(old_report.out.find("channel match: none") != std::string::npos);
}

TEST_CASE("DC readings of a nominal board sit inside their tolerance bands", "[sweep][dc]") {
    CliTempDir dir;
    const nlohmann::json j = sweep(dir, "PA1-2611-0301");
    for (const char* node : {"V(b)", "V(e)", "V(c)"}) {
        const nlohmann::json& row = gap_row(j, node);
        INFO(row.dump());
        REQUIRE(row.at("band").is_array());
        CHECK(row.at("band")[0].get<double>() < row.at("predicted").get<double>());
        CHECK(row.at("band")[1].get<double>() > row.at("predicted").get<double>());
        CHECK(row.at("verdict") == "in band");
    }
}

TEST_CASE("the amplitude method measures magnitude only, with a wider uncertainty, and says so", "[sweep][amplitude]") {
    CliTempDir dir;
    const nlohmann::json cap = sweep(dir, "PA1-2611-0302", "capture");
    const nlohmann::json amp = sweep(dir, "PA1-2611-0302", "amplitude");
    CHECK(amp.at("method") == "amplitude");
    CHECK(amp.at("fit").at("usable") == true);
    const nlohmann::json& g_cap = gap_row(cap, "midband_gain_db");
    const nlohmann::json& g_amp = gap_row(amp, "midband_gain_db");
    // The same board measured both ways agrees within the combined expanded uncertainty.
    CHECK(std::abs(g_amp.at("measured").get<double>() - g_cap.at("measured").get<double>()) <=
          2 * std::hypot(g_amp.at("u").get<double>(), g_cap.at("u").get<double>()));
    CHECK(g_amp.at("u").get<double>() > g_cap.at("u").get<double>());

    auto archive = store::open_archive(dir.db());
    for (const store::Point& p : archive->current_points(amp.at("session").get<std::int64_t>())) {
        CHECK_FALSE(p.phase_deg.has_value());
        CHECK(p.settings_json.find("\"method\":\"amplitude\"") != std::string::npos);
    }
    const CliResult report = run_cli({"--db", dir.db(), "report", std::to_string(amp.at("session").get<int>())});
    CHECK(report.out.find("magnitude only") != std::string::npos);
}
