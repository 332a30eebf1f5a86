// Internal to the SQLite backend (not for commands): the state behind SqliteArchive and the
// row helpers, shared by sqlite_archive.cpp and sqlite_sync.cpp.
#pragma once

#include <chrono>
#include <cmath>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <unordered_map>
#include <vector>

#include <SQLiteCpp/SQLiteCpp.h>
#include <fmt/format.h>
#include <sqlite3.h>

#include "core/errors.h"
#include "store/archive_util.h"
#include "store/schema.h"
#include "store/sqlite_archive.h"
#include "store/uuid.h"

namespace ampbench::store {

namespace sqlite_detail {

void bind_optional(SQLite::Statement& st, int index, const std::optional<double>& value);
void bind_optional(SQLite::Statement& st, int index, const std::optional<std::int64_t>& value);
void bind_text_or_null(SQLite::Statement& st, int index, const std::string& value);
std::optional<double> optional_double(const SQLite::Column& column);
std::optional<std::int64_t> optional_int(const SQLite::Column& column);
std::string text(const SQLite::Column& column);
// A foreign or truncated file gets a precise message before SQLite is asked anything.
void check_file_header(const std::string& path);

// Column lists and the readers that go with them (`first`: the column session_columns start at).
extern const char* const session_columns;
Session read_session(SQLite::Statement& st, int first = 0);
extern const char* const point_columns;
Point read_point(SQLite::Statement& st);
extern const char* const fit_columns;
FitRecord read_fit(SQLite::Statement& st);
extern const char* const lot_columns;
Lot read_lot(SQLite::Statement& st);
extern const char* const device_columns;
Device read_device(SQLite::Statement& st);
extern const char* const history_sql;
// Binds a reading's columns plan_index .. taken_utc (18 values) from parameter `first`.
void bind_point_measurement(SQLite::Statement& st, int first, const Point& p);
// Binds a device's columns device_index .. skipped_reason (12 values) from parameter `first`.
void bind_device_readings(SQLite::Statement& st, int first, const Device& d);

}  // namespace sqlite_detail

// The helpers above are this backend's vocabulary; only its own sources include this header.
using namespace sqlite_detail;

struct SqliteArchive::Impl {
    std::string path;
    ArchiveOptions options;
    std::string host;
    std::int64_t pid = 0;
    int version = 0;
    std::unique_ptr<SQLite::Database> db;
    std::unordered_map<std::string, std::unique_ptr<SQLite::Statement>> statements;

    // A prepared statement, reset and with its bindings cleared.
    SQLite::Statement& query(const std::string& sql) {
        auto& slot = statements[sql];
        if (!slot) slot = std::make_unique<SQLite::Statement>(*db, sql);
        slot->reset();
        slot->clearBindings();
        return *slot;
    }

    double now() const {
        if (options.clock_unix_s) return options.clock_unix_s();
        using namespace std::chrono;
        return duration<double>(system_clock::now().time_since_epoch()).count();
    }

    [[noreturn]] void fail(const SQLite::Exception& e) const {
        const int code = e.getErrorCode() & 0xff;
        if (code == SQLITE_BUSY || code == SQLITE_LOCKED)
            throw StoreError(fmt::format(
                "archive {}: busy for more than {} ms (another station is writing)", path,
                options.busy_timeout_ms));
        if (code == SQLITE_NOTADB)
            throw StoreError(fmt::format("archive {}: not an ampbench archive ({})", path,
                                         e.what()));
        if (code == SQLITE_CORRUPT)
            throw StoreError(fmt::format("archive {}: damaged ({})", path, e.what()));
        throw StoreError(fmt::format("archive {}: {}", path, e.what()));
    }

    // A statement left mid-result would hold its read snapshot open, and a later BEGIN
    // IMMEDIATE on a stale snapshot fails at once instead of waiting: reset them all.
    void reset_statements() noexcept {
        for (auto& [sql, st] : statements)
            if (st) st->tryReset();
    }

    template <class F>
    auto guarded(F&& f) -> decltype(f()) {
        struct ResetOnExit {
            Impl& impl;
            ~ResetOnExit() { impl.reset_statements(); }
        } reset_on_exit{*this};
        try {
            return f();
        } catch (const SQLite::Exception& e) {
            fail(e);
        }
    }

    SQLite::Transaction write_transaction() {
        return SQLite::Transaction(*db, SQLite::TransactionBehavior::IMMEDIATE);
    }

    void open() {
        check_file_header(path);
        db = std::make_unique<SQLite::Database>(
            path, SQLite::OPEN_READWRITE | SQLite::OPEN_CREATE, options.busy_timeout_ms);
        db->exec("PRAGMA foreign_keys = ON");
        // A point is durable once append_point returns, even against power loss.
        db->exec("PRAGMA synchronous = FULL");
        const std::string mode = db->execAndGet("PRAGMA journal_mode = WAL").getString();
        if (mode != "wal")
            throw StoreError(fmt::format(
                "archive {}: cannot switch to the WAL journal (got '{}'); is it on a network "
                "file system?",
                path, mode));
        migrate();
    }

    int read_version() {
        auto& tables = query(
            "SELECT count(*), coalesce(sum(name = 'schema_version'), 0) FROM sqlite_master "
            "WHERE type = 'table' AND name NOT LIKE 'sqlite_%'");
        tables.executeStep();
        const auto count = tables.getColumn(0).getInt64();
        const auto has_version = tables.getColumn(1).getInt64();
        tables.reset();
        if (count == 0) return 0;
        if (!has_version)
            throw StoreError(fmt::format(
                "archive {}: not an ampbench archive (a SQLite file without schema_version)",
                path));
        return static_cast<int>(db->execAndGet("SELECT coalesce(max(version), 0) FROM schema_version")
                                    .getInt64());
    }

    void refuse_newer(int found) const {
        if (found > current_schema_version())
            throw StoreError(fmt::format(
                "archive {}: written by a newer ampbench (schema version {}; this build "
                "reads up to {}); upgrade ampbench to open it",
                path, found, current_schema_version()));
    }

    void migrate() {
        version = read_version();
        refuse_newer(version);
        if (version == current_schema_version()) return;
        auto txn = write_transaction();
        version = read_version();  // another station may have migrated meanwhile
        refuse_newer(version);
        for (const auto& m : migrations()) {
            if (m.version <= version) continue;
            db->exec(m.sqlite);
            auto& st = query("INSERT INTO schema_version(version, applied_utc) VALUES (?, ?)");
            st.bind(1, m.version);
            st.bind(2, utc_iso(now()));
            st.exec();
            version = m.version;
        }
        txn.commit();
    }

    bool is_stale(const std::string& session_host, std::int64_t session_pid,
                  double heartbeat_s) const {
        return stale_session(host, session_host, session_pid, heartbeat_s, now(),
                             options.stale_after_s);
    }

    int mark_stale() {
        struct Candidate {
            std::int64_t id;
            std::string host;
            std::int64_t pid;
            double heartbeat_s;
        };
        auto find = [&] {
            std::vector<Candidate> found;
            auto& st = query(
                "SELECT id, host, pid, heartbeat_unix_s FROM sessions "
                "WHERE status = 'running' AND heartbeat_unix_s < ?");
            st.bind(1, now() - options.stale_after_s);
            while (st.executeStep())
                found.push_back({st.getColumn(0).getInt64(), text(st.getColumn(1)),
                                 st.getColumn(2).getInt64(), st.getColumn(3).getDouble()});
            std::erase_if(found, [&](const Candidate& c) {
                return !is_stale(c.host, c.pid, c.heartbeat_s);
            });
            return found;
        };
        // Look first without the write lock: most opens find nothing to do.
        if (find().empty()) return 0;
        auto txn = write_transaction();
        int marked = 0;
        for (const auto& c : find()) {
            auto& st = query(
                "UPDATE sessions SET status = 'interrupted' "
                "WHERE id = ? AND status = 'running' AND heartbeat_unix_s = ?");
            st.bind(1, c.id);
            st.bind(2, c.heartbeat_s);
            marked += st.exec();
        }
        txn.commit();
        return marked;
    }

    std::optional<Board> find_board(const std::string& serial) {
        auto& st = query(
            "SELECT id, serial, design_address, notes, created_utc FROM boards WHERE serial = ?");
        st.bind(1, serial);
        if (!st.executeStep()) return std::nullopt;
        Board b;
        b.id = st.getColumn(0).getInt64();
        b.serial = text(st.getColumn(1));
        b.design_address = text(st.getColumn(2));
        b.notes = text(st.getColumn(3));
        b.created_utc = text(st.getColumn(4));
        return b;
    }

    // Inside a write transaction.
    Board ensure_board_locked(const std::string& serial, const std::string& design_address,
                              const std::string& notes) {
        if (serial.empty()) throw StoreError(fmt::format("archive {}: empty board serial", path));
        if (!design_address.empty()) {
            auto& d = query("SELECT 1 FROM designs WHERE address = ?");
            d.bind(1, design_address);
            if (!d.executeStep())
                throw StoreError(fmt::format("archive {}: design {} is not in the archive", path,
                                             design_address));
        }
        auto& insert = query(
            "INSERT INTO boards(serial, design_address, notes, created_utc) VALUES (?, ?, ?, ?) "
            "ON CONFLICT(serial) DO NOTHING");
        insert.bind(1, serial);
        bind_text_or_null(insert, 2, design_address);
        insert.bind(3, notes);
        insert.bind(4, utc_iso(now()));
        if (insert.exec() == 0) {
            if (!design_address.empty()) {
                auto& st = query("UPDATE boards SET design_address = ? WHERE serial = ?");
                st.bind(1, design_address);
                st.bind(2, serial);
                st.exec();
            }
            if (!notes.empty()) {
                auto& st = query("UPDATE boards SET notes = ? WHERE serial = ?");
                st.bind(1, notes);
                st.bind(2, serial);
                st.exec();
            }
        }
        return *find_board(serial);
    }

    std::optional<Session> find_session(std::int64_t id) {
        auto& st = query(std::string("SELECT ") + session_columns +
                         " FROM sessions s JOIN boards b ON b.id = s.board_id WHERE s.id = ?");
        st.bind(1, id);
        if (!st.executeStep()) return std::nullopt;
        return read_session(st);
    }

    Session require_session(std::int64_t id) {
        auto s = find_session(id);
        if (!s) throw StoreError(fmt::format("archive {}: no session {}", path, id));
        return *s;
    }

    std::vector<PlanPoint> read_plan(std::int64_t session_id) {
        std::vector<PlanPoint> plan;
        auto& st = query(
            "SELECT plan_index, freq_hz, adaptive FROM plan_points WHERE session_id = ? "
            "ORDER BY plan_index");
        st.bind(1, session_id);
        while (st.executeStep())
            plan.push_back({st.getColumn(0).getInt64(), st.getColumn(1).getDouble(),
                            st.getColumn(2).getInt() != 0});
        return plan;
    }

    std::vector<Point> read_points(std::int64_t session_id, bool current_only) {
        std::vector<Point> points;
        std::string sql = std::string("SELECT ") + point_columns +
                          " FROM points WHERE session_id = ?" +
                          (current_only ? " AND superseded_by IS NULL" : "") +
                          " ORDER BY sequence";
        auto& st = query(sql);
        st.bind(1, session_id);
        while (st.executeStep()) points.push_back(read_point(st));
        return points;
    }

    std::vector<InstrumentRecord> read_instruments(std::int64_t session_id) {
        std::vector<InstrumentRecord> out;
        auto& st = query(
            "SELECT role, identity, asset, uri, cal_due, certificate, settings_json "
            "FROM instruments WHERE session_id = ? ORDER BY id");
        st.bind(1, session_id);
        while (st.executeStep())
            out.push_back({text(st.getColumn(0)), text(st.getColumn(1)), text(st.getColumn(2)),
                           text(st.getColumn(3)), text(st.getColumn(4)), text(st.getColumn(5)),
                           text(st.getColumn(6))});
        return out;
    }

    std::vector<ProbeRecord> read_probes(std::int64_t session_id) {
        std::vector<ProbeRecord> out;
        auto& st = query(
            "SELECT name, channel, asset, ratio, cal_due, certificate FROM probes "
            "WHERE session_id = ? ORDER BY id");
        st.bind(1, session_id);
        while (st.executeStep())
            out.push_back({text(st.getColumn(0)), text(st.getColumn(1)), text(st.getColumn(2)),
                           st.getColumn(3).getDouble(), text(st.getColumn(4)),
                           text(st.getColumn(5))});
        return out;
    }

    // Inside a write transaction; the session must be running.
    void require_running(std::int64_t session_id) {
        auto& st = query("SELECT status FROM sessions WHERE id = ?");
        st.bind(1, session_id);
        if (!st.executeStep())
            throw StoreError(fmt::format("archive {}: no session {}", path, session_id));
        const std::string status = text(st.getColumn(0));
        if (status != "running")
            throw StoreError(fmt::format(
                "archive {}: session {} is {}; resume it before adding readings", path,
                session_id, status));
    }

    // Inside a write transaction.
    Point insert_point(std::int64_t session_id, const Point& in) {
        if (!std::isfinite(in.freq_hz) || !std::isfinite(in.gain_db))
            throw StoreError(fmt::format(
                "archive {}: a reading needs a finite freq_hz and gain_db (got {} Hz, {} dB)",
                path, in.freq_hz, in.gain_db));
        Point p = in;
        p.superseded_by.reset();
        p.uuid = make_uuid_v4();
        if (p.taken_utc.empty()) p.taken_utc = utc_iso(now());
        auto& seq = query(
            "SELECT coalesce(max(sequence), 0) + 1 FROM points WHERE session_id = ?");
        seq.bind(1, session_id);
        seq.executeStep();
        p.sequence = seq.getColumn(0).getInt64();
        seq.reset();
        auto& next_id = query("SELECT coalesce(max(id), 0) + 1 FROM points");
        next_id.executeStep();
        p.id = next_id.getColumn(0).getInt64();
        next_id.reset();
        if (p.plan_index) {
            auto& planned = query(
                "SELECT 1 FROM plan_points WHERE session_id = ? AND plan_index = ?");
            planned.bind(1, session_id);
            planned.bind(2, *p.plan_index);
            if (!planned.executeStep())
                throw StoreError(fmt::format("archive {}: session {} has no planned point {}",
                                             path, session_id, *p.plan_index));
            // A retake: the earlier reading stays, marked as replaced by this one.
            auto& supersede = query(
                "UPDATE points SET superseded_by = ? "
                "WHERE session_id = ? AND plan_index = ? AND superseded_by IS NULL");
            supersede.bind(1, p.id);
            supersede.bind(2, session_id);
            supersede.bind(3, *p.plan_index);
            supersede.exec();
        }
        auto& st = query(
            "INSERT INTO points(id, uuid, session_id, sequence, plan_index, freq_hz, "
            "in_amplitude_v, in_amplitude_sd_v, in_phase_deg, in_phase_sd_deg, out_amplitude_v, "
            "out_amplitude_sd_v, out_phase_deg, out_phase_sd_deg, gain_db, gain_db_sd, "
            "phase_deg, phase_deg_sd, thd_pct, flags, settings_json, taken_utc) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
        st.bind(1, p.id);
        st.bind(2, p.uuid);
        st.bind(3, session_id);
        st.bind(4, p.sequence);
        bind_point_measurement(st, 5, p);
        st.exec();
        return p;
    }

    void beat(std::int64_t session_id) {
        auto& st = query("UPDATE sessions SET heartbeat_unix_s = ? WHERE id = ?");
        st.bind(1, now());
        st.bind(2, session_id);
        st.exec();
    }

    // Inside a write transaction: the session row, its instruments and probes.
    std::int64_t insert_session(const NewSession& in);
    void insert_instruments(std::int64_t session_id, const std::vector<InstrumentRecord>& list);
    void insert_probes(std::int64_t session_id, const std::vector<ProbeRecord>& list);
    // Inside a write transaction: the row as given (UUID and times set); returns its id.
    std::int64_t insert_fit(const FitRecord& fit);
    std::int64_t insert_lot(const Lot& lot);

    std::vector<SessionSummary> summaries(const std::string& sql, const std::string& serial) {
        std::vector<SessionSummary> out;
        auto& st = query(sql);
        st.bind(1, serial);
        while (st.executeStep()) {
            SessionSummary s;
            s.session = read_session(st);
            s.point_count = st.getColumn(14).getInt64();
            s.midband_gain_db = optional_double(st.getColumn(15));
            s.f_low_hz = optional_double(st.getColumn(16));
            s.f_high_hz = optional_double(st.getColumn(17));
            out.push_back(std::move(s));
        }
        for (auto& s : out) s.instruments = read_instruments(s.session.id);
        return out;
    }
};

}  // namespace ampbench::store
