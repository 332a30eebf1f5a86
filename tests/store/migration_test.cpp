// Migrations from fixture archives of earlier schema versions (tests/data/store/archive-vN.sql,
// each an sqlite3 .dump of what that version wrote).
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>

#include <SQLiteCpp/SQLiteCpp.h>

#include "store/archive.h"
#include "store/canonical_json.h"
#include "store_support.h"
#include "test_backend.h"

using namespace ampbench::store;
using testing::TempDir;

namespace {

std::string fixture_sql(int version) {
    std::string path = AMPBENCH_TEST_DATA_DIR;
    path += "/store/archive-v";
    path += std::to_string(version);
    path += ".sql";
    return testing::read_text_file(path);
}

}  // namespace

TEST_CASE("an empty file or database becomes an archive with every table", "[store][migration]") {
    AMPBENCH_EACH_BACKEND(b);
    if (b.sqlite()) std::ofstream(b.location()).close();
    CHECK(open_archive(b.location())->schema_version() == current_schema_version());
    const std::vector<std::string> expected = {
        "boards", "designs", "devices", "fits",     "instruments",   "lots",
        "plan_points", "points", "probes", "schema_version", "sessions"};
    const auto names = b.column(b.sqlite() ? "SELECT name FROM sqlite_master WHERE type = 'table' "
                                             "AND name NOT LIKE 'sqlite_%' ORDER BY name"
                                           : "SELECT tablename::text FROM pg_tables WHERE "
                                             "schemaname = current_schema() ORDER BY tablename");
    CHECK(names == expected);
    // Opening again applies nothing twice.
    CHECK(open_archive(b.location())->schema_version() == current_schema_version());
    CHECK(b.query("SELECT count(*) FROM schema_version") ==
          std::to_string(current_schema_version()));
}

TEST_CASE("archives of every earlier schema version open at the current one",
          "[store][migration]") {
    for (int version = 1; version <= current_schema_version(); ++version) {
        INFO("fixture of schema version " << version);
        TempDir dir;
        const std::string path = dir.path("old.sqlite");
        testing::run_sql_script(path, fixture_sql(version));
        auto archive = open_archive(path);
        CHECK(archive->schema_version() == current_schema_version());
        CHECK_FALSE(archive->history("PA1-2611-0042").empty());
        CHECK(testing::integrity_check(path) == "ok");
    }
}

TEST_CASE("the version 1 fixture reads back completely and stays writable",
          "[store][migration]") {
    TempDir dir;
    const std::string path = dir.path("v1.sqlite");
    testing::run_sql_script(path, fixture_sql(1));
    auto archive = open_archive(path);

    const auto history = archive->history("PA1-2611-0042");
    REQUIRE(history.size() == 1);
    const SessionSummary& s = history[0];
    CHECK(s.session.kind == SessionKind::sweep);
    CHECK(s.session.status == SessionStatus::complete);
    CHECK(s.session.operator_name == "J. Okafor");
    CHECK(s.point_count == 3);
    CHECK(s.midband_gain_db == 40.01);
    CHECK(s.f_low_hz == 28.4);
    REQUIRE(s.instruments.size() == 2);
    CHECK(s.instruments[1].uri == "serial:///dev/ttyUSB0?baud=115200");

    const SessionDetail detail = archive->session_detail(s.session.id);
    REQUIRE(detail.points.size() == 4);
    CHECK(detail.points[0].superseded_by == 2);
    CHECK(detail.plan.size() == 3);
    CHECK(detail.probes.size() == 2);

    const auto board = archive->board("PA1-2611-0042");
    REQUIRE(board);
    const auto design = archive->design(board->design_address);
    REQUIRE(design);
    // The address scheme has not changed: recomputing it gives the stored key.
    CHECK(content_address(design->canonical_json, "fixture") == design->address);

    const auto lot = archive->lot("LOT-2611-BC1");
    REQUIRE(lot);
    CHECK(archive->devices(lot->id).size() == 2);

    NewSession ns;
    ns.board_serial = "PA1-2611-0042";
    const Session added = archive->begin_session(ns);
    archive->append_point(added.id, testing::reading(1000, 40.0));
    CHECK(archive->history("PA1-2611-0042").size() == 2);
    CHECK(testing::integrity_check(path) == "ok");
}
