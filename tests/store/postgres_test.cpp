// What the PostgreSQL archive adds to the shared behaviour: a running session is owned by the
// connection holding its advisory lock; records copied from a station archive keep their
// UUIDs and copying twice adds nothing; several stations may meet an empty database at once.
#include <catch2/catch.hpp>

#include <sys/wait.h>
#include <unistd.h>

#include <map>

#include "core/errors.h"
#include "store/archive.h"
#include "store_support.h"
#include "test_backend.h"

using namespace ampbench;
using namespace ampbench::store;

namespace {

NewSession sweep_on(const std::string& serial) {
    NewSession s;
    s.board_serial = serial;
    s.operator_name = "A. Lindqvist";
    s.instruments = {{"generator", "HVE,SG-1,0001,1.0", "GEN-07", "tcp://192.0.2.10:5025",
                      "2027-03-31", "CAL-1180", "{}"},
                     {"scope", "HVE,SC-2,0002,2.1", "SCP-02", "tcp://192.0.2.11:5025",
                      "2027-01-15", "", "{}"}};
    s.probes = {{"in", "1", "PRB-11", 10.0, "2027-02-01", ""},
                {"out", "2", "PRB-12", 10.0, "2027-02-01", ""}};
    return s;
}

bool same_counts(const CopyCounts& a, const CopyCounts& b) {
    return a.sessions == b.sessions && a.instruments == b.instruments && a.probes == b.probes &&
           a.plan_points == b.plan_points && a.points == b.points && a.fits == b.fits &&
           a.lots == b.lots && a.devices == b.devices;
}

CopyCounts counts(std::int64_t sessions, std::int64_t instruments, std::int64_t probes,
                  std::int64_t plan_points, std::int64_t points, std::int64_t fits,
                  std::int64_t lots = 0, std::int64_t devices = 0) {
    CopyCounts c;
    c.sessions = sessions;
    c.instruments = instruments;
    c.probes = probes;
    c.plan_points = plan_points;
    c.points = points;
    c.fits = fits;
    c.lots = lots;
    c.devices = devices;
    return c;
}

std::string describe(const CopyCounts& c) {
    return "sessions " + std::to_string(c.sessions) + ", instruments " +
           std::to_string(c.instruments) + ", probes " + std::to_string(c.probes) +
           ", plan " + std::to_string(c.plan_points) + ", points " + std::to_string(c.points) +
           ", fits " + std::to_string(c.fits) + ", lots " + std::to_string(c.lots) +
           ", devices " + std::to_string(c.devices);
}

// Readings by UUID, with what each is superseded by given as that reading's UUID.
std::map<std::string, std::pair<double, std::string>> readings_by_uuid(const SessionDetail& d) {
    std::map<std::int64_t, std::string> uuid_of;
    for (const auto& p : d.points) uuid_of[p.id] = p.uuid;
    std::map<std::string, std::pair<double, std::string>> out;
    for (const auto& p : d.points)
        out[p.uuid] = {p.gain_db, p.superseded_by ? uuid_of.at(*p.superseded_by) : ""};
    return out;
}

}  // namespace

TEST_CASE("a session held by a live connection is neither stale nor resumable elsewhere",
          "[store][postgres]") {
    AMPBENCH_POSTGRES_ONLY(b);
    double now_s = testing::unix_now_s();
    ArchiveOptions station;  // its recorded pid is dead: only the lock says it is alive
    station.clock_unix_s = [&] { return now_s; };
    station.host = "bench-3";
    station.pid = testing::dead_pid();
    auto holder = open_archive(b.location(), station);
    const Session s = holder->begin_session(sweep_on("PA1-2611-0042"));

    now_s += 60.0;  // far past the stale allowance
    ArchiveOptions desk;
    desk.clock_unix_s = [&] { return now_s; };
    desk.host = "bench-3";  // the same host name, so the pid rule alone would call it dead
    auto other = open_archive(b.location(), desk);
    CHECK(other->mark_stale_sessions() == 0);
    CHECK(other->session(s.id)->status == SessionStatus::running);
    try {
        other->resume_session(s.id);
        FAIL("a held session was resumed");
    } catch (const StoreError& e) {
        CHECK_THAT(e.what(), Catch::Contains("session " + std::to_string(s.id) +
                                             " is held by station bench-3 (pid " +
                                             std::to_string(station.pid) + ")"));
    }

    holder.reset();  // the station stops: its connection and lock go
    b.wait_for_other_connections_to_close(1);
    CHECK(other->mark_stale_sessions() == 1);
    const ResumeState state = other->resume_session(s.id);
    CHECK(state.session.status == SessionStatus::running);
    CHECK(state.session.pid == ::getpid());

    // Now the desk holds it: a third connection is told so, with the desk's pid.
    auto third = open_archive(b.location(), desk);
    CHECK_THROWS_WITH(third->resume_session(s.id),
                      Catch::Contains("held by station bench-3 (pid " +
                                      std::to_string(::getpid()) + ")"));
    other->finish_session(s.id, SessionStatus::complete);  // frees the lock
    CHECK_THROWS_WITH(third->resume_session(s.id), Catch::Contains("is complete"));
}

TEST_CASE("sessions and lots copied from a station keep their UUIDs and copy once",
          "[store][postgres][sync]") {
    AMPBENCH_POSTGRES_ONLY(server_backend);
    testing::TempDir dir;
    auto station = open_archive(dir.path("station.sqlite"));
    auto server = open_archive(server_backend.location());

    const auto design = station->put_design(R"({"name":"HVE-PA1 preamp","gain":100})", "pa1");
    station->ensure_board("PA1-2611-0042", design.address, "bay 3");
    const Session s = station->begin_session(sweep_on("PA1-2611-0042"));
    station->add_plan_points(s.id, testing::log_plan(4));
    station->append_point(s.id, testing::reading(10, 39.0, 0));
    station->append_point(s.id, testing::reading(100, 40.0, 1));

    // The server learns the design and board first (by content address and serial).
    server->put_design(station->design(design.address)->canonical_json, "copy");
    server->ensure_board("PA1-2611-0042", design.address, "bay 3");

    const CopyCounts first = server->copy_session(station->session_detail(s.id));
    INFO(describe(first));
    CHECK(same_counts(first, counts(1, 2, 2, 4, 2, 0)));
    const CopyCounts again = server->copy_session(station->session_detail(s.id));
    INFO(describe(again));
    CHECK(same_counts(again, CopyCounts{}));

    // The station goes on: a retake of point 1, the rest, a fit, and the end of the session.
    station->append_point(s.id, testing::reading(100, 40.5, 1));
    station->append_point(s.id, testing::reading(1000, 40.1, 2));
    station->append_point(s.id, testing::reading(10000, 39.8, 3));
    FitRecord fit;
    fit.session_id = s.id;
    fit.kind = "response";
    fit.model = "two-pole band-pass";
    fit.midband_gain_db = 40.2;
    station->add_fit(fit);
    station->finish_session(s.id, SessionStatus::complete);
    const SessionDetail source = station->session_detail(s.id);
    const CopyCounts later = server->copy_session(source);
    INFO(describe(later));
    CHECK(same_counts(later, counts(0, 0, 0, 0, 3, 1)));

    const auto copied = server->session_by_uuid(s.uuid);
    REQUIRE(copied);
    CHECK(copied->status == SessionStatus::complete);
    CHECK(copied->finished_utc == source.session.finished_utc);
    const SessionDetail there = server->session_detail(copied->id);
    CHECK(readings_by_uuid(there) == readings_by_uuid(source));
    CHECK(server->current_points(copied->id).size() == 4);
    REQUIRE(there.fits.size() == 1);
    CHECK(there.fits[0].uuid == source.fits[0].uuid);
    CHECK(there.fits[0].midband_gain_db == 40.2);
    CHECK(there.instruments.size() == 2);
    CHECK(server->history("PA1-2611-0042").at(0).point_count == 4);
    REQUIRE(server->sessions().size() == 1);
    CHECK(server->sessions()[0].uuid == s.uuid);
    CHECK_FALSE(server->session_by_uuid("00000000-0000-4000-8000-000000000000"));

    // A lot measured in its own session, with a replaced device.
    Lot lot;
    lot.lot_code = "LOT-2611-BC1";
    lot.quantity = 500;
    lot.session_id = s.id;
    const Lot stored = station->add_lot(lot);
    Device d1;
    d1.lot_id = stored.id;
    d1.index = 1;
    d1.hfe = 212.5;
    d1.passed = true;
    station->add_device(d1);
    Device skipped;
    skipped.lot_id = stored.id;
    skipped.index = 2;
    skipped.skipped_reason = "bent lead";
    const Device second = station->add_device(skipped);
    Device replacement = d1;
    replacement.index = 2;
    replacement.replacement_of = second.id;
    station->add_device(replacement);
    const CopyCounts lot_first =
        server->copy_lot(*station->lot(lot.lot_code), s.uuid, station->devices(stored.id));
    INFO(describe(lot_first));
    CHECK(same_counts(lot_first, counts(0, 0, 0, 0, 0, 0, 1, 3)));
    CHECK(same_counts(
        server->copy_lot(*station->lot(lot.lot_code), s.uuid, station->devices(stored.id)),
        CopyCounts{}));
    station->set_lot_status(stored.id, "accepted");
    Device third = d1;
    third.index = 3;
    station->add_device(third);
    CHECK(same_counts(
        server->copy_lot(*station->lot(lot.lot_code), s.uuid, station->devices(stored.id)),
        counts(0, 0, 0, 0, 0, 0, 0, 1)));
    const auto lot_there = server->lot(lot.lot_code);
    REQUIRE(lot_there);
    CHECK(lot_there->uuid == stored.uuid);
    CHECK(lot_there->status == "accepted");
    CHECK(lot_there->session_id == copied->id);
    const auto devices = server->devices(lot_there->id);
    REQUIRE(devices.size() == 4);
    CHECK(devices[1].skipped_reason == "bent lead");
    REQUIRE(devices[2].replacement_of);
    CHECK(*devices[2].replacement_of == devices[1].id);  // mapped to the server's own id

    CopyCounts total = first;
    total += later;
    total += lot_first;
    CHECK(same_counts(total, counts(1, 2, 2, 4, 5, 1, 1, 3)));

    // A lot whose session the server lacks is refused, naming it.
    CHECK_THROWS_WITH(server->copy_lot(*station->lot(lot.lot_code), "no-such-session", {}),
                      Catch::Contains("no-such-session") && Catch::Contains("copy the session"));
}

TEST_CASE("stations meeting an empty database at once migrate it once", "[store][postgres]") {
    AMPBENCH_POSTGRES_ONLY(b);
    std::vector<pid_t> children;
    for (int i = 0; i < 4; ++i) {
        const pid_t child = ::fork();
        REQUIRE(child >= 0);
        if (child == 0) {
            try {
                auto archive = open_archive(b.location());
                NewSession ns;
                ns.board_serial = "PA1-2611-010" + std::to_string(i);
                archive->finish_session(archive->begin_session(ns).id, SessionStatus::complete);
            } catch (const std::exception&) {
                ::_exit(3);
            }
            ::_exit(0);
        }
        children.push_back(child);
    }
    for (pid_t child : children) {
        int status = 0;
        REQUIRE(::waitpid(child, &status, 0) == child);
        CHECK(WIFEXITED(status));
        CHECK(WEXITSTATUS(status) == 0);
    }
    CHECK(b.query("SELECT count(*) FROM schema_version") ==
          std::to_string(current_schema_version()));
    CHECK(b.query("SELECT count(*) FROM sessions WHERE status = 'complete'") == "4");
}

TEST_CASE("a database of another program or no server at all gives one clear StoreError",
          "[store][postgres]") {
    AMPBENCH_POSTGRES_ONLY(b);
    b.exec("CREATE TABLE sessions (name text)");
    CHECK_THROWS_WITH(open_archive(b.location()),
                      Catch::Contains(b.location()) && Catch::Contains("not an ampbench archive"));
    // Port 1 on the loopback: nothing listens there.
    try {
        open_archive("postgresql://bench@127.0.0.1:1/ampbench");
        FAIL("connected to port 1");
    } catch (const StoreError& e) {
        const std::string text = e.what();
        CHECK_THAT(text, Catch::Contains("postgresql://bench@127.0.0.1:1/ampbench") &&
                             Catch::Contains("cannot connect"));
        CHECK(text.find('\n') == std::string::npos);
    }
}
