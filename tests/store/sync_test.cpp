// The copy primitives of sync (copy_session, copy_lot) through the Archive interface: a session
// with retakes and a fit arrives with every UUID and value and its supersede links intact; a
// second copy adds nothing; a resumed session adds only its new rows; a failing copy leaves
// nothing; lots keep their devices' replacement links. The destination is a second SQLite file,
// and also a fresh PostgreSQL database when AMPBENCH_TEST_PG names a server.
#include <catch2/catch.hpp>

#include <cmath>
#include <functional>
#include <limits>
#include <map>
#include <memory>

#include "core/errors.h"
#include "store/archive.h"
#include "store_support.h"
#include "sync_support.h"
#include "test_backend.h"

using namespace ampbench;
using namespace ampbench::store;
using testing::TempDir;

namespace {

// Runs `body` with a fresh destination archive of each backend available.
void for_each_destination(const std::function<void(Archive& dest)>& body) {
    SECTION("destination: SQLite") {
        TempDir dir;
        auto dest = open_archive(dir.path("central.sqlite"));
        body(*dest);
    }
    SECTION("destination: PostgreSQL") {
        // A database of its own on the $AMPBENCH_TEST_PG cluster (tests/support/test_backend.h).
        AMPBENCH_POSTGRES_ONLY(pg);
        auto dest = open_archive(pg.location());
        body(*dest);
    }
}

const char* const design_text = R"({"name":"HVE-PA1 preamp","stages":1})";

NewSession sweep_on(const std::string& serial, const std::string& design) {
    NewSession s;
    s.board_serial = serial;
    s.design_address = design;
    s.operator_name = "R. Ilunga";
    s.bench_file = "benches/bay2.bench.json";
    s.instruments = {{"generator", "HVE,SG-1,0003,1.0", "GEN-03", "tcp://192.0.2.20:5025",
                      "2027-05-31", "CAL-2211", R"({"output_ohms":50})"},
                     {"scope", "HVE,SC-2,0009,2.1", "SCP-09", "tcp://192.0.2.21:5025", "", "",
                      "{}"}};
    s.probes = {{"in", "1", "PRB-31", 10.0, "2027-04-01", ""},
                {"out", "2", "PRB-32", 10.0, "2027-04-01", "CERT-9"}};
    return s;
}

// The board (with its design) as sync puts it at the destination before any session.
void copy_board(Archive& from, Archive& to, const std::string& serial) {
    const Board b = *from.board(serial);
    if (!b.design_address.empty()) {
        const DesignRecord d = to.put_design(from.design(b.design_address)->canonical_json, "copy");
        REQUIRE(d.address == b.design_address);
    }
    to.ensure_board(b.serial, b.design_address, b.notes);
}

// Every field of every reading, keyed by UUID, with superseded_by given as the UUID it names.
std::map<std::string, std::string> readings_by_uuid(const SessionDetail& d) {
    std::map<std::int64_t, std::string> uuid_of;
    for (const auto& p : d.points) uuid_of[p.id] = p.uuid;
    auto opt = [](const std::optional<double>& v) {
        return v ? std::to_string(*v) : std::string("null");
    };
    std::map<std::string, std::string> out;
    for (const auto& p : d.points)
        out[p.uuid] = std::to_string(p.sequence) + "|" +
                      (p.plan_index ? std::to_string(*p.plan_index) : "null") + "|" +
                      std::to_string(p.freq_hz) + "|" + std::to_string(p.gain_db) + "|" +
                      opt(p.in_amplitude_v) + "|" + opt(p.out_phase_deg) + "|" +
                      opt(p.gain_db_sd) + "|" + opt(p.thd_pct) + "|" + p.flags + "|" +
                      p.settings_json + "|" + p.taken_utc + "|" +
                      (p.superseded_by ? uuid_of.at(*p.superseded_by) : "current");
    return out;
}

void check_same_session(const SessionDetail& a, const SessionDetail& b) {
    CHECK(a.session.uuid == b.session.uuid);
    CHECK(a.session.board_serial == b.session.board_serial);
    CHECK(a.session.status == b.session.status);
    CHECK(a.session.started_utc == b.session.started_utc);
    CHECK(a.session.finished_utc == b.session.finished_utc);
    CHECK(a.session.operator_name == b.session.operator_name);
    CHECK(a.session.software_version == b.session.software_version);
    REQUIRE(a.instruments.size() == b.instruments.size());
    for (size_t i = 0; i < a.instruments.size(); ++i) {
        CHECK(a.instruments[i].identity == b.instruments[i].identity);
        CHECK(a.instruments[i].settings_json == b.instruments[i].settings_json);
    }
    REQUIRE(a.probes.size() == b.probes.size());
    for (size_t i = 0; i < a.probes.size(); ++i) {
        CHECK(a.probes[i].asset == b.probes[i].asset);
        CHECK(a.probes[i].certificate == b.probes[i].certificate);
    }
    REQUIRE(a.plan.size() == b.plan.size());
    for (size_t i = 0; i < a.plan.size(); ++i) {
        CHECK(a.plan[i].index == b.plan[i].index);
        CHECK(a.plan[i].freq_hz == b.plan[i].freq_hz);
    }
    CHECK(readings_by_uuid(a) == readings_by_uuid(b));
    REQUIRE(a.fits.size() == b.fits.size());
    for (size_t i = 0; i < a.fits.size(); ++i) {
        CHECK(a.fits[i].uuid == b.fits[i].uuid);
        CHECK(a.fits[i].params_json == b.fits[i].params_json);
        CHECK(a.fits[i].midband_gain_db == b.fits[i].midband_gain_db);
        CHECK(a.fits[i].created_utc == b.fits[i].created_utc);
    }
}

std::int64_t total(const CopyCounts& c) {
    return c.sessions + c.instruments + c.probes + c.plan_points + c.points + c.fits + c.lots +
           c.devices;
}

}  // namespace

TEST_CASE("copy_session moves a session whole, once, and later only what is new", "[store][sync]") {
    TempDir dir;
    auto station = open_archive(dir.path("station.sqlite"));
    const std::string design = station->put_design(design_text, "pa1").address;
    const Session s = station->begin_session(sweep_on("PA1-2611-0201", design));
    station->add_plan_points(s.id, testing::log_plan(6));
    for (int i = 0; i < 4; ++i) station->append_point(s.id, testing::reading(10.0 * (i + 1), 40.0, i));
    station->append_point(s.id, testing::reading(20.0, 40.4, 1));  // a retake of point 1
    station->append_point(s.id, testing::reading(7.0, 12.0));      // unplanned
    FitRecord fit;
    fit.session_id = s.id;
    fit.kind = "response";
    fit.model = "two-pole";
    fit.params_json = R"({"gain_db":40.1})";
    fit.midband_gain_db = 40.1;
    station->add_fit(fit);
    station->finish_session(s.id, SessionStatus::interrupted);

    for_each_destination([&](Archive& central) {
        copy_board(*station, central, "PA1-2611-0201");
        const SessionDetail first = station->session_detail(s.id);
        const CopyCounts added = central.copy_session(first);
        CHECK(added.sessions == 1);
        CHECK(added.instruments == 2);
        CHECK(added.probes == 2);
        CHECK(added.plan_points == 6);
        CHECK(added.points == 6);
        CHECK(added.fits == 1);
        const auto there = central.session_by_uuid(s.uuid);
        REQUIRE(there);
        check_same_session(first, central.session_detail(there->id));
        CHECK(central.current_points(there->id).size() == 5);  // the retake replaced one

        // Copying the same session again adds nothing.
        const auto before = testing::archive_rows(central);
        CHECK(total(central.copy_session(first)) == 0);
        CHECK(testing::archive_rows(central).text() == before.text());

        // The station resumes the session: two more readings, one a retake of a reading the
        // central archive already has as current.
        station->resume_session(s.id);
        station->append_point(s.id, testing::reading(50.0, 39.0, 4));
        station->append_point(s.id, testing::reading(30.0, 40.2, 2));
        station->finish_session(s.id, SessionStatus::complete);
        const SessionDetail second = station->session_detail(s.id);
        const CopyCounts more = central.copy_session(second);
        CHECK(more.sessions == 0);
        CHECK(more.instruments == 0);
        CHECK(more.plan_points == 0);
        CHECK(more.points == 2);
        CHECK(more.fits == 0);
        check_same_session(second, central.session_detail(there->id));
        CHECK(central.session_by_uuid(s.uuid)->status == SessionStatus::complete);
        CHECK(central.current_points(there->id).size() == 6);
        const auto rows = testing::archive_rows(central);
        CHECK(rows.uuids.size() == static_cast<size_t>(rows.uuid_rows));

        // An older copy (still interrupted) does not move the session back.
        central.copy_session(first);
        CHECK(central.session_by_uuid(s.uuid)->status == SessionStatus::complete);
        CHECK(central.session_detail(there->id).points.size() == 8);
    });
}

TEST_CASE("a copy that fails part way leaves nothing of the session", "[store][sync]") {
    TempDir dir;
    auto station = open_archive(dir.path("station.sqlite"));
    const Session s = station->begin_session(sweep_on("PA1-2611-0202", {}));
    station->add_plan_points(s.id, testing::log_plan(3));
    for (int i = 0; i < 3; ++i) station->append_point(s.id, testing::reading(100.0 * (i + 1), 38.0, i));
    station->finish_session(s.id, SessionStatus::complete);
    SessionDetail damaged = station->session_detail(s.id);
    damaged.points.back().gain_db = std::numeric_limits<double>::quiet_NaN();

    for_each_destination([&](Archive& central) {
        // No board at the destination yet: refused before anything is written.
        CHECK_THROWS_AS(central.copy_session(station->session_detail(s.id)), StoreError);
        copy_board(*station, central, "PA1-2611-0202");
        CHECK_THROWS_AS(central.copy_session(damaged), StoreError);
        CHECK_FALSE(central.session_by_uuid(s.uuid));
        CHECK(testing::archive_rows(central).rows.points == 0);
        // The sound copy then goes through whole.
        CHECK(central.copy_session(station->session_detail(s.id)).points == 3);
    });
}

TEST_CASE("copy_lot moves a lot with its devices and replacement links, once", "[store][sync]") {
    TempDir dir;
    auto station = open_archive(dir.path("station.sqlite"));
    NewSession ns = sweep_on("LOT-2611-BC7", {});
    ns.kind = SessionKind::lot;
    const Session s = station->begin_session(ns);
    station->finish_session(s.id, SessionStatus::complete);
    Lot lot;
    lot.lot_code = "LOT-2611-BC7";
    lot.plan_json = R"({"plan":{"n":3,"c":0}})";
    lot.quantity = 250;
    lot.supplier = "Harrow Vale stores";
    lot.session_id = s.id;
    const Lot stored = station->add_lot(lot);
    Device good;
    good.lot_id = stored.id;
    good.index = 1;
    good.hfe = 212.0;
    good.vbe_v = 0.652;
    good.passed = true;
    station->add_device(good);
    Device skipped;
    skipped.lot_id = stored.id;
    skipped.index = 2;
    skipped.skipped_reason = "bent lead";
    const Device second = station->add_device(skipped);
    Device replacement = good;
    replacement.index = 2;
    replacement.hfe = 188.0;
    replacement.replacement_of = second.id;
    station->add_device(replacement);

    for_each_destination([&](Archive& central) {
        copy_board(*station, central, "LOT-2611-BC7");
        central.copy_session(station->session_detail(s.id));
        const CopyCounts added =
            central.copy_lot(*station->lot("LOT-2611-BC7"), s.uuid, station->devices(stored.id));
        CHECK(added.lots == 1);
        CHECK(added.devices == 3);
        const auto there = central.lot("LOT-2611-BC7");
        REQUIRE(there);
        CHECK(there->uuid == stored.uuid);
        CHECK(there->quantity == 250);
        REQUIRE(there->session_id);
        CHECK(central.session(*there->session_id)->uuid == s.uuid);
        const auto devices = central.devices(there->id);
        REQUIRE(devices.size() == 3);
        std::map<std::int64_t, std::string> uuid_of;
        for (const auto& d : devices) uuid_of[d.id] = d.uuid;
        for (const auto& d : devices)
            if (d.uuid == station->devices(stored.id).back().uuid) {
                REQUIRE(d.replacement_of);
                CHECK(uuid_of.at(*d.replacement_of) == second.uuid);
                CHECK(d.hfe == 188.0);
            }

        CHECK(total(central.copy_lot(*station->lot("LOT-2611-BC7"), s.uuid,
                                     station->devices(stored.id))) == 0);
        // One more device and a verdict at the station: only they move.
        Device third = good;
        third.index = 3;
        station->add_device(third);
        station->set_lot_status(stored.id, "accepted");
        const CopyCounts more =
            central.copy_lot(*station->lot("LOT-2611-BC7"), s.uuid, station->devices(stored.id));
        CHECK(more.lots == 0);
        CHECK(more.devices == 1);
        CHECK(central.lot("LOT-2611-BC7")->status == "accepted");
        // An older copy of the open lot does not take the verdict back.
        central.copy_lot(stored, s.uuid, {});
        CHECK(central.lot("LOT-2611-BC7")->status == "accepted");

        // Another station's lot under the same code is refused, not merged.
        Lot other = stored;
        other.uuid = "00000000-0000-4000-8000-000000000001";
        CHECK_THROWS_AS(central.copy_lot(other, "", {}), StoreError);
    });
}
