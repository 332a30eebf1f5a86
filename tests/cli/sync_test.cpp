// `ampbench sync` as a user runs it: a station archive filled by real sweeps on the virtual
// bench (fits stored) and a lot measured on the virtual tray, pushed to a destination; pushed
// again (nothing moves); extended by another sweep and a resumed session (only the new rows
// move); a sync SIGKILLed between sessions and rerun (complete, no duplicate UUIDs). Row counts
// of SQLite archives are read with the sqlite3 shell, independently of the code under test.
// The destination is a second SQLite file, and a fresh PostgreSQL database as well when
// AMPBENCH_TEST_PG names a server.
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <filesystem>
#include <functional>
#include <map>
#include <memory>

#include <catch2/catch.hpp>

#include <nlohmann/json.hpp>

#include "cli_support.h"
#include "common/child_process.h"
#include "lot_support.h"
#include "store/archive.h"
#include "store/sync_support.h"
#include "test_backend.h"

using namespace ampbench;
using namespace ampbench::cli::testing;
namespace st = ampbench::store;

namespace {

const char* const tables[] = {"designs", "boards",      "sessions", "instruments", "probes",
                              "plan_points", "points", "fits",     "lots",        "devices"};

using Counts = std::map<std::string, long>;

bool is_url(const std::string& location) { return location.find("://") != std::string::npos; }

// Rows per table: by the sqlite3 shell for a file, through the Archive interface otherwise.
Counts table_counts(const std::string& location) {
    Counts c;
    if (!is_url(location)) {
        for (const char* t : tables)
            c[t] = std::stol("0" + sqlite3_value(location, std::string("SELECT count(*) FROM ") + t));
        return c;
    }
    auto a = st::open_archive(location);
    const auto r = st::testing::archive_rows(*a);
    c = {{"designs", r.designs},        {"boards", r.boards},
         {"sessions", r.rows.sessions}, {"instruments", r.rows.instruments},
         {"probes", r.rows.probes},     {"plan_points", r.rows.plan_points},
         {"points", r.rows.points},     {"fits", r.rows.fits},
         {"lots", r.rows.lots},         {"devices", r.rows.devices}};
    return c;
}

std::string text(const Counts& c) {
    std::string out;
    for (const auto& [t, n] : c) out += t + "=" + std::to_string(n) + " ";
    return out;
}

Counts json_counts(const nlohmann::json& tables_json) {
    Counts c;
    for (const char* t : tables) c[t] = tables_json.at(t).get<long>();
    return c;
}

Counts minus(const Counts& a, const Counts& b) {
    Counts c;
    for (const auto& [t, n] : a) c[t] = n - b.at(t);
    return c;
}

// Runs `body` with an empty destination location of each backend available.
void for_each_destination(const CliTempDir& dir, const std::function<void(const std::string&)>& body) {
    SECTION("destination: SQLite") { body(dir.path("central.sqlite")); }
    SECTION("destination: PostgreSQL") {
        // A database of its own on the $AMPBENCH_TEST_PG cluster (tests/support/test_backend.h).
        AMPBENCH_POSTGRES_ONLY(pg);
        body(pg.location());
    }
}

void sweep(const std::string& db, const std::string& serial) {
    // Two steps: GCC 12 gives a false -Warray-bounds on literal + literal at -O2.
    std::string samples = AMPBENCH_SOURCE_DIR;
    samples += "/sample_sessions/";
    const CliResult r = run_cli({"--db", db, "sweep", "--bench", samples + "virtual.bench.json",
                                 "--design", samples + "pa1.design.json", "--board", serial,
                                 "--yes", "--no-progress", "--per-decade", "3", "--from", "5",
                                 "--to", "150e3", "--tolerance-runs", "100"});
    INFO(r.out << r.err);
    REQUIRE(r.code == 0);
}

// A station's archive: `sweeps` sweeps of different boards and one lot measured on the tray.
std::string build_station(const CliTempDir& dir, int sweeps) {
    const std::string db = dir.path("station.sqlite");
    for (int i = 1; i <= sweeps; ++i) sweep(db, "PA1-2611-030" + std::to_string(i));
    const LotFiles f = write_lot_files(dir, "sim://?tray=11&defective=0.05");
    REQUIRE(run_cli({"--db", db, "lot", "start", "--plan", f.plan, "--lot", "LOT-2611-BC11",
                     "--qty", "500", "--supplier", "Harrow Vale stores"})
                .code == 0);
    const CliResult m = run_cli({"--db", db, "lot", "measure", "LOT-2611-BC11", "--bench", f.bench});
    INFO(m.out << m.err);
    REQUIRE(m.code == 0);
    REQUIRE(run_cli({"--db", db, "lot", "verdict", "LOT-2611-BC11"}).code == 0);
    const Counts c = table_counts(db);
    REQUIRE(c.at("fits") >= sweeps);  // each sweep stored its fit
    REQUIRE(c.at("devices") == 32);
    return db;
}

nlohmann::json sync_json(const std::string& from, const std::string& to, bool dry_run = false) {
    std::vector<std::string> args{"sync", "--from", from, "--to", to, "--json"};
    if (dry_run) args.push_back("--dry-run");
    const CliResult r = run_cli(args);
    INFO(r.out << r.err);
    REQUIRE(r.code == 0);
    return nlohmann::json::parse(r.out);
}

std::set<std::string> all_uuids(const std::string& location, bool* duplicates) {
    auto a = st::open_archive(location);
    const auto r = st::testing::archive_rows(*a);
    *duplicates = static_cast<long>(r.uuids.size()) != r.uuid_rows;
    return r.uuids;
}

}  // namespace

TEST_CASE("sync pushes a station archive once, then nothing, then only the new rows", "[cli][sync][sim]") {
    REQUIRE(std::system("command -v sqlite3 > /dev/null 2>&1") == 0);
    CliTempDir dir;
    const std::string station = build_station(dir, 2);
    // A session interrupted part way, to be resumed after the first sync.
    std::int64_t resumed_id = 0;
    {
        auto a = st::open_archive(station);
        st::NewSession ns;
        ns.board_serial = "PA1-2611-0301";
        ns.operator_name = "T. Adeyemi";
        const st::Session s = a->begin_session(ns);
        a->add_plan_points(s.id, {{0, 100.0, false}, {1, 1000.0, false}, {2, 10000.0, false}});
        st::Point p;
        p.plan_index = 0;
        p.freq_hz = 100.0;
        p.gain_db = 31.5;
        a->append_point(s.id, p);
        a->finish_session(s.id, st::SessionStatus::interrupted);
        resumed_id = s.id;
    }

    for_each_destination(dir, [&](const std::string& central) {
        // A dry run counts everything and writes nothing (not even the file).
        const auto dry = sync_json(station, central, true);
        CHECK(dry["dry_run"] == true);
        if (!is_url(central)) CHECK_FALSE(std::filesystem::exists(central));
        const Counts source = table_counts(station);
        CHECK(text(json_counts(dry["would_move"])) == text(source));

        const auto first = sync_json(station, central);
        CHECK(text(json_counts(first["moved"])) == text(source));
        CHECK(text(table_counts(central)) == text(source));

        // Again: nothing moves, and the destination is unchanged.
        const CliResult again = run_cli({"sync", "--from", station, "--to", central});
        INFO(again.out << again.err);
        REQUIRE(again.code == 0);
        CHECK(again.out.find("nothing to move") != std::string::npos);
        CHECK(again.out.find("synced session") == std::string::npos);
        CHECK(text(table_counts(central)) == text(source));
        CHECK(sync_json(station, central)["up_to_date"] == true);

        // The station goes on: another sweep, the interrupted session resumed with two more
        // readings (one a retake), and a session still being written (live heartbeat).
        sweep(station, "PA1-2611-0309");
        std::int64_t running_id = 0;
        {
            auto a = st::open_archive(station);
            a->resume_session(resumed_id);
            st::Point p;
            p.plan_index = 1;
            p.freq_hz = 1000.0;
            p.gain_db = 32.0;
            a->append_point(resumed_id, p);
            p.plan_index = 0;
            p.freq_hz = 100.0;
            p.gain_db = 31.6;
            a->append_point(resumed_id, p);
            a->finish_session(resumed_id, st::SessionStatus::complete);
            st::NewSession ns;
            ns.board_serial = "PA1-2611-0302";
            running_id = a->begin_session(ns).id;  // this process is alive: not stale
        }
        const Counts extended = table_counts(station);
        Counts expected = minus(extended, source);
        expected["sessions"] -= 1;  // the running one stays behind (it has no other rows)
        CHECK(expected.at("points") > 2);

        const auto dry2 = sync_json(station, central, true);
        CHECK(text(json_counts(dry2["would_move"])) == text(expected));
        const auto second = sync_json(station, central);
        CHECK(text(json_counts(second["moved"])) == text(expected));
        REQUIRE(second["skipped"].size() == 1);
        CHECK(second["skipped"][0]["what"] == "session " + std::to_string(running_id));
        {
            auto c = st::open_archive(central);
            const auto s = c->session_by_uuid(st::open_archive(station)->session(resumed_id)->uuid);
            REQUIRE(s);
            CHECK(s->status == st::SessionStatus::complete);
            CHECK(c->current_points(s->id).size() == 2);
        }

        // Once it has finished, the running session moves too and the two archives agree.
        st::open_archive(station)->finish_session(running_id, st::SessionStatus::complete);
        const CliResult last = run_cli({"sync", "--from", station, "--to", central});
        INFO(last.out << last.err);
        CHECK(last.out.find("synced session " + std::to_string(running_id)) != std::string::npos);
        CHECK(text(table_counts(central)) == text(table_counts(station)));
        bool dup_source = true, dup_central = true;
        CHECK(all_uuids(central, &dup_central) == all_uuids(station, &dup_source));
        CHECK_FALSE(dup_central);
    });
}

TEST_CASE("a sync killed with SIGKILL half way leaves whole sessions and a rerun completes it", "[cli][sync][sim]") {
    REQUIRE(std::system("command -v sqlite3 > /dev/null 2>&1") == 0);
    CliTempDir dir;
    const std::string station = build_station(dir, 3);
    const Counts source = table_counts(station);
    REQUIRE(source.at("sessions") == 4);  // three sweeps and the lot's session

    for_each_destination(dir, [&](const std::string& central) {
        {
            // Paused a minute after each committed session: killed after the first.
            ampbench::testing::ChildProcess child(ampbench::testing::ampbench_argv({"sync", "--from", station, "--to", central}),
                                                  {"", "", false, {"AMPBENCH_SYNC_PAUSE_MS=60000"}});
            const std::string first = child.read_line();
            INFO(first);
            REQUIRE(first.rfind("synced session 1 ", 0) == 0);
            child.kill9();
        }
        const Counts partial = table_counts(central);
        INFO(text(partial));
        CHECK(partial.at("sessions") == 1);
        CHECK(partial.at("lots") == 0);
        {
            // The one session there is whole: every reading, plan point and fit of it.
            auto s = st::open_archive(station);
            auto c = st::open_archive(central);
            const st::SessionDetail want = s->session_detail(1);
            const auto there = c->session_by_uuid(want.session.uuid);
            REQUIRE(there);
            const st::SessionDetail got = c->session_detail(there->id);
            CHECK(got.points.size() == want.points.size());
            CHECK(got.plan.size() == want.plan.size());
            CHECK(got.fits.size() == want.fits.size());
            CHECK(got.instruments.size() == want.instruments.size());
        }

        const auto rerun = sync_json(station, central);
        CHECK(text(minus(table_counts(central), partial)) == text(json_counts(rerun["moved"])));
        CHECK(text(table_counts(central)) == text(source));
        bool dup_source = true, dup_central = true;
        CHECK(all_uuids(central, &dup_central) == all_uuids(station, &dup_source));
        CHECK_FALSE(dup_central);
        CHECK(sync_json(station, central)["up_to_date"] == true);
    });
}

TEST_CASE("sync refuses a missing source, one archive twice and an unreachable destination", "[cli][sync]") {
    CliTempDir dir;
    const std::string station = dir.path("station.sqlite");
    auto one_line = [](const CliResult& r) {
        return !r.err.empty() && r.err.find('\n') == r.err.size() - 1;
    };

    const CliResult missing = run_cli({"sync", "--from", station, "--to", dir.path("c.sqlite")});
    CHECK(missing.code == 2);
    CHECK(one_line(missing));
    CHECK(missing.err.find(station) != std::string::npos);
    CHECK_FALSE(std::filesystem::exists(station));  // not created by the attempt

    st::open_archive(station)->ensure_board("PA1-2611-0399");
    const CliResult same = run_cli({"sync", "--from", station, "--to", "sqlite:" + station});
    CHECK(same.code == 1);
    CHECK(one_line(same));
    CHECK(same.err.find("same archive") != std::string::npos);

    for (const std::string& unreachable :
         {dir.path("no-such-dir/c.sqlite"), std::string("postgresql://ampbench@127.0.0.1:1/central")}) {
        const CliResult r = run_cli({"sync", "--from", station, "--to", unreachable});
        INFO(r.err);
        CHECK(r.code == 4);
        CHECK(one_line(r));
        CHECK(r.err.find("cannot open the destination " + unreachable) != std::string::npos);
    }
}
