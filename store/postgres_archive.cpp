// PostgresArchive: the archive on a PostgreSQL server through libpqxx. Every server failure
// becomes a StoreError naming the URL; all SQL is fixed text run as prepared statements with
// bound parameters. Behaviour follows SqliteArchive method by method (same error texts); what
// a server adds is session ownership by advisory lock.
#include "store/postgres_archive.h"
#include "store/sync_rules.h"

#include <unistd.h>

#include <algorithm>
#include <array>
#include <chrono>
#include <climits>
#include <cmath>
#include <cstdlib>
#include <map>
#include <set>
#include <unordered_map>

#include <fmt/format.h>
#include <pqxx/pqxx>

#include "core/errors.h"
#include "core/version.h"
#include "store/archive_util.h"
#include "store/schema.h"
#include "store/uuid.h"

namespace ampbench::store {

namespace {

// Advisory-lock namespaces (the first key of the two-key form): "ampb" for a session's owner,
// "ampm" for the migration of a database.
constexpr std::int64_t session_lock_key = 0x616d7062;
constexpr std::int64_t migration_lock_key = 0x616d706d;

// The tables migration 1 creates; finding some of them without schema_version means the
// database belongs to another program.
constexpr const char* our_tables =
    "ARRAY['designs', 'boards', 'sessions', 'instruments', 'probes', 'plan_points', 'points', "
    "'fits', 'lots', 'devices']";

// --- Parameters: every value travels as text (or NULL) in its own slot. ---
using Param = std::optional<std::string>;

Param param(const std::string& v) { return v; }
Param param(const char* v) { return std::string(v); }
Param param(std::int64_t v) { return std::to_string(v); }
Param param(int v) { return std::to_string(v); }
// Shortest text that reads back as the same double; NaN and infinities become NULL, as SQLite
// stores them.
Param param(double v) {
    if (!std::isfinite(v)) return std::nullopt;
    return fmt::format("{}", v);
}
Param param(bool v) { return std::string(v ? "true" : "false"); }
template <class T>
Param param(const std::optional<T>& v) {
    if (!v) return std::nullopt;
    return param(*v);
}
// Empty text stored as NULL (a board without a known design).
Param text_or_null(const std::string& v) {
    if (v.empty()) return std::nullopt;
    return v;
}

// --- Reading a row column by column. ---
class Cols {
public:
    explicit Cols(const pqxx::row& row, pqxx::row::size_type first = 0) : row_(row), at_(first) {}
    bool null() const { return row_[at_].is_null(); }
    std::string text() {
        const auto& f = row_[at_++];
        return f.is_null() ? std::string() : std::string(f.c_str(), f.size());
    }
    std::int64_t i64() {
        const auto& f = row_[at_++];
        return f.is_null() ? 0 : std::strtoll(f.c_str(), nullptr, 10);
    }
    double f64() {
        const auto& f = row_[at_++];
        return f.is_null() ? 0.0 : std::strtod(f.c_str(), nullptr);
    }
    std::optional<double> opt_f64() {
        if (null()) return ++at_, std::nullopt;
        return f64();
    }
    std::optional<std::int64_t> opt_i64() {
        if (null()) return ++at_, std::nullopt;
        return i64();
    }
    std::optional<bool> opt_bool() {
        if (null()) return ++at_, std::nullopt;
        return boolean();
    }
    bool boolean() {
        const auto& f = row_[at_++];
        return !f.is_null() && (f.c_str()[0] == 't' || f.c_str()[0] == '1');
    }

private:
    pqxx::row row_;  // a copy: r[0] is a temporary
    pqxx::row::size_type at_;
};


Session session_from(Cols& c) {
    Session s;
    s.id = c.i64();
    s.uuid = c.text();
    s.board_serial = c.text();
    s.kind = session_kind_from(c.text());
    s.status = session_status_from(c.text());
    s.started_utc = c.text();
    s.finished_utc = c.text();
    s.operator_name = c.text();
    s.host = c.text();
    s.pid = c.i64();
    s.heartbeat_unix_s = c.f64();
    s.bench_file = c.text();
    s.software_version = c.text();
    s.notes = c.text();
    return s;
}


Point point_from(const pqxx::row& row) {
    Cols c(row);
    Point p;
    p.id = c.i64();
    p.uuid = c.text();
    p.sequence = c.i64();
    p.plan_index = c.opt_i64();
    p.freq_hz = c.f64();
    for (auto* field : {&p.in_amplitude_v, &p.in_amplitude_sd_v, &p.in_phase_deg,
                        &p.in_phase_sd_deg, &p.out_amplitude_v, &p.out_amplitude_sd_v,
                        &p.out_phase_deg, &p.out_phase_sd_deg})
        *field = c.opt_f64();
    p.gain_db = c.f64();
    for (auto* field : {&p.gain_db_sd, &p.phase_deg, &p.phase_deg_sd, &p.thd_pct})
        *field = c.opt_f64();
    p.flags = c.text();
    p.settings_json = c.text();
    p.taken_utc = c.text();
    p.superseded_by = c.opt_i64();
    return p;
}


FitRecord fit_from(const pqxx::row& row) {
    Cols c(row);
    FitRecord f;
    f.id = c.i64();
    f.uuid = c.text();
    f.session_id = c.i64();
    f.kind = c.text();
    f.model = c.text();
    f.params_json = c.text();
    f.report_json = c.text();
    f.midband_gain_db = c.opt_f64();
    f.f_low_hz = c.opt_f64();
    f.f_high_hz = c.opt_f64();
    f.created_utc = c.text();
    return f;
}


Lot lot_from(const pqxx::row& row) {
    Cols c(row);
    Lot l;
    l.id = c.i64();
    l.uuid = c.text();
    l.lot_code = c.text();
    l.plan_json = c.text();
    l.quantity = c.i64();
    l.supplier = c.text();
    l.status = c.text();
    l.session_id = c.opt_i64();
    l.created_utc = c.text();
    return l;
}


Device device_from(const pqxx::row& row) {
    Cols c(row);
    Device d;
    d.id = c.i64();
    d.uuid = c.text();
    d.lot_id = c.i64();
    d.index = c.i64();
    d.readings_json = c.text();
    for (auto* field : {&d.hfe, &d.hfe_sd, &d.vbe_v, &d.vbe_sd_v, &d.ic_a, &d.ic_sd_a, &d.vce_v,
                        &d.vce_sd_v})
        *field = c.opt_f64();
    d.passed = c.opt_bool();
    d.skipped_reason = c.text();
    d.replacement_of = c.opt_i64();
    return d;
}

const char* const pg_history_sql =
    "SELECT s.id, s.uuid, b.serial, s.kind, s.status, s.started_utc, s.finished_utc, "
    "s.operator, s.host, s.pid, s.heartbeat_unix_s, s.bench_file, s.software_version, s.notes, "
    "(SELECT count(*) FROM points p WHERE p.session_id = s.id AND p.superseded_by IS NULL), "
    "f.midband_gain_db, f.f_low_hz, f.f_high_hz "
    "FROM boards b JOIN sessions s ON s.board_id = b.id "
    "LEFT JOIN fits f ON f.id = (SELECT id FROM fits WHERE session_id = s.id "
    "ORDER BY id DESC LIMIT 1) "
    "WHERE b.serial = $1 "
    "ORDER BY s.started_utc DESC, s.id DESC";

// One line from a server message: "ERROR:  x\nDETAIL:  y\n" -> "x; DETAIL: y".
std::string one_line(std::string text) {
    if (text.rfind("ERROR:", 0) == 0) text = text.substr(6);
    std::string out;
    bool space = false;
    for (char ch : text) {
        if (ch == '\n' || ch == '\r') {
            space = true;
            continue;
        }
        if (space && !out.empty()) out += "; ";
        space = false;
        out += ch;
    }
    const auto start = out.find_first_not_of(' ');
    return start == std::string::npos ? std::string() : out.substr(start);
}

// The URL's user, host and database for messages, and whether it carries a password
// (userinfo "user:secret@" or a "password=" query parameter).
struct UrlParts {
    bool has_password = false;
    std::string user;
};

UrlParts inspect_url(const std::string& url) {
    UrlParts parts;
    const auto scheme_end = url.find("://");
    const std::string rest = scheme_end == std::string::npos ? url : url.substr(scheme_end + 3);
    const auto authority_end = rest.find_first_of("/?");
    const std::string authority = rest.substr(0, authority_end);
    if (const auto at = authority.rfind('@'); at != std::string::npos) {
        const std::string userinfo = authority.substr(0, at);
        const auto colon = userinfo.find(':');
        parts.user = userinfo.substr(0, colon);
        if (colon != std::string::npos) parts.has_password = true;
    }
    if (const auto query = rest.find('?'); query != std::string::npos) {
        std::string q = "&" + rest.substr(query + 1);
        if (q.find("&password=") != std::string::npos) parts.has_password = true;
    }
    return parts;
}

}  // namespace

bool is_postgres_url(const std::string& location) {
    return location.rfind("postgresql://", 0) == 0 || location.rfind("postgres://", 0) == 0;
}

struct PostgresArchive::Impl {
    std::string url;
    ArchiveOptions options;
    std::string host;
    std::int64_t pid = 0;
    int version = 0;
    std::unique_ptr<pqxx::connection> conn;
    std::unordered_map<std::string, std::string> prepared;  // SQL -> statement name
    std::set<std::int64_t> held;  // sessions whose advisory lock this connection holds

    double now() const {
        if (options.clock_unix_s) return options.clock_unix_s();
        using namespace std::chrono;
        return duration<double>(system_clock::now().time_since_epoch()).count();
    }

    // Runs `sql` (prepared once per connection) with its parameters bound.
    pqxx::result run_values(pqxx::transaction_base& t, const std::string& sql,
                            const std::vector<Param>& values) {
        auto& name = prepared[sql];
        if (name.empty()) {
            name = "q" + std::to_string(prepared.size());
            conn->prepare(name, sql);
        }
        std::vector<const char*> pointers;
        pointers.reserve(values.size());
        for (const auto& v : values) pointers.push_back(v ? v->c_str() : nullptr);
        return t.exec_prepared(name, pqxx::prepare::make_dynamic_params(pointers));
    }

    template <class... A>
    pqxx::result run(pqxx::transaction_base& t, const std::string& sql, const A&... args) {
        return run_values(t, sql, std::vector<Param>{param(args)...});
    }

    std::string who() const {
        const std::string user = inspect_url(url).user;
        return user.empty() ? std::string("the connecting user") : "user " + user;
    }

    template <class F>
    auto guarded(F&& f) -> decltype(f()) {
        try {
            return f();
        } catch (const Error&) {
            throw;
        } catch (const pqxx::insufficient_privilege& e) {
            // libpqxx 6.4 tells the SQLSTATE class by the exception type (sqlstate() is empty).
            throw StoreError(fmt::format(
                "archive {}: {} lacks a privilege the archive needs ({}); see README, "
                "\"Shared archive on PostgreSQL\"",
                url, who(), one_line(e.what())));
        } catch (const pqxx::transaction_rollback& e) {
            throw StoreError(fmt::format("archive {}: conflict with another station ({})", url,
                                         one_line(e.what())));
        } catch (const pqxx::sql_error& e) {
            throw StoreError(fmt::format("archive {}: {}", url, one_line(e.what())));
        } catch (const pqxx::broken_connection& e) {
            throw StoreError(fmt::format("archive {}: no connection to the server ({})", url,
                                         one_line(e.what())));
        } catch (const std::exception& e) {
            throw StoreError(fmt::format("archive {}: {}", url, one_line(e.what())));
        }
    }

    void connect() {
        const UrlParts parts = inspect_url(url);
        if (parts.has_password)
            throw StoreError(
                "archive URL: a password in the URL is refused (it would show in process lists "
                "and logs); give it in PGPASSWORD or ~/.pgpass");
        try {
            conn = std::make_unique<pqxx::connection>(url);
        } catch (const pqxx::broken_connection& e) {
            throw StoreError(fmt::format("archive {}: cannot connect ({})", url,
                                         one_line(e.what())));
        } catch (const std::exception& e) {
            throw StoreError(fmt::format("archive {}: cannot connect ({})", url,
                                         one_line(e.what())));
        }
        conn->set_client_encoding("UTF8");
        pqxx::nontransaction t(*conn);
        t.exec("SET application_name = 'ampbench'");
        // Prepared statements are planned for their parameters each time: a plan cached while
        // a table was nearly empty (a sequential scan) would otherwise stay as it grows.
        t.exec("SET plan_cache_mode = force_custom_plan");
    }

    // The archive's version here: 0 when none of our tables exist.
    int read_version(pqxx::transaction_base& t) {
        const auto r = t.exec(std::string("SELECT current_schema(), to_regclass('schema_version') "
                                          "IS NOT NULL, (SELECT count(*) FROM pg_tables WHERE "
                                          "schemaname = current_schema() AND tablename = ANY(") +
                              our_tables + "))");
        if (r[0][0].is_null())
            throw StoreError(fmt::format(
                "archive {}: no schema to keep the archive in (the search_path names none that "
                "exists)",
                url));
        Cols c(r[0], 1);
        const bool has_version = c.boolean();
        const std::int64_t ours = c.i64();
        if (!has_version) {
            if (ours > 0)
                throw StoreError(fmt::format(
                    "archive {}: not an ampbench archive (ampbench's table names exist without "
                    "schema_version)",
                    url));
            return 0;
        }
        return static_cast<int>(
            Cols(t.exec("SELECT coalesce(max(version), 0) FROM schema_version")[0]).i64());
    }

    void refuse_newer(int found) const {
        if (found > current_schema_version())
            throw StoreError(fmt::format(
                "archive {}: written by a newer ampbench (schema version {}; this build "
                "reads up to {}); upgrade ampbench to open it",
                url, found, current_schema_version()));
    }

    [[noreturn]] void refuse_create(pqxx::transaction_base& t, int found) {
        const auto r = t.exec("SELECT current_user, current_schema()");
        const std::string user = Cols(r[0]).text();
        const std::string schema = Cols(r[0], 1).text();
        if (found == 0)
            throw StoreError(fmt::format(
                "archive {} has no ampbench tables and user {} may not create them (no CREATE "
                "on schema {}); ask the database owner to run ampbench once with a role that "
                "can, see README, \"Shared archive on PostgreSQL\"",
                url, user, schema));
        throw StoreError(fmt::format(
            "archive {} is at schema version {} and user {} may not migrate it to {} (no "
            "CREATE on schema {}); ask the database owner to run ampbench once with a role "
            "that can, see README, \"Shared archive on PostgreSQL\"",
            url, found, user, current_schema_version(), schema));
    }

    void migrate() {
        {
            pqxx::read_transaction t(*conn);
            version = read_version(t);
        }
        refuse_newer(version);
        if (version == current_schema_version()) return;
        pqxx::work t(*conn);
        // One station migrates; the others wait here and then find the work done.
        run(t, "SELECT pg_advisory_xact_lock($1::int, 0)", migration_lock_key);
        version = read_version(t);
        refuse_newer(version);
        if (version == current_schema_version()) return;
        if (!Cols(t.exec("SELECT has_schema_privilege(current_schema(), 'CREATE')")[0]).boolean())
            refuse_create(t, version);
        try {
            for (const auto& m : migrations()) {
                if (m.version <= version) continue;
                t.exec(m.postgres);
                run(t, "INSERT INTO schema_version(version, applied_utc) VALUES ($1, $2)",
                    m.version, utc_iso(now()));
            }
        } catch (const pqxx::insufficient_privilege&) {
            t.abort();
            pqxx::read_transaction again(*conn);
            refuse_create(again, version);
        }
        t.commit();
        version = current_schema_version();
    }

    bool is_stale(const std::string& session_host, std::int64_t session_pid,
                  double heartbeat_s) const {
        return stale_session(host, session_host, session_pid, heartbeat_s, now(),
                             options.stale_after_s);
    }

    // Whether a connection other than this one holds the session's advisory lock.
    bool held_elsewhere(pqxx::transaction_base& t, std::int64_t session_id) {
        return Cols(run(t,
                        "SELECT EXISTS (SELECT 1 FROM pg_locks WHERE locktype = 'advisory' "
                        "AND database = (SELECT oid FROM pg_database WHERE datname = "
                        "current_database()) AND classid = $1::bigint::oid AND objid = "
                        "$2::bigint::oid AND objsubid = 2 AND granted AND pid <> "
                        "pg_backend_pid())",
                        session_lock_key, session_id)[0])
            .boolean();
    }

    void check_lockable(std::int64_t session_id) const {
        if (session_id <= 0 || session_id > INT_MAX)
            throw StoreError(fmt::format("archive {}: session id {} is out of range", url,
                                         session_id));
    }

    bool try_lock(std::int64_t session_id) {
        check_lockable(session_id);
        pqxx::nontransaction t(*conn);
        return Cols(run(t, "SELECT pg_try_advisory_lock($1::int, $2::int)", session_lock_key,
                        session_id)[0])
            .boolean();
    }

    void unlock(std::int64_t session_id) {
        if (!held.erase(session_id)) return;
        pqxx::nontransaction t(*conn);
        run(t, "SELECT pg_advisory_unlock($1::int, $2::int)", session_lock_key, session_id);
    }

    int mark_stale() {
        struct Candidate {
            std::int64_t id;
            double heartbeat_s;
        };
        auto find = [&](pqxx::transaction_base& t) {
            std::vector<Candidate> found;
            const auto r = run(t,
                               "SELECT id, host, pid, heartbeat_unix_s FROM sessions "
                               "WHERE status = 'running' AND heartbeat_unix_s < $1",
                               now() - options.stale_after_s);
            for (const auto& row : r) {
                Cols c(row);
                const std::int64_t id = c.i64();
                const std::string session_host = c.text();
                const std::int64_t session_pid = c.i64();
                const double beat = c.f64();
                // A live connection holding the session's lock owns it, whatever its heartbeat.
                if (is_stale(session_host, session_pid, beat) && !held_elsewhere(t, id))
                    found.push_back({id, beat});
            }
            return found;
        };
        {
            pqxx::read_transaction t(*conn);
            if (find(t).empty()) return 0;
        }
        pqxx::work t(*conn);
        int marked = 0;
        for (const auto& c : find(t))
            marked += static_cast<int>(
                run(t,
                    "UPDATE sessions SET status = 'interrupted' "
                    "WHERE id = $1 AND status = 'running' AND heartbeat_unix_s = $2",
                    c.id, c.heartbeat_s)
                    .affected_rows());
        t.commit();
        return marked;
    }

    std::optional<Board> find_board(pqxx::transaction_base& t, const std::string& serial) {
        const auto r = run(t,
                           "SELECT id, serial, design_address, notes, created_utc FROM boards "
                           "WHERE serial = $1",
                           serial);
        if (r.empty()) return std::nullopt;
        Cols c(r[0]);
        Board b;
        b.id = c.i64();
        b.serial = c.text();
        b.design_address = c.text();
        b.notes = c.text();
        b.created_utc = c.text();
        return b;
    }

    Board ensure_board_in(pqxx::transaction_base& t, const std::string& serial,
                          const std::string& design_address, const std::string& notes) {
        if (serial.empty()) throw StoreError(fmt::format("archive {}: empty board serial", url));
        if (!design_address.empty() &&
            run(t, "SELECT 1 FROM designs WHERE address = $1", design_address).empty())
            throw StoreError(fmt::format("archive {}: design {} is not in the archive", url,
                                         design_address));
        const auto inserted = run(t,
                                  "INSERT INTO boards(serial, design_address, notes, created_utc) "
                                  "VALUES ($1, $2, $3, $4) ON CONFLICT (serial) DO NOTHING",
                                  serial, text_or_null(design_address), notes, utc_iso(now()));
        if (inserted.affected_rows() == 0) {
            if (!design_address.empty())
                run(t, "UPDATE boards SET design_address = $1 WHERE serial = $2", design_address,
                    serial);
            if (!notes.empty())
                run(t, "UPDATE boards SET notes = $1 WHERE serial = $2", notes, serial);
        }
        return *find_board(t, serial);
    }

    std::optional<Session> find_session(pqxx::transaction_base& t, std::int64_t id) {
        const auto r = run(t,
                           std::string("SELECT ") + columns::session +
                               " FROM sessions s JOIN boards b ON b.id = s.board_id "
                               "WHERE s.id = $1",
                           id);
        if (r.empty()) return std::nullopt;
        Cols c(r[0]);
        return session_from(c);
    }

    Session require_session(pqxx::transaction_base& t, std::int64_t id) {
        auto s = find_session(t, id);
        if (!s) throw StoreError(fmt::format("archive {}: no session {}", url, id));
        return *s;
    }

    std::vector<Session> sessions_where(pqxx::transaction_base& t, const std::string& where,
                                        const std::vector<Param>& values) {
        std::vector<Session> out;
        for (const auto& row : run_values(t,
                                          std::string("SELECT ") + columns::session +
                                              " FROM sessions s JOIN boards b ON b.id = "
                                              "s.board_id " +
                                              where,
                                          values)) {
            Cols c(row);
            out.push_back(session_from(c));
        }
        return out;
    }

    std::vector<PlanPoint> read_plan(pqxx::transaction_base& t, std::int64_t session_id) {
        std::vector<PlanPoint> plan;
        for (const auto& row : run(t,
                                   "SELECT plan_index, freq_hz, adaptive FROM plan_points "
                                   "WHERE session_id = $1 ORDER BY plan_index",
                                   session_id)) {
            Cols c(row);
            PlanPoint p;
            p.index = c.i64();
            p.freq_hz = c.f64();
            p.adaptive = c.boolean();
            plan.push_back(p);
        }
        return plan;
    }

    std::vector<Point> read_points(pqxx::transaction_base& t, std::int64_t session_id,
                                   bool current_only) {
        std::vector<Point> points;
        const std::string sql = std::string("SELECT ") + columns::point +
                                " FROM points WHERE session_id = $1" +
                                (current_only ? " AND superseded_by IS NULL" : "") +
                                " ORDER BY sequence";
        for (const auto& row : run(t, sql, session_id)) points.push_back(point_from(row));
        return points;
    }

    std::vector<FitRecord> read_fits(pqxx::transaction_base& t, std::int64_t session_id) {
        std::vector<FitRecord> out;
        for (const auto& row : run(t,
                                   std::string("SELECT ") + columns::fit +
                                       " FROM fits WHERE session_id = $1 ORDER BY id",
                                   session_id))
            out.push_back(fit_from(row));
        return out;
    }

    std::vector<InstrumentRecord> read_instruments(pqxx::transaction_base& t,
                                                   std::int64_t session_id) {
        std::vector<InstrumentRecord> out;
        for (const auto& row : run(t,
                                   "SELECT role, identity, asset, uri, cal_due, certificate, "
                                   "settings_json FROM instruments WHERE session_id = $1 "
                                   "ORDER BY id",
                                   session_id)) {
            Cols c(row);
            InstrumentRecord i;
            for (auto* field : {&i.role, &i.identity, &i.asset, &i.uri, &i.cal_due,
                                &i.certificate, &i.settings_json})
                *field = c.text();
            out.push_back(std::move(i));
        }
        return out;
    }

    std::vector<ProbeRecord> read_probes(pqxx::transaction_base& t, std::int64_t session_id) {
        std::vector<ProbeRecord> out;
        for (const auto& row : run(t,
                                   "SELECT name, channel, asset, ratio, cal_due, certificate "
                                   "FROM probes WHERE session_id = $1 ORDER BY id",
                                   session_id)) {
            Cols c(row);
            ProbeRecord p;
            p.name = c.text();
            p.channel = c.text();
            p.asset = c.text();
            p.ratio = c.f64();
            p.cal_due = c.text();
            p.certificate = c.text();
            out.push_back(std::move(p));
        }
        return out;
    }

    // Inside a write transaction: locks the session row and checks that it is running.
    void require_running(pqxx::transaction_base& t, std::int64_t session_id) {
        const auto r = run(t, "SELECT status FROM sessions WHERE id = $1 FOR UPDATE", session_id);
        if (r.empty()) throw StoreError(fmt::format("archive {}: no session {}", url, session_id));
        const std::string status = Cols(r[0]).text();
        if (status != "running")
            throw StoreError(fmt::format(
                "archive {}: session {} is {}; resume it before adding readings", url,
                session_id, status));
    }

    std::int64_t next_id(pqxx::transaction_base& t, const char* table) {
        return Cols(run(t, "SELECT nextval(pg_get_serial_sequence($1, 'id'))", table)[0]).i64();
    }

    // Inside a write transaction: one reading with its id, UUID and sequence given.
    void write_point(pqxx::transaction_base& t, std::int64_t session_id, const Point& p) {
        run(t,
            "INSERT INTO points(id, uuid, session_id, sequence, plan_index, freq_hz, "
            "in_amplitude_v, in_amplitude_sd_v, in_phase_deg, in_phase_sd_deg, "
            "out_amplitude_v, out_amplitude_sd_v, out_phase_deg, out_phase_sd_deg, gain_db, "
            "gain_db_sd, phase_deg, phase_deg_sd, thd_pct, flags, settings_json, taken_utc, "
            "superseded_by) VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, "
            "$14, $15, $16, $17, $18, $19, $20, $21, $22, $23)",
            p.id, p.uuid, session_id, p.sequence, p.plan_index, p.freq_hz, p.in_amplitude_v,
            p.in_amplitude_sd_v, p.in_phase_deg, p.in_phase_sd_deg, p.out_amplitude_v,
            p.out_amplitude_sd_v, p.out_phase_deg, p.out_phase_sd_deg, p.gain_db, p.gain_db_sd,
            p.phase_deg, p.phase_deg_sd, p.thd_pct, p.flags, p.settings_json, p.taken_utc,
            p.superseded_by);
    }

    std::int64_t next_sequence(pqxx::transaction_base& t, std::int64_t session_id) {
        return Cols(run(t,
                        "SELECT coalesce(max(sequence), 0) + 1 FROM points WHERE session_id = $1",
                        session_id)[0])
            .i64();
    }

    void require_planned(pqxx::transaction_base& t, std::int64_t session_id,
                         std::int64_t plan_index) {
        if (run(t, "SELECT 1 FROM plan_points WHERE session_id = $1 AND plan_index = $2",
                session_id, plan_index)
                .empty())
            throw StoreError(fmt::format("archive {}: session {} has no planned point {}", url,
                                         session_id, plan_index));
    }

    Point insert_point(pqxx::transaction_base& t, std::int64_t session_id, const Point& in) {
        if (!std::isfinite(in.freq_hz) || !std::isfinite(in.gain_db))
            throw StoreError(fmt::format(
                "archive {}: a reading needs a finite freq_hz and gain_db (got {} Hz, {} dB)",
                url, in.freq_hz, in.gain_db));
        Point p = in;
        p.superseded_by.reset();
        p.uuid = make_uuid_v4();
        if (p.taken_utc.empty()) p.taken_utc = utc_iso(now());
        p.sequence = next_sequence(t, session_id);
        p.id = next_id(t, "points");
        if (p.plan_index) {
            require_planned(t, session_id, *p.plan_index);
            // A retake: the earlier reading stays, marked as replaced by this one (the foreign
            // key is checked at commit, when this row exists).
            run(t,
                "UPDATE points SET superseded_by = $1 "
                "WHERE session_id = $2 AND plan_index = $3 AND superseded_by IS NULL",
                p.id, session_id, *p.plan_index);
        }
        write_point(t, session_id, p);
        return p;
    }

    void beat(pqxx::transaction_base& t, std::int64_t session_id) {
        run(t, "UPDATE sessions SET heartbeat_unix_s = $1 WHERE id = $2", now(), session_id);
    }

    void write_instruments(pqxx::transaction_base& t, std::int64_t id,
                           const std::vector<InstrumentRecord>& instruments) {
        for (const auto& i : instruments)
            run(t,
                "INSERT INTO instruments(session_id, role, identity, asset, uri, cal_due, "
                "certificate, settings_json) VALUES ($1, $2, $3, $4, $5, $6, $7, $8)",
                id, i.role, i.identity, i.asset, i.uri, i.cal_due, i.certificate,
                i.settings_json);
    }

    void write_probes(pqxx::transaction_base& t, std::int64_t id,
                      const std::vector<ProbeRecord>& probes) {
        for (const auto& p : probes)
            run(t,
                "INSERT INTO probes(session_id, name, channel, asset, ratio, cal_due, "
                "certificate) VALUES ($1, $2, $3, $4, $5, $6, $7)",
                id, p.name, p.channel, p.asset, p.ratio, p.cal_due, p.certificate);
    }

    std::int64_t insert_session(pqxx::transaction_base& t, const NewSession& in) {
        const Board b = ensure_board_in(t, in.board_serial, in.design_address, {});
        const double now_s = now();
        const auto r = run(t,
                           "INSERT INTO sessions(uuid, board_id, kind, status, started_utc, "
                           "operator, host, pid, heartbeat_unix_s, bench_file, software_version, "
                           "notes) VALUES ($1, $2, $3, 'running', $4, $5, $6, $7, $8, $9, $10, "
                           "$11) RETURNING id",
                           make_uuid_v4(), b.id, to_string(in.kind), utc_iso(now_s),
                           in.operator_name, host, pid, now_s, in.bench_file, software_version(),
                           in.notes);
        const std::int64_t id = Cols(r[0]).i64();
        write_instruments(t, id, in.instruments);
        write_probes(t, id, in.probes);
        return id;
    }

    std::vector<SessionSummary> summaries(pqxx::transaction_base& t, const std::string& sql,
                                          const std::string& serial) {
        std::vector<SessionSummary> out;
        for (const auto& row : run(t, sql, serial)) {
            Cols c(row);
            SessionSummary s;
            s.session = session_from(c);
            s.point_count = c.i64();
            s.midband_gain_db = c.opt_f64();
            s.f_low_hz = c.opt_f64();
            s.f_high_hz = c.opt_f64();
            out.push_back(std::move(s));
        }
        for (auto& s : out) s.instruments = read_instruments(t, s.session.id);
        return out;
    }

    std::string held_message(const Session& s) const {
        return fmt::format(
            "archive {}: session {} is held by station {} (pid {}) since {}, last heartbeat {}; "
            "it can be resumed once that process has stopped",
            url, s.id, s.host.empty() ? std::string("unknown") : s.host, s.pid, s.started_utc,
            utc_iso(s.heartbeat_unix_s));
    }

    CopyCounts copy_session(pqxx::transaction_base& t, const SessionDetail& d);
    CopyCounts copy_lot(pqxx::transaction_base& t, const Lot& lot,
                        const std::string& session_uuid, const std::vector<Device>& devices);
};

PostgresArchive::PostgresArchive(const std::string& url, const ArchiveOptions& options)
    : impl_(std::make_unique<Impl>()) {
    impl_->url = url;
    impl_->options = options;
    impl_->host = options.host.empty() ? this_host() : options.host;
    impl_->pid = options.pid > 0 ? options.pid : static_cast<std::int64_t>(::getpid());
    impl_->guarded([&] {
        impl_->connect();
        impl_->migrate();
        impl_->mark_stale();
    });
}

PostgresArchive::~PostgresArchive() = default;  // closing the connection frees its locks

const char* PostgresArchive::history_query() { return pg_history_sql; }

const std::string& PostgresArchive::location() const { return impl_->url; }

int PostgresArchive::schema_version() const { return impl_->version; }

DesignRecord PostgresArchive::put_design(const std::string& design_json,
                                         const std::string& origin) {
    const DesignRecord d = canonical_design(design_json, origin);
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        impl_->run(t,
                   "INSERT INTO designs(address, name, canonical_json, created_utc) "
                   "VALUES ($1, $2, $3, $4) ON CONFLICT (address) DO NOTHING",
                   d.address, d.name, d.canonical_json, utc_iso(impl_->now()));
        t.commit();
        return *design(d.address);
    });
}

std::optional<DesignRecord> PostgresArchive::design(const std::string& address) {
    return impl_->guarded([&]() -> std::optional<DesignRecord> {
        pqxx::read_transaction t(*impl_->conn);
        const auto r = impl_->run(t,
                                  "SELECT address, name, canonical_json, created_utc FROM "
                                  "designs WHERE address = $1",
                                  address);
        if (r.empty()) return std::nullopt;
        Cols c(r[0]);
        DesignRecord d;
        d.address = c.text();
        d.name = c.text();
        d.canonical_json = c.text();
        d.created_utc = c.text();
        return d;
    });
}

Board PostgresArchive::ensure_board(const std::string& serial, const std::string& design_address,
                                    const std::string& notes) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        Board b = impl_->ensure_board_in(t, serial, design_address, notes);
        t.commit();
        return b;
    });
}

std::optional<Board> PostgresArchive::board(const std::string& serial) {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        return impl_->find_board(t, serial);
    });
}

std::vector<BoardSummary> PostgresArchive::boards() {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        std::vector<BoardSummary> out;
        for (const auto& row : impl_->run(t,
                                          "SELECT b.id, b.serial, b.design_address, b.notes, "
                                          "b.created_utc, (SELECT count(*) FROM sessions s "
                                          "WHERE s.board_id = b.id) FROM boards b "
                                          "ORDER BY b.serial")) {
            Cols c(row);
            BoardSummary s;
            s.board.id = c.i64();
            s.board.serial = c.text();
            s.board.design_address = c.text();
            s.board.notes = c.text();
            s.board.created_utc = c.text();
            s.session_count = c.i64();
            out.push_back(std::move(s));
        }
        for (auto& s : out) {
            auto latest =
                impl_->summaries(t, std::string(pg_history_sql) + " LIMIT 1", s.board.serial);
            if (!latest.empty()) s.latest = std::move(latest.front());
        }
        return out;
    });
}

Session PostgresArchive::begin_session(const NewSession& in) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        const std::int64_t id = impl_->insert_session(t, in);
        impl_->check_lockable(id);
        // Taken before the row is visible to anyone; a session-level lock outlives the commit.
        impl_->run(t, "SELECT pg_advisory_lock($1::int, $2::int)", session_lock_key, id);
        impl_->held.insert(id);
        try {
            t.commit();
        } catch (...) {
            impl_->unlock(id);
            throw;
        }
        pqxx::read_transaction r(*impl_->conn);
        return impl_->require_session(r, id);
    });
}

Session PostgresArchive::import_session(const NewSession& in, const std::vector<Point>& points) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        const std::int64_t id = impl_->insert_session(t, in);
        for (const auto& p : points) impl_->insert_point(t, id, p);
        impl_->run(t,
                   "UPDATE sessions SET status = 'complete', finished_utc = started_utc "
                   "WHERE id = $1",
                   id);
        Session s = impl_->require_session(t, id);
        t.commit();
        return s;
    });
}

std::optional<Session> PostgresArchive::session(std::int64_t id) {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        return impl_->find_session(t, id);
    });
}

void PostgresArchive::heartbeat(std::int64_t session_id) {
    impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        impl_->beat(t, session_id);
        t.commit();
    });
}

void PostgresArchive::finish_session(std::int64_t session_id, SessionStatus status) {
    if (status == SessionStatus::running)
        throw StoreError(fmt::format("archive {}: a session cannot finish as running",
                                     impl_->url));
    impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        const double now = impl_->now();
        const auto r = impl_->run(t,
                                  "UPDATE sessions SET status = $1, finished_utc = $2, "
                                  "heartbeat_unix_s = $3 WHERE id = $4",
                                  to_string(status), utc_iso(now), now, session_id);
        if (r.affected_rows() != 1)
            throw StoreError(fmt::format("archive {}: no session {}", impl_->url, session_id));
        t.commit();
        impl_->unlock(session_id);
    });
}

int PostgresArchive::mark_stale_sessions() {
    return impl_->guarded([&] { return impl_->mark_stale(); });
}

ResumeState PostgresArchive::resume_session(std::int64_t session_id) {
    return impl_->guarded([&] {
        const bool had = impl_->held.count(session_id) > 0;
        if (!had) {
            {
                pqxx::read_transaction t(*impl_->conn);
                impl_->require_session(t, session_id);
            }
            if (!impl_->try_lock(session_id)) {
                pqxx::read_transaction t(*impl_->conn);
                throw StoreError(impl_->held_message(impl_->require_session(t, session_id)));
            }
            impl_->held.insert(session_id);
        }
        try {
            pqxx::work t(*impl_->conn);
            impl_->run(t, "SELECT 1 FROM sessions WHERE id = $1 FOR UPDATE", session_id);
            const Session s = impl_->require_session(t, session_id);
            if (s.status == SessionStatus::running &&
                !impl_->is_stale(s.host, s.pid, s.heartbeat_unix_s))
                throw StoreError(fmt::format(
                    "archive {}: session {} is still running (pid {} on {})", impl_->url,
                    session_id, s.pid, s.host));
            if (s.status == SessionStatus::complete || s.status == SessionStatus::aborted)
                throw StoreError(fmt::format("archive {}: session {} is {}; nothing to resume",
                                             impl_->url, session_id, to_string(s.status)));
            impl_->run(t,
                       "UPDATE sessions SET status = 'running', finished_utc = NULL, host = $1, "
                       "pid = $2, heartbeat_unix_s = $3 WHERE id = $4",
                       impl_->host, impl_->pid, impl_->now(), session_id);
            t.commit();
        } catch (...) {
            if (!had) impl_->unlock(session_id);
            throw;
        }
        pqxx::read_transaction t(*impl_->conn);
        ResumeState state;
        state.session = impl_->require_session(t, session_id);
        state.plan = impl_->read_plan(t, session_id);
        state.points = impl_->read_points(t, session_id, true);
        return state;
    });
}

void PostgresArchive::add_plan_points(std::int64_t session_id,
                                      const std::vector<PlanPoint>& plan) {
    impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        impl_->require_running(t, session_id);
        const std::string now = utc_iso(impl_->now());
        for (const auto& p : plan)
            impl_->run(t,
                       "INSERT INTO plan_points(session_id, plan_index, freq_hz, adaptive, "
                       "created_utc) VALUES ($1, $2, $3, $4, $5)",
                       session_id, p.index, p.freq_hz, p.adaptive, now);
        t.commit();
    });
}

std::vector<PlanPoint> PostgresArchive::plan(std::int64_t session_id) {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        return impl_->read_plan(t, session_id);
    });
}

Point PostgresArchive::append_point(std::int64_t session_id, const Point& point) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        impl_->require_running(t, session_id);
        Point p = impl_->insert_point(t, session_id, point);
        impl_->beat(t, session_id);
        t.commit();
        return p;
    });
}

std::vector<Point> PostgresArchive::append_points(std::int64_t session_id,
                                                  const std::vector<Point>& points) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        impl_->require_running(t, session_id);
        std::vector<Point> out;
        out.reserve(points.size());
        for (const auto& p : points) out.push_back(impl_->insert_point(t, session_id, p));
        impl_->beat(t, session_id);
        t.commit();
        return out;
    });
}

std::vector<Point> PostgresArchive::current_points(std::int64_t session_id) {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        return impl_->read_points(t, session_id, true);
    });
}

FitRecord PostgresArchive::add_fit(const FitRecord& fit) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        impl_->require_session(t, fit.session_id);
        FitRecord f = fit;
        f.uuid = make_uuid_v4();
        f.created_utc = utc_iso(impl_->now());
        const auto r = impl_->run(t,
                                  "INSERT INTO fits(uuid, session_id, kind, model, params_json, "
                                  "report_json, midband_gain_db, f_low_hz, f_high_hz, "
                                  "created_utc) VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10) "
                                  "RETURNING id",
                                  f.uuid, f.session_id, f.kind, f.model, f.params_json,
                                  f.report_json, f.midband_gain_db, f.f_low_hz, f.f_high_hz,
                                  f.created_utc);
        f.id = Cols(r[0]).i64();
        t.commit();
        return f;
    });
}

std::vector<FitRecord> PostgresArchive::fits(std::int64_t session_id) {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        return impl_->read_fits(t, session_id);
    });
}

Lot PostgresArchive::add_lot(const Lot& lot) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        Lot l = lot;
        l.uuid = make_uuid_v4();
        l.created_utc = utc_iso(impl_->now());
        const auto r = impl_->run(t,
                                  "INSERT INTO lots(uuid, lot_code, plan_json, quantity, "
                                  "supplier, status, session_id, created_utc) "
                                  "VALUES ($1, $2, $3, $4, $5, $6, $7, $8) RETURNING id",
                                  l.uuid, l.lot_code, l.plan_json, l.quantity, l.supplier,
                                  l.status, l.session_id, l.created_utc);
        l.id = Cols(r[0]).i64();
        t.commit();
        return l;
    });
}

std::optional<Lot> PostgresArchive::lot(const std::string& lot_code) {
    return impl_->guarded([&]() -> std::optional<Lot> {
        pqxx::read_transaction t(*impl_->conn);
        const auto r = impl_->run(
            t, std::string("SELECT ") + columns::lot + " FROM lots WHERE lot_code = $1",
            lot_code);
        if (r.empty()) return std::nullopt;
        return lot_from(r[0]);
    });
}

std::vector<Lot> PostgresArchive::lots() {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        std::vector<Lot> out;
        for (const auto& row :
             impl_->run(t, std::string("SELECT ") + columns::lot + " FROM lots ORDER BY id"))
            out.push_back(lot_from(row));
        return out;
    });
}

void PostgresArchive::set_lot_status(std::int64_t lot_id, const std::string& status) {
    impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        if (impl_->run(t, "UPDATE lots SET status = $1 WHERE id = $2", status, lot_id)
                .affected_rows() != 1)
            throw StoreError(fmt::format("archive {}: no lot {}", impl_->url, lot_id));
        t.commit();
    });
}

namespace {

const char* const insert_device_sql =
    "INSERT INTO devices(id, uuid, lot_id, device_index, readings_json, hfe, hfe_sd, vbe_v, "
    "vbe_sd_v, ic_a, ic_sd_a, vce_v, vce_sd_v, passed, skipped_reason, replacement_of) "
    "VALUES (coalesce($1, nextval(pg_get_serial_sequence('devices', 'id'))), $2, $3, $4, $5, "
    "$6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16) RETURNING id";

std::vector<Param> device_params(const Device& d, std::optional<std::int64_t> id,
                                 std::int64_t lot_id) {
    return {param(id),        param(d.uuid),    param(lot_id),   param(d.index),
            param(d.readings_json), param(d.hfe), param(d.hfe_sd), param(d.vbe_v),
            param(d.vbe_sd_v), param(d.ic_a),   param(d.ic_sd_a), param(d.vce_v),
            param(d.vce_sd_v), param(d.passed), param(d.skipped_reason),
            param(d.replacement_of)};
}

}  // namespace

Device PostgresArchive::add_device(const Device& device) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        Device d = device;
        d.uuid = make_uuid_v4();
        const auto r = impl_->run_values(t, insert_device_sql, device_params(d, {}, d.lot_id));
        d.id = Cols(r[0]).i64();
        t.commit();
        return d;
    });
}

std::vector<Device> PostgresArchive::devices(std::int64_t lot_id) {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        std::vector<Device> out;
        for (const auto& row : impl_->run(t,
                                          std::string("SELECT ") + columns::device +
                                              " FROM devices WHERE lot_id = $1 "
                                              "ORDER BY device_index, id",
                                          lot_id))
            out.push_back(device_from(row));
        return out;
    });
}

std::vector<SessionSummary> PostgresArchive::history(const std::string& serial) {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        return impl_->summaries(t, pg_history_sql, serial);
    });
}

SessionDetail PostgresArchive::session_detail(std::int64_t session_id) {
    return impl_->guarded([&] {
        // One snapshot for the whole session.
        pqxx::transaction<pqxx::repeatable_read, pqxx::read_only> t(*impl_->conn);
        SessionDetail d;
        d.session = impl_->require_session(t, session_id);
        d.board = impl_->find_board(t, d.session.board_serial);
        d.instruments = impl_->read_instruments(t, session_id);
        d.probes = impl_->read_probes(t, session_id);
        d.plan = impl_->read_plan(t, session_id);
        d.points = impl_->read_points(t, session_id, false);
        d.fits = impl_->read_fits(t, session_id);
        return d;
    });
}

// --- Sync ---

std::vector<Session> PostgresArchive::sessions() {
    return impl_->guarded([&] {
        pqxx::read_transaction t(*impl_->conn);
        return impl_->sessions_where(t, "ORDER BY s.id", {});
    });
}

std::optional<Session> PostgresArchive::session_by_uuid(const std::string& uuid) {
    return impl_->guarded([&]() -> std::optional<Session> {
        pqxx::read_transaction t(*impl_->conn);
        auto found = impl_->sessions_where(t, "WHERE s.uuid = $1", {param(uuid)});
        if (found.empty()) return std::nullopt;
        return found.front();
    });
}

CopyCounts PostgresArchive::Impl::copy_session(pqxx::transaction_base& t, const SessionDetail& d) {
    CopyCounts n;
    const Session& s = d.session;
    const auto board = find_board(t, s.board_serial);
    if (!board)
        throw StoreError(fmt::format(
            "archive {}: board {} of session {} is not here; copy the board (and its design) "
            "first",
            url, s.board_serial, s.uuid));
    std::int64_t id = 0;
    if (const auto here = run(t, "SELECT id, status, finished_utc FROM sessions WHERE uuid = $1 FOR UPDATE", s.uuid);
        !here.empty()) {
        Cols c(here[0]);
        id = c.i64();
        const SessionStatus status_here = session_status_from(c.text());
        const std::string finished_here = c.text();
        // Status moves only forward (store/sync_rules.h), as on SQLite.
        if (session_status_is_newer(s, status_here, finished_here))
            run(t, "UPDATE sessions SET status = $1, finished_utc = $2 WHERE id = $3", to_string(s.status),
                text_or_null(s.finished_utc), id);
    } else {
        const auto r = run(t,
                           "INSERT INTO sessions(uuid, board_id, kind, status, started_utc, "
                           "finished_utc, operator, host, pid, heartbeat_unix_s, bench_file, "
                           "software_version, notes) VALUES ($1, $2, $3, $4, $5, $6, $7, $8, "
                           "$9, $10, $11, $12, $13) RETURNING id",
                           s.uuid, board->id, to_string(s.kind), to_string(s.status),
                           s.started_utc, text_or_null(s.finished_utc), s.operator_name, s.host,
                           s.pid, s.heartbeat_unix_s, s.bench_file, s.software_version, s.notes);
        id = Cols(r[0]).i64();
        n.sessions = 1;
        write_instruments(t, id, d.instruments);
        write_probes(t, id, d.probes);
        n.instruments = static_cast<std::int64_t>(d.instruments.size());
        n.probes = static_cast<std::int64_t>(d.probes.size());
    }
    const std::string now_text = utc_iso(now());
    for (const auto& p : d.plan)
        n.plan_points += static_cast<std::int64_t>(
            run(t,
                "INSERT INTO plan_points(session_id, plan_index, freq_hz, adaptive, "
                "created_utc) VALUES ($1, $2, $3, $4, $5) "
                "ON CONFLICT (session_id, plan_index) DO NOTHING",
                id, p.index, p.freq_hz, p.adaptive, now_text)
                .affected_rows());

    // Readings: this archive's id for every UUID, existing or new, then superseded_by mapped.
    std::map<std::string, std::int64_t> local;  // uuid -> id here
    std::map<std::string, bool> superseded_here;
    for (const auto& row :
         run(t, "SELECT uuid, id, superseded_by IS NOT NULL FROM points WHERE session_id = $1",
             id)) {
        Cols c(row);
        const std::string uuid = c.text();
        local[uuid] = c.i64();
        superseded_here[uuid] = c.boolean();
    }
    std::map<std::int64_t, std::string> uuid_of;  // the other archive's id -> uuid
    for (const auto& p : d.points) uuid_of[p.id] = p.uuid;
    std::vector<const Point*> missing;
    for (const auto& p : d.points)
        if (!local.count(p.uuid)) {
            local[p.uuid] = next_id(t, "points");
            missing.push_back(&p);
        }
    auto mapped = [&](const Point& p) -> std::optional<std::int64_t> {
        if (!p.superseded_by) return std::nullopt;
        const auto u = uuid_of.find(*p.superseded_by);
        if (u == uuid_of.end())
            throw StoreError(fmt::format(
                "archive {}: reading {} of session {} is superseded by a reading not in the "
                "copy",
                url, p.uuid, s.uuid));
        return local.at(u->second);
    };
    // Readings here that the other archive has retaken since: marked first, so the new current
    // reading of that point is the only current one.
    for (const auto& p : d.points)
        if (p.superseded_by && superseded_here.count(p.uuid) && !superseded_here[p.uuid])
            run(t, "UPDATE points SET superseded_by = $1 WHERE id = $2", mapped(p),
                local.at(p.uuid));
    std::int64_t sequence = next_sequence(t, id);
    std::set<std::int64_t> taken;
    for (const auto& row : run(t, "SELECT sequence FROM points WHERE session_id = $1", id))
        taken.insert(Cols(row).i64());
    for (const Point* src : missing) {
        Point p = *src;
        p.id = local.at(p.uuid);
        p.superseded_by = mapped(*src);
        if (taken.count(p.sequence) || p.sequence <= 0) p.sequence = sequence++;
        taken.insert(p.sequence);
        sequence = std::max(sequence, p.sequence + 1);
        if (p.plan_index) require_planned(t, id, *p.plan_index);
        write_point(t, id, p);
        ++n.points;
    }
    for (const auto& f : d.fits)
        n.fits += static_cast<std::int64_t>(
            run(t,
                "INSERT INTO fits(uuid, session_id, kind, model, params_json, report_json, "
                "midband_gain_db, f_low_hz, f_high_hz, created_utc) VALUES ($1, $2, $3, $4, $5, "
                "$6, $7, $8, $9, $10) ON CONFLICT (uuid) DO NOTHING",
                f.uuid, id, f.kind, f.model, f.params_json, f.report_json, f.midband_gain_db,
                f.f_low_hz, f.f_high_hz, f.created_utc)
                .affected_rows());
    return n;
}

CopyCounts PostgresArchive::copy_session(const SessionDetail& detail) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        const CopyCounts n = impl_->copy_session(t, detail);
        t.commit();
        return n;
    });
}

CopyCounts PostgresArchive::Impl::copy_lot(pqxx::transaction_base& t, const Lot& lot,
                                           const std::string& session_uuid,
                                           const std::vector<Device>& devices) {
    CopyCounts n;
    std::optional<std::int64_t> session_id;
    if (!session_uuid.empty()) {
        const auto r = run(t, "SELECT id FROM sessions WHERE uuid = $1", session_uuid);
        if (r.empty())
            throw StoreError(fmt::format(
                "archive {}: session {} of lot {} is not here; copy the session first", url,
                session_uuid, lot.lot_code));
        session_id = Cols(r[0]).i64();
    }
    std::int64_t lot_id = 0;
    if (const auto here = run(t, "SELECT id, status FROM lots WHERE uuid = $1 FOR UPDATE", lot.uuid);
        !here.empty()) {
        Cols c(here[0]);
        lot_id = c.i64();
        if (lot_status_is_newer(lot.status, c.text())) run(t, "UPDATE lots SET status = $1 WHERE id = $2", lot.status, lot_id);
    } else {
        const auto r = run(t,
                           "INSERT INTO lots(uuid, lot_code, plan_json, quantity, supplier, "
                           "status, session_id, created_utc) VALUES ($1, $2, $3, $4, $5, $6, $7, "
                           "$8) RETURNING id",
                           lot.uuid, lot.lot_code, lot.plan_json, lot.quantity, lot.supplier,
                           lot.status, session_id, lot.created_utc);
        lot_id = Cols(r[0]).i64();
        n.lots = 1;
    }
    std::map<std::string, std::int64_t> local;  // uuid -> id here
    for (const auto& row : run(t, "SELECT uuid, id FROM devices WHERE lot_id = $1", lot_id)) {
        Cols c(row);
        const std::string uuid = c.text();
        local[uuid] = c.i64();
    }
    std::map<std::int64_t, std::string> uuid_of;
    for (const auto& d : devices) uuid_of[d.id] = d.uuid;
    // In the other archive's id order, so a replaced device is written before its replacement.
    std::vector<const Device*> order;
    for (const auto& d : devices) order.push_back(&d);
    std::sort(order.begin(), order.end(),
              [](const Device* a, const Device* b) { return a->id < b->id; });
    for (const Device* src : order) {
        if (local.count(src->uuid)) continue;
        Device d = *src;
        if (d.replacement_of) {
            const auto u = uuid_of.find(*d.replacement_of);
            if (u == uuid_of.end() || !local.count(u->second))
                throw StoreError(fmt::format(
                    "archive {}: device {} of lot {} replaces a device not in the copy", url,
                    d.uuid, lot.lot_code));
            d.replacement_of = local.at(u->second);
        }
        const auto r = run_values(t, insert_device_sql, device_params(d, {}, lot_id));
        local[d.uuid] = Cols(r[0]).i64();
        ++n.devices;
    }
    return n;
}

CopyCounts PostgresArchive::copy_lot(const Lot& lot, const std::string& session_uuid,
                                     const std::vector<Device>& devices) {
    return impl_->guarded([&] {
        pqxx::work t(*impl_->conn);
        const CopyCounts n = impl_->copy_lot(t, lot, session_uuid, devices);
        t.commit();
        return n;
    });
}

}  // namespace ampbench::store
