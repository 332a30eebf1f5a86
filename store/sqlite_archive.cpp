// SqliteArchive: the archive on one SQLite file through SQLiteCpp. Every SQLite failure becomes
// a StoreError naming the file; all SQL is fixed text with bound parameters.
#include "store/sqlite_archive.h"
#include "store/sqlite_archive_impl.h"

#include <sys/stat.h>
#include <unistd.h>

#include <array>
#include <cerrno>
#include <chrono>
#include <cmath>
#include <csignal>
#include <ctime>
#include <fstream>
#include <map>
#include <unordered_map>

#include <SQLiteCpp/SQLiteCpp.h>
#include <fmt/format.h>
#include <nlohmann/json.hpp>
#include <sqlite3.h>

#include "core/errors.h"
#include "core/version.h"
#include "store/archive_util.h"
#include "store/canonical_json.h"
#include "store/schema.h"
#include "store/uuid.h"

namespace ampbench::store {

namespace sqlite_detail {

void bind_optional(SQLite::Statement& st, int index, const std::optional<double>& value) {
    if (value)
        st.bind(index, *value);
    else
        st.bind(index);
}

void bind_optional(SQLite::Statement& st, int index, const std::optional<std::int64_t>& value) {
    if (value)
        st.bind(index, *value);
    else
        st.bind(index);
}

void bind_text_or_null(SQLite::Statement& st, int index, const std::string& value) {
    if (value.empty())
        st.bind(index);
    else
        st.bind(index, value);
}

std::optional<double> optional_double(const SQLite::Column& column) {
    if (column.isNull()) return std::nullopt;
    return column.getDouble();
}

std::optional<std::int64_t> optional_int(const SQLite::Column& column) {
    if (column.isNull()) return std::nullopt;
    return column.getInt64();
}

std::string text(const SQLite::Column& column) {
    if (column.isNull()) return {};
    return column.getString();
}

// Reads the SQLite file header so a foreign or truncated file gets a precise message before
// SQLite is asked anything (https://www.sqlite.org/fileformat.html, "The Database Header").
void check_file_header(const std::string& path) {
    struct stat info {};
    if (::stat(path.c_str(), &info) != 0 || info.st_size == 0) return;  // new or empty: created
    if (!S_ISREG(info.st_mode))
        throw StoreError(fmt::format("archive {}: not a regular file", path));
    std::ifstream in(path, std::ios::binary);
    if (!in) throw StoreError(fmt::format("archive {}: cannot open for reading", path));
    std::array<unsigned char, 100> header{};
    in.read(reinterpret_cast<char*>(header.data()), header.size());
    const auto got = in.gcount();
    static constexpr char magic[] = "SQLite format 3";  // with its terminating NUL: 16 bytes
    if (got < 16 || !std::equal(magic, magic + 16, header.begin()))
        throw StoreError(fmt::format("archive {}: not an ampbench archive (not a SQLite file)",
                                     path));
    if (got < 100)
        throw StoreError(fmt::format("archive {}: damaged (truncated inside its header)", path));
    auto be32 = [&](size_t at) {
        return (std::uint32_t{header[at]} << 24) | (std::uint32_t{header[at + 1]} << 16) |
               (std::uint32_t{header[at + 2]} << 8) | std::uint32_t{header[at + 3]};
    };
    std::uint32_t page_size = (std::uint32_t{header[16]} << 8) | header[17];
    if (page_size == 1) page_size = 65536;
    const std::uint32_t pages = be32(28);
    // The page count is trustworthy only when its version-valid-for matches the change counter.
    const bool count_valid = pages != 0 && be32(92) == be32(24);
    // A writer killed during a checkpoint can leave the main file shorter than its header says;
    // the pages are still in the write-ahead log and SQLite restores them on open.
    struct stat wal {};
    const bool wal_pending = ::stat((path + "-wal").c_str(), &wal) == 0 && wal.st_size > 0;
    if (count_valid && !wal_pending &&
        static_cast<std::uint64_t>(info.st_size) < std::uint64_t{pages} * page_size)
        throw StoreError(fmt::format(
            "archive {}: damaged (file is {} bytes, its header says {} pages of {} bytes; "
            "truncated?)",
            path, info.st_size, pages, page_size));
}

const char* const session_columns = columns::session;

Session read_session(SQLite::Statement& st, int first) {
    Session s;
    s.id = st.getColumn(first + 0).getInt64();
    s.uuid = text(st.getColumn(first + 1));
    s.board_serial = text(st.getColumn(first + 2));
    s.kind = session_kind_from(text(st.getColumn(first + 3)));
    s.status = session_status_from(text(st.getColumn(first + 4)));
    s.started_utc = text(st.getColumn(first + 5));
    s.finished_utc = text(st.getColumn(first + 6));
    s.operator_name = text(st.getColumn(first + 7));
    s.host = text(st.getColumn(first + 8));
    s.pid = st.getColumn(first + 9).getInt64();
    s.heartbeat_unix_s = st.getColumn(first + 10).getDouble();
    s.bench_file = text(st.getColumn(first + 11));
    s.software_version = text(st.getColumn(first + 12));
    s.notes = text(st.getColumn(first + 13));
    return s;
}

const char* const point_columns = columns::point;

Point read_point(SQLite::Statement& st) {
    Point p;
    p.id = st.getColumn(0).getInt64();
    p.uuid = text(st.getColumn(1));
    p.sequence = st.getColumn(2).getInt64();
    p.plan_index = optional_int(st.getColumn(3));
    p.freq_hz = st.getColumn(4).getDouble();
    p.in_amplitude_v = optional_double(st.getColumn(5));
    p.in_amplitude_sd_v = optional_double(st.getColumn(6));
    p.in_phase_deg = optional_double(st.getColumn(7));
    p.in_phase_sd_deg = optional_double(st.getColumn(8));
    p.out_amplitude_v = optional_double(st.getColumn(9));
    p.out_amplitude_sd_v = optional_double(st.getColumn(10));
    p.out_phase_deg = optional_double(st.getColumn(11));
    p.out_phase_sd_deg = optional_double(st.getColumn(12));
    p.gain_db = st.getColumn(13).getDouble();
    p.gain_db_sd = optional_double(st.getColumn(14));
    p.phase_deg = optional_double(st.getColumn(15));
    p.phase_deg_sd = optional_double(st.getColumn(16));
    p.thd_pct = optional_double(st.getColumn(17));
    p.flags = text(st.getColumn(18));
    p.settings_json = text(st.getColumn(19));
    p.taken_utc = text(st.getColumn(20));
    p.superseded_by = optional_int(st.getColumn(21));
    return p;
}

const char* const fit_columns = columns::fit;

FitRecord read_fit(SQLite::Statement& st) {
    FitRecord f;
    f.id = st.getColumn(0).getInt64();
    f.uuid = text(st.getColumn(1));
    f.session_id = st.getColumn(2).getInt64();
    f.kind = text(st.getColumn(3));
    f.model = text(st.getColumn(4));
    f.params_json = text(st.getColumn(5));
    f.report_json = text(st.getColumn(6));
    f.midband_gain_db = optional_double(st.getColumn(7));
    f.f_low_hz = optional_double(st.getColumn(8));
    f.f_high_hz = optional_double(st.getColumn(9));
    f.created_utc = text(st.getColumn(10));
    return f;
}

const char* const lot_columns = columns::lot;

Lot read_lot(SQLite::Statement& st) {
    Lot l;
    l.id = st.getColumn(0).getInt64();
    l.uuid = text(st.getColumn(1));
    l.lot_code = text(st.getColumn(2));
    l.plan_json = text(st.getColumn(3));
    l.quantity = st.getColumn(4).getInt64();
    l.supplier = text(st.getColumn(5));
    l.status = text(st.getColumn(6));
    l.session_id = optional_int(st.getColumn(7));
    l.created_utc = text(st.getColumn(8));
    return l;
}

const char* const device_columns = columns::device;

Device read_device(SQLite::Statement& st) {
    Device d;
    d.id = st.getColumn(0).getInt64();
    d.uuid = text(st.getColumn(1));
    d.lot_id = st.getColumn(2).getInt64();
    d.index = st.getColumn(3).getInt64();
    d.readings_json = text(st.getColumn(4));
    d.hfe = optional_double(st.getColumn(5));
    d.hfe_sd = optional_double(st.getColumn(6));
    d.vbe_v = optional_double(st.getColumn(7));
    d.vbe_sd_v = optional_double(st.getColumn(8));
    d.ic_a = optional_double(st.getColumn(9));
    d.ic_sd_a = optional_double(st.getColumn(10));
    d.vce_v = optional_double(st.getColumn(11));
    d.vce_sd_v = optional_double(st.getColumn(12));
    if (!st.getColumn(13).isNull()) d.passed = st.getColumn(13).getInt() != 0;
    d.skipped_reason = text(st.getColumn(14));
    d.replacement_of = optional_int(st.getColumn(15));
    return d;
}

const char* const history_sql =
    "SELECT s.id, s.uuid, b.serial, s.kind, s.status, s.started_utc, s.finished_utc, "
    "s.operator, s.host, s.pid, s.heartbeat_unix_s, s.bench_file, s.software_version, s.notes, "
    "(SELECT count(*) FROM points p WHERE p.session_id = s.id AND p.superseded_by IS NULL), "
    "f.midband_gain_db, f.f_low_hz, f.f_high_hz "
    "FROM boards b JOIN sessions s ON s.board_id = b.id "
    "LEFT JOIN fits f ON f.id = (SELECT id FROM fits WHERE session_id = s.id "
    "ORDER BY id DESC LIMIT 1) "
    "WHERE b.serial = ? "
    "ORDER BY s.started_utc DESC, s.id DESC";

void bind_point_measurement(SQLite::Statement& st, int first, const Point& p) {
    bind_optional(st, first, p.plan_index);
    st.bind(first + 1, p.freq_hz);
    bind_optional(st, first + 2, p.in_amplitude_v);
    bind_optional(st, first + 3, p.in_amplitude_sd_v);
    bind_optional(st, first + 4, p.in_phase_deg);
    bind_optional(st, first + 5, p.in_phase_sd_deg);
    bind_optional(st, first + 6, p.out_amplitude_v);
    bind_optional(st, first + 7, p.out_amplitude_sd_v);
    bind_optional(st, first + 8, p.out_phase_deg);
    bind_optional(st, first + 9, p.out_phase_sd_deg);
    st.bind(first + 10, p.gain_db);
    bind_optional(st, first + 11, p.gain_db_sd);
    bind_optional(st, first + 12, p.phase_deg);
    bind_optional(st, first + 13, p.phase_deg_sd);
    bind_optional(st, first + 14, p.thd_pct);
    st.bind(first + 15, p.flags);
    st.bind(first + 16, p.settings_json);
    st.bind(first + 17, p.taken_utc);
}

void bind_device_readings(SQLite::Statement& st, int first, const Device& d) {
    st.bind(first, d.index);
    st.bind(first + 1, d.readings_json);
    bind_optional(st, first + 2, d.hfe);
    bind_optional(st, first + 3, d.hfe_sd);
    bind_optional(st, first + 4, d.vbe_v);
    bind_optional(st, first + 5, d.vbe_sd_v);
    bind_optional(st, first + 6, d.ic_a);
    bind_optional(st, first + 7, d.ic_sd_a);
    bind_optional(st, first + 8, d.vce_v);
    bind_optional(st, first + 9, d.vce_sd_v);
    if (d.passed)
        st.bind(first + 10, *d.passed ? 1 : 0);
    else
        st.bind(first + 10);
    st.bind(first + 11, d.skipped_reason);
}

}  // namespace sqlite_detail

const char* to_string(SessionKind kind) {
    switch (kind) {
        case SessionKind::sweep: return "sweep";
        case SessionKind::dc: return "dc";
        case SessionKind::match: return "match";
        case SessionKind::lot: return "lot";
        case SessionKind::import: return "import";
    }
    return "sweep";
}

const char* to_string(SessionStatus status) {
    switch (status) {
        case SessionStatus::running: return "running";
        case SessionStatus::complete: return "complete";
        case SessionStatus::interrupted: return "interrupted";
        case SessionStatus::aborted: return "aborted";
    }
    return "running";
}

SessionKind session_kind_from(const std::string& word) {
    for (auto k : {SessionKind::sweep, SessionKind::dc, SessionKind::match, SessionKind::lot,
                   SessionKind::import})
        if (word == to_string(k)) return k;
    throw StoreError(fmt::format("unknown session kind '{}' in the archive", word));
}

SessionStatus session_status_from(const std::string& word) {
    for (auto s : {SessionStatus::running, SessionStatus::complete, SessionStatus::interrupted,
                   SessionStatus::aborted})
        if (word == to_string(s)) return s;
    throw StoreError(fmt::format("unknown session status '{}' in the archive", word));
}

SqliteArchive::SqliteArchive(const std::string& path, const ArchiveOptions& options)
    : impl_(std::make_unique<Impl>()) {
    impl_->path = path;
    impl_->options = options;
    impl_->host = options.host.empty() ? this_host() : options.host;
    impl_->pid = options.pid > 0 ? options.pid : static_cast<std::int64_t>(::getpid());
    impl_->guarded([&] {
        impl_->open();
        impl_->mark_stale();
    });
}

SqliteArchive::~SqliteArchive() = default;

const char* SqliteArchive::history_query() { return history_sql; }

const std::string& SqliteArchive::location() const { return impl_->path; }

int SqliteArchive::schema_version() const { return impl_->version; }

DesignRecord SqliteArchive::put_design(const std::string& design_json, const std::string& origin) {
    const DesignRecord d = canonical_design(design_json, origin);
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        auto& st = impl_->query(
            "INSERT INTO designs(address, name, canonical_json, created_utc) VALUES (?, ?, ?, ?) "
            "ON CONFLICT(address) DO NOTHING");
        st.bind(1, d.address);
        st.bind(2, d.name);
        st.bind(3, d.canonical_json);
        st.bind(4, utc_iso(impl_->now()));
        st.exec();
        txn.commit();
        return *design(d.address);
    });
}

std::optional<DesignRecord> SqliteArchive::design(const std::string& address) {
    return impl_->guarded([&]() -> std::optional<DesignRecord> {
        auto& st = impl_->query(
            "SELECT address, name, canonical_json, created_utc FROM designs WHERE address = ?");
        st.bind(1, address);
        if (!st.executeStep()) return std::nullopt;
        return DesignRecord{text(st.getColumn(0)), text(st.getColumn(1)), text(st.getColumn(2)),
                            text(st.getColumn(3))};
    });
}

Board SqliteArchive::ensure_board(const std::string& serial, const std::string& design_address,
                                  const std::string& notes) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        Board b = impl_->ensure_board_locked(serial, design_address, notes);
        txn.commit();
        return b;
    });
}

std::optional<Board> SqliteArchive::board(const std::string& serial) {
    return impl_->guarded([&] { return impl_->find_board(serial); });
}

std::vector<BoardSummary> SqliteArchive::boards() {
    return impl_->guarded([&] {
        std::vector<BoardSummary> out;
        auto& st = impl_->query(
            "SELECT id, serial, design_address, notes, created_utc FROM boards ORDER BY serial");
        while (st.executeStep()) {
            BoardSummary s;
            s.board = {st.getColumn(0).getInt64(), text(st.getColumn(1)), text(st.getColumn(2)),
                       text(st.getColumn(3)), text(st.getColumn(4))};
            out.push_back(std::move(s));
        }
        for (auto& s : out) {
            auto& count = impl_->query("SELECT count(*) FROM sessions WHERE board_id = ?");
            count.bind(1, s.board.id);
            count.executeStep();
            s.session_count = count.getColumn(0).getInt64();
            auto latest = impl_->summaries(std::string(history_sql) + " LIMIT 1", s.board.serial);
            if (!latest.empty()) s.latest = std::move(latest.front());
        }
        return out;
    });
}

Session SqliteArchive::begin_session(const NewSession& in) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        const std::int64_t id = impl_->insert_session(in);
        txn.commit();
        return impl_->require_session(id);
    });
}

Session SqliteArchive::import_session(const NewSession& in, const std::vector<Point>& points) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        const std::int64_t id = impl_->insert_session(in);
        for (const auto& p : points) impl_->insert_point(id, p);
        auto& st = impl_->query(
            "UPDATE sessions SET status = 'complete', finished_utc = started_utc WHERE id = ?");
        st.bind(1, id);
        st.exec();
        txn.commit();
        return impl_->require_session(id);
    });
}

std::int64_t SqliteArchive::Impl::insert_session(const NewSession& in) {
    const Board b = ensure_board_locked(in.board_serial, in.design_address, {});
    const double now_s = now();
    auto& st = query(
        "INSERT INTO sessions(uuid, board_id, kind, status, started_utc, operator, host, pid, "
        "heartbeat_unix_s, bench_file, software_version, notes) "
        "VALUES (?, ?, ?, 'running', ?, ?, ?, ?, ?, ?, ?, ?)");
    st.bind(1, make_uuid_v4());
    st.bind(2, b.id);
    st.bind(3, to_string(in.kind));
    st.bind(4, utc_iso(now_s));
    st.bind(5, in.operator_name);
    st.bind(6, host);
    st.bind(7, pid);
    st.bind(8, now_s);
    st.bind(9, in.bench_file);
    st.bind(10, software_version());
    st.bind(11, in.notes);
    st.exec();
    const std::int64_t id = db->getLastInsertRowid();
    insert_instruments(id, in.instruments);
    insert_probes(id, in.probes);
    return id;
}

void SqliteArchive::Impl::insert_instruments(std::int64_t session_id,
                                             const std::vector<InstrumentRecord>& list) {
    for (const auto& i : list) {
        auto& ins = query(
            "INSERT INTO instruments(session_id, role, identity, asset, uri, cal_due, "
            "certificate, settings_json) VALUES (?, ?, ?, ?, ?, ?, ?, ?)");
        ins.bind(1, session_id);
        ins.bind(2, i.role);
        ins.bind(3, i.identity);
        ins.bind(4, i.asset);
        ins.bind(5, i.uri);
        ins.bind(6, i.cal_due);
        ins.bind(7, i.certificate);
        ins.bind(8, i.settings_json);
        ins.exec();
    }
}

void SqliteArchive::Impl::insert_probes(std::int64_t session_id,
                                        const std::vector<ProbeRecord>& list) {
    for (const auto& p : list) {
        auto& pr = query(
            "INSERT INTO probes(session_id, name, channel, asset, ratio, cal_due, "
            "certificate) VALUES (?, ?, ?, ?, ?, ?, ?)");
        pr.bind(1, session_id);
        pr.bind(2, p.name);
        pr.bind(3, p.channel);
        pr.bind(4, p.asset);
        pr.bind(5, p.ratio);
        pr.bind(6, p.cal_due);
        pr.bind(7, p.certificate);
        pr.exec();
    }
}

std::int64_t SqliteArchive::Impl::insert_fit(const FitRecord& f) {
    auto& st = query(
        "INSERT INTO fits(uuid, session_id, kind, model, params_json, report_json, "
        "midband_gain_db, f_low_hz, f_high_hz, created_utc) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
    st.bind(1, f.uuid);
    st.bind(2, f.session_id);
    st.bind(3, f.kind);
    st.bind(4, f.model);
    st.bind(5, f.params_json);
    st.bind(6, f.report_json);
    bind_optional(st, 7, f.midband_gain_db);
    bind_optional(st, 8, f.f_low_hz);
    bind_optional(st, 9, f.f_high_hz);
    st.bind(10, f.created_utc);
    st.exec();
    return db->getLastInsertRowid();
}

std::int64_t SqliteArchive::Impl::insert_lot(const Lot& l) {
    auto& st = query(
        "INSERT INTO lots(uuid, lot_code, plan_json, quantity, supplier, status, session_id, "
        "created_utc) VALUES (?, ?, ?, ?, ?, ?, ?, ?)");
    st.bind(1, l.uuid);
    st.bind(2, l.lot_code);
    st.bind(3, l.plan_json);
    st.bind(4, l.quantity);
    st.bind(5, l.supplier);
    st.bind(6, l.status);
    bind_optional(st, 7, l.session_id);
    st.bind(8, l.created_utc);
    st.exec();
    return db->getLastInsertRowid();
}

std::optional<Session> SqliteArchive::session(std::int64_t id) {
    return impl_->guarded([&] { return impl_->find_session(id); });
}

void SqliteArchive::heartbeat(std::int64_t session_id) {
    impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        impl_->beat(session_id);
        txn.commit();
    });
}

void SqliteArchive::finish_session(std::int64_t session_id, SessionStatus status) {
    if (status == SessionStatus::running)
        throw StoreError(fmt::format("archive {}: a session cannot finish as running",
                                     impl_->path));
    impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        auto& st = impl_->query(
            "UPDATE sessions SET status = ?, finished_utc = ?, heartbeat_unix_s = ? WHERE id = ?");
        const double now = impl_->now();
        st.bind(1, to_string(status));
        st.bind(2, utc_iso(now));
        st.bind(3, now);
        st.bind(4, session_id);
        if (st.exec() != 1)
            throw StoreError(fmt::format("archive {}: no session {}", impl_->path, session_id));
        txn.commit();
    });
}

int SqliteArchive::mark_stale_sessions() {
    return impl_->guarded([&] { return impl_->mark_stale(); });
}

ResumeState SqliteArchive::resume_session(std::int64_t session_id) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        const Session s = impl_->require_session(session_id);
        if (s.status == SessionStatus::running &&
            !impl_->is_stale(s.host, s.pid, s.heartbeat_unix_s))
            throw StoreError(fmt::format(
                "archive {}: session {} is still running (pid {} on {})", impl_->path,
                session_id, s.pid, s.host));
        if (s.status == SessionStatus::complete || s.status == SessionStatus::aborted)
            throw StoreError(fmt::format("archive {}: session {} is {}; nothing to resume",
                                         impl_->path, session_id, to_string(s.status)));
        auto& st = impl_->query(
            "UPDATE sessions SET status = 'running', finished_utc = NULL, host = ?, pid = ?, "
            "heartbeat_unix_s = ? WHERE id = ?");
        st.bind(1, impl_->host);
        st.bind(2, impl_->pid);
        st.bind(3, impl_->now());
        st.bind(4, session_id);
        st.exec();
        txn.commit();
        ResumeState state;
        state.session = impl_->require_session(session_id);
        state.plan = impl_->read_plan(session_id);
        state.points = impl_->read_points(session_id, true);
        return state;
    });
}

void SqliteArchive::add_plan_points(std::int64_t session_id, const std::vector<PlanPoint>& plan) {
    impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        impl_->require_running(session_id);
        const std::string now = utc_iso(impl_->now());
        for (const auto& p : plan) {
            auto& st = impl_->query(
                "INSERT INTO plan_points(session_id, plan_index, freq_hz, adaptive, created_utc) "
                "VALUES (?, ?, ?, ?, ?)");
            st.bind(1, session_id);
            st.bind(2, p.index);
            st.bind(3, p.freq_hz);
            st.bind(4, p.adaptive ? 1 : 0);
            st.bind(5, now);
            st.exec();
        }
        txn.commit();
    });
}

std::vector<PlanPoint> SqliteArchive::plan(std::int64_t session_id) {
    return impl_->guarded([&] { return impl_->read_plan(session_id); });
}

Point SqliteArchive::append_point(std::int64_t session_id, const Point& point) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        impl_->require_running(session_id);
        Point p = impl_->insert_point(session_id, point);
        impl_->beat(session_id);
        txn.commit();
        return p;
    });
}

std::vector<Point> SqliteArchive::append_points(std::int64_t session_id,
                                                const std::vector<Point>& points) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        impl_->require_running(session_id);
        std::vector<Point> out;
        out.reserve(points.size());
        for (const auto& p : points) out.push_back(impl_->insert_point(session_id, p));
        impl_->beat(session_id);
        txn.commit();
        return out;
    });
}

std::vector<Point> SqliteArchive::current_points(std::int64_t session_id) {
    return impl_->guarded([&] { return impl_->read_points(session_id, true); });
}

FitRecord SqliteArchive::add_fit(const FitRecord& fit) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        impl_->require_session(fit.session_id);
        FitRecord f = fit;
        f.uuid = make_uuid_v4();
        f.created_utc = utc_iso(impl_->now());
        f.id = impl_->insert_fit(f);
        txn.commit();
        return f;
    });
}

std::vector<FitRecord> SqliteArchive::fits(std::int64_t session_id) {
    return impl_->guarded([&] {
        std::vector<FitRecord> out;
        auto& st = impl_->query(std::string("SELECT ") + fit_columns +
                                " FROM fits WHERE session_id = ? ORDER BY id");
        st.bind(1, session_id);
        while (st.executeStep()) out.push_back(read_fit(st));
        return out;
    });
}

Lot SqliteArchive::add_lot(const Lot& lot) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        Lot l = lot;
        l.uuid = make_uuid_v4();
        l.created_utc = utc_iso(impl_->now());
        l.id = impl_->insert_lot(l);
        txn.commit();
        return l;
    });
}

std::optional<Lot> SqliteArchive::lot(const std::string& lot_code) {
    return impl_->guarded([&]() -> std::optional<Lot> {
        auto& st = impl_->query(std::string("SELECT ") + lot_columns +
                                " FROM lots WHERE lot_code = ?");
        st.bind(1, lot_code);
        if (!st.executeStep()) return std::nullopt;
        return read_lot(st);
    });
}

std::vector<Lot> SqliteArchive::lots() {
    return impl_->guarded([&] {
        std::vector<Lot> out;
        auto& st = impl_->query(std::string("SELECT ") + lot_columns + " FROM lots ORDER BY id");
        while (st.executeStep()) out.push_back(read_lot(st));
        return out;
    });
}

void SqliteArchive::set_lot_status(std::int64_t lot_id, const std::string& status) {
    impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        auto& st = impl_->query("UPDATE lots SET status = ? WHERE id = ?");
        st.bind(1, status);
        st.bind(2, lot_id);
        if (st.exec() != 1)
            throw StoreError(fmt::format("archive {}: no lot {}", impl_->path, lot_id));
        txn.commit();
    });
}

Device SqliteArchive::add_device(const Device& device) {
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        Device d = device;
        d.uuid = make_uuid_v4();
        auto& st = impl_->query(
            "INSERT INTO devices(uuid, lot_id, device_index, readings_json, hfe, hfe_sd, vbe_v, "
            "vbe_sd_v, ic_a, ic_sd_a, vce_v, vce_sd_v, passed, skipped_reason, replacement_of) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
        st.bind(1, d.uuid);
        st.bind(2, d.lot_id);
        bind_device_readings(st, 3, d);
        bind_optional(st, 15, d.replacement_of);
        st.exec();
        d.id = impl_->db->getLastInsertRowid();
        txn.commit();
        return d;
    });
}

std::vector<Device> SqliteArchive::devices(std::int64_t lot_id) {
    return impl_->guarded([&] {
        std::vector<Device> out;
        auto& st = impl_->query(std::string("SELECT ") + device_columns +
                                " FROM devices WHERE lot_id = ? ORDER BY device_index, id");
        st.bind(1, lot_id);
        while (st.executeStep()) out.push_back(read_device(st));
        return out;
    });
}

std::vector<SessionSummary> SqliteArchive::history(const std::string& serial) {
    return impl_->guarded([&] { return impl_->summaries(history_sql, serial); });
}

SessionDetail SqliteArchive::session_detail(std::int64_t session_id) {
    return impl_->guarded([&] {
        SessionDetail d;
        d.session = impl_->require_session(session_id);
        d.board = impl_->find_board(d.session.board_serial);
        d.instruments = impl_->read_instruments(session_id);
        d.probes = impl_->read_probes(session_id);
        d.plan = impl_->read_plan(session_id);
        d.points = impl_->read_points(session_id, false);
        d.fits = fits(session_id);
        return d;
    });
}

}  // namespace ampbench::store
