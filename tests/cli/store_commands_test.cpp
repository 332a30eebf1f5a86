// The archive commands end to end: import, history, boards and export, on a fresh SQLite file
// and on a fresh PostgreSQL database.
#include <catch2/catch.hpp>

#include <cmath>

#include <nlohmann/json.hpp>

#include "cli_support.h"
#include "test_backend.h"
#include "store/archive.h"
#include "store/canonical_json.h"

using namespace ampbench;
using namespace ampbench::cli::testing;
using nlohmann::json;

namespace {

const char* const hand_csv =
    "# HVE-PA1 measured by hand on bay 3\n"
    "freq_hz,gain_db,phase_deg,gain_db_sd,phase_deg_sd\n"
    "20,34.0123456789,131.25,0.04,0.3\n"
    "1000,40.03,-179.1,0.03,0.2\n"
    "50000,39.96,171.4,,\n"
    "200000,36.9,150.5,0.05,0.4\n";

}  // namespace

TEST_CASE("import then history, boards and export", "[cli][store]") {
    AMPBENCH_EACH_BACKEND(b);
    write_text(b.path("hand.csv"), hand_csv);
    auto imported = run_cli({"--db", b.location(), "import", b.path("hand.csv"), "--board",
                             "PA1-2611-0042"});
    INFO(imported.err);
    REQUIRE(imported.code == 0);
    CHECK_THAT(imported.out, Catch::Contains("imported 4 readings"));

    auto history = run_cli({"--db", b.location(), "history", "PA1-2611-0042", "--json"});
    REQUIRE(history.code == 0);
    const json h = json::parse(history.out);
    CHECK(h["board"] == "PA1-2611-0042");
    CHECK(h["design"].is_null());
    REQUIRE(h["sessions"].size() == 1);
    const json& s = h["sessions"][0];
    CHECK(s["id"] == 1);
    CHECK(s["kind"] == "import");
    CHECK(s["status"] == "complete");
    CHECK(s["points"] == 4);
    CHECK(s["started"].get<std::string>().size() == 20);
    CHECK(s["midband_gain_db"].is_null());
    CHECK(s["f_low_hz"].is_null());
    CHECK(s["f_high_hz"].is_null());

    auto table = run_cli({"--db", b.location(), "history", "PA1-2611-0042"});
    REQUIRE(table.code == 0);
    CHECK_THAT(table.out, Catch::Contains("import") && Catch::Contains("complete"));

    auto boards = run_cli({"--db", b.location(), "boards", "--json"});
    REQUIRE(boards.code == 0);
    const json bj = json::parse(boards.out);
    REQUIRE(bj["boards"].size() == 1);
    CHECK(bj["boards"][0]["serial"] == "PA1-2611-0042");
    CHECK(bj["boards"][0]["sessions"] == 1);
    CHECK(bj["boards"][0]["latest"]["status"] == "complete");
    CHECK(run_cli({"--db", b.location(), "boards"}).out.find("PA1-2611-0042") != std::string::npos);
}

TEST_CASE("export then import gives the same readings", "[cli][store]") {
    AMPBENCH_EACH_BACKEND(b);
    write_text(b.path("hand.csv"), hand_csv);
    REQUIRE(run_cli({"--db", b.location(), "import", b.path("hand.csv"), "--board", "A"}).code == 0);
    REQUIRE(run_cli({"--db", b.location(), "export", "1", "--csv", "-o", b.path("out.csv")}).code == 0);
    REQUIRE(run_cli({"--db", b.location(), "import", b.path("out.csv"), "--board", "B"}).code == 0);
    auto first = run_cli({"--db", b.location(), "export", "1", "--csv"});
    auto second = run_cli({"--db", b.location(), "export", "2", "--csv"});
    REQUIRE(first.code == 0);
    REQUIRE(second.code == 0);
    auto body = [](const std::string& text) { return text.substr(text.find("freq_hz")); };
    CHECK(body(first.out) == body(second.out));
    CHECK_THAT(first.out, Catch::Contains("20,34.0123456789,131.25,0.04,0.3\n"));
    CHECK_THAT(first.out, Catch::Contains("50000,39.96,171.4,,\n"));
    CHECK(read_text(b.path("out.csv")) == first.out);
}

TEST_CASE("the JSON export holds superseded readings, instruments and settings", "[cli][store]") {
    AMPBENCH_EACH_BACKEND(b);
    std::int64_t id = 0;
    {
        auto archive = store::open_archive(b.location());
        store::NewSession ns;
        ns.board_serial = "SB3-2611-0007";
        ns.instruments = {{"scope", "HVE,SC-2,0002,2.1", "SCP-02", "tcp://192.0.2.12", "2027-01-15",
                           "CAL-77", R"({"coupling":"dc"})"}};
        id = archive->begin_session(ns).id;
        archive->add_plan_points(id, {{0, 1000.0, false}});
        store::Point p;
        p.plan_index = 0;
        p.freq_hz = 1000.0;
        p.gain_db = 20.0;
        p.settings_json = R"({"volts_per_div":0.5})";
        archive->append_point(id, p);
        p.gain_db = 20.5;
        archive->append_point(id, p);
        archive->finish_session(id, store::SessionStatus::complete);
    }
    auto exported = run_cli({"--db", b.location(), "export", std::to_string(id), "--json"});
    REQUIRE(exported.code == 0);
    const json doc = json::parse(exported.out);
    CHECK(doc["format"] == "ampbench-session/1");
    REQUIRE(doc["points"].size() == 2);
    CHECK(doc["points"][0]["superseded_by"] == doc["points"][1]["id"]);
    CHECK(doc["points"][1]["superseded_by"].is_null());
    CHECK(doc["points"][0]["settings"]["volts_per_div"] == 0.5);
    CHECK(doc["instruments"][0]["identity"] == "HVE,SC-2,0002,2.1");
    CHECK(doc["instruments"][0]["settings"]["coupling"] == "dc");
    CHECK(doc["plan"][0]["freq_hz"] == 1000.0);
    // The CSV holds the current reading only.
    auto csv = run_cli({"--db", b.location(), "export", std::to_string(id), "--csv"});
    CHECK_THAT(csv.out, Catch::EndsWith("1000,20.5,,,\n"));
}

TEST_CASE("the amplitude form imports with gain from the two amplitudes", "[cli][store]") {
    AMPBENCH_EACH_BACKEND(b);
    write_text(b.path("amp.csv"), "freq_hz,vin_vpp,vout_vpp,phase_deg\n1000,0.1,3.2,-178\n");
    REQUIRE(run_cli({"--db", b.location(), "import", b.path("amp.csv"), "--board", "LD2-2611-0003"})
                .code == 0);
    auto archive = store::open_archive(b.location());
    const auto points = archive->current_points(1);
    REQUIRE(points.size() == 1);
    // common practice: gain in dB = 20·log10(Vout/Vin); 32× is 30.103 dB.
    CHECK(points[0].gain_db == Approx(30.103).margin(1e-3));
    CHECK(points[0].phase_deg == -178.0);
}

TEST_CASE("a file with bad rows is refused with line numbers and nothing is written",
          "[cli][store]") {
    AMPBENCH_EACH_BACKEND(b);
    write_text(b.path("bad.csv"),
               "freq_hz,gain_db,phase_deg\n100,40,-180\n200,forty,-180\n300,40,-180\n400,,\n");
    auto result = run_cli({"--db", b.location(), "import", b.path("bad.csv"), "--board", "X"});
    CHECK(result.code == 2);
    CHECK_THAT(result.err, Catch::Contains(b.path("bad.csv")) && Catch::Contains("line 3") &&
                               Catch::Contains("line 5") && Catch::Contains("nothing imported"));
    CHECK(std::count(result.err.begin(), result.err.end(), '\n') == 1);
    auto boards = run_cli({"--db", b.location(), "boards", "--json"});
    CHECK(json::parse(boards.out)["boards"].empty());
}

TEST_CASE("import --design stores the design by its content address", "[cli][store]") {
    AMPBENCH_EACH_BACKEND(b);
    const std::string design = R"({ "name": "HVE-PA1 microphone preamp", "format": "ampbench-design/1",
        "supply": { "volts": "12", "node": "vcc" } })";
    write_text(b.path("pa1.design.json"), design);
    write_text(b.path("hand.csv"), hand_csv);
    REQUIRE(run_cli({"--db", b.location(), "import", b.path("hand.csv"), "--board", "PA1-2611-0042",
                     "--design", b.path("pa1.design.json")})
                .code == 0);
    auto history = json::parse(run_cli({"--db", b.location(), "history", "PA1-2611-0042", "--json"}).out);
    CHECK(history["design"] == store::content_address(design, "x"));
    CHECK(history["design_name"] == "HVE-PA1 microphone preamp");

    write_text(b.path("other.json"), R"({"format":"ampbench-bench/1"})");
    auto wrong = run_cli({"--db", b.location(), "import", b.path("hand.csv"), "--board", "Y",
                          "--design", b.path("other.json")});
    CHECK(wrong.code == 2);
    CHECK_THAT(wrong.err, Catch::Contains("other.json"));
}

TEST_CASE("hostile serials pass through the commands unchanged", "[cli][store]") {
    AMPBENCH_EACH_BACKEND(b);
    const std::string serial = "'); DROP TABLE sessions;--\n\"µ\"";
    write_text(b.path("hand.csv"), hand_csv);
    REQUIRE(run_cli({"--db", b.location(), "import", b.path("hand.csv"), "--board", serial}).code == 0);
    auto history = run_cli({"--db", b.location(), "history", serial, "--json"});
    REQUIRE(history.code == 0);
    CHECK(json::parse(history.out)["board"] == serial);
    CHECK(json::parse(run_cli({"--db", b.location(), "boards", "--json"}).out)["boards"][0]["serial"] ==
          serial);
}

TEST_CASE("archive commands fail with one line and the right exit code", "[cli][store]") {
    AMPBENCH_EACH_BACKEND(b);
    auto unknown = run_cli({"--db", b.location(), "history", "PA1-0000-0000"});
    CHECK(unknown.code == 2);
    CHECK_THAT(unknown.err, Catch::Contains("no board"));
    CHECK(run_cli({"--db", b.location(), "export", "7", "--csv"}).code == 2);
    CHECK(run_cli({"--db", b.location(), "export", "1"}).code == 1);
    CHECK(run_cli({"--db", b.location(), "export", "1", "--csv", "--json"}).code == 1);

    write_text(b.path("junk.sqlite"), std::string(4096, 'x'));
    auto damaged = run_cli({"--db", b.path("junk.sqlite"), "boards"});
    CHECK(damaged.code == 4);
    CHECK_THAT(damaged.err, Catch::Contains(b.path("junk.sqlite")));
    CHECK(std::count(damaged.err.begin(), damaged.err.end(), '\n') == 1);
}
