// Archive throughput and history latency, each against a baseline measured in the same run:
// readings committed per second through Archive (one commit per reading, and batched) as a ratio
// to raw sqlite3 C API inserts with the same pragmas, and history() of one serial among
// 1,000,000 sessions as a ratio to the same call among 1,000.
// With $AMPBENCH_BENCH_PG (or $AMPBENCH_TEST_PG), a superuser URL of a throwaway PostgreSQL
// cluster, the same figures for the PostgreSQL archive in a database of its own (created and
// dropped here): readings per second as a ratio to the SQLite archive's, history() among the
// sessions with the plan PostgreSQL chose for it.
// Usage: bench_store [points_per_commit_run] [sessions]   (defaults 2000 and 1000000)
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <stdexcept>
#include <string>
#include <vector>

#include <fmt/format.h>
#include <pqxx/pqxx>
#include <sqlite3.h>

#include "store/archive.h"
#include "store/postgres_archive.h"

using namespace ampbench::store;
using Clock = std::chrono::steady_clock;

namespace {

double seconds_since(Clock::time_point start) {
    return std::chrono::duration<double>(Clock::now() - start).count();
}

void check(int rc, sqlite3* db, const char* what) {
    if (rc != SQLITE_OK && rc != SQLITE_DONE && rc != SQLITE_ROW)
        throw std::runtime_error(fmt::format("{}: {}", what, sqlite3_errmsg(db)));
}

void exec(sqlite3* db, const char* sql) {
    check(sqlite3_exec(db, sql, nullptr, nullptr, nullptr), db, sql);
}

Point sample_point(int i) {
    Point p;
    p.freq_hz = 10.0 + i;
    p.in_amplitude_v = 0.05;
    p.in_amplitude_sd_v = 0.0002;
    p.in_phase_deg = 0.0;
    p.out_amplitude_v = 5.0;
    p.out_amplitude_sd_v = 0.002;
    p.out_phase_deg = -179.0;
    p.gain_db = 40.0;
    p.gain_db_sd = 0.03;
    p.phase_deg = -179.0;
    p.phase_deg_sd = 0.2;
    p.thd_pct = 0.1;
    p.settings_json = R"({"scope":{"timebase_s":0.001}})";
    return p;
}

// Raw C API: the same pragmas as the archive and a table with the same columns and indexes.
double raw_points_per_s(const std::string& path, int count, int batch) {
    sqlite3* db = nullptr;
    check(sqlite3_open(path.c_str(), &db), db, "open");
    exec(db, "PRAGMA foreign_keys = ON; PRAGMA synchronous = FULL; PRAGMA journal_mode = WAL;");
    sqlite3_busy_timeout(db, 30000);
    exec(db,
         "CREATE TABLE IF NOT EXISTS points (id INTEGER PRIMARY KEY, uuid TEXT NOT NULL UNIQUE, "
         "session_id INTEGER NOT NULL, sequence INTEGER NOT NULL, plan_index INTEGER, "
         "freq_hz REAL NOT NULL, in_amplitude_v REAL, in_amplitude_sd_v REAL, in_phase_deg REAL, "
         "in_phase_sd_deg REAL, out_amplitude_v REAL, out_amplitude_sd_v REAL, "
         "out_phase_deg REAL, out_phase_sd_deg REAL, gain_db REAL NOT NULL, gain_db_sd REAL, "
         "phase_deg REAL, phase_deg_sd REAL, thd_pct REAL, flags TEXT NOT NULL DEFAULT '', "
         "settings_json TEXT NOT NULL DEFAULT '{}', taken_utc TEXT NOT NULL, "
         "superseded_by INTEGER, UNIQUE (session_id, sequence))");
    sqlite3_stmt* insert = nullptr;
    check(sqlite3_prepare_v2(db,
                             "INSERT INTO points(uuid, session_id, sequence, freq_hz, "
                             "in_amplitude_v, in_amplitude_sd_v, in_phase_deg, out_amplitude_v, "
                             "out_amplitude_sd_v, out_phase_deg, gain_db, gain_db_sd, phase_deg, "
                             "phase_deg_sd, thd_pct, settings_json, taken_utc) "
                             "VALUES (?, 1, ?, ?, 0.05, 0.0002, 0, 5, 0.002, -179, 40, 0.03, "
                             "-179, 0.2, 0.1, ?, '2026-11-02T09:00:00Z')",
                             -1, &insert, nullptr),
          db, "prepare");
    static int serial = 0;
    const auto start = Clock::now();
    for (int done = 0; done < count;) {
        exec(db, "BEGIN IMMEDIATE");
        for (int i = 0; i < batch && done < count; ++i, ++done) {
            const std::string uuid = fmt::format("raw-{}-{}", serial, done);
            sqlite3_bind_text(insert, 1, uuid.c_str(), -1, SQLITE_TRANSIENT);
            sqlite3_bind_int64(insert, 2, serial * 1000000LL + done);
            sqlite3_bind_double(insert, 3, 10.0 + done);
            sqlite3_bind_text(insert, 4, R"({"scope":{"timebase_s":0.001}})", -1, SQLITE_STATIC);
            check(sqlite3_step(insert), db, "insert");
            sqlite3_reset(insert);
        }
        exec(db, "COMMIT");
    }
    const double elapsed = seconds_since(start);
    ++serial;
    sqlite3_finalize(insert);
    sqlite3_close(db);
    return count / elapsed;
}

double archive_points_per_s(Archive& archive, int count, int batch) {
    NewSession ns;
    ns.board_serial = "PA1-2611-0042";
    const Session s = archive.begin_session(ns);
    const auto start = Clock::now();
    if (batch == 1) {
        for (int i = 0; i < count; ++i) archive.append_point(s.id, sample_point(i));
    } else {
        for (int done = 0; done < count;) {
            std::vector<Point> points;
            for (int i = 0; i < batch && done < count; ++i, ++done)
                points.push_back(sample_point(done));
            archive.append_points(s.id, points);
        }
    }
    const double elapsed = seconds_since(start);
    archive.finish_session(s.id, SessionStatus::complete);
    return count / elapsed;
}

// Fills an archive with `sessions` sessions over sessions/10 boards in one transaction, through
// the C API because Archive writes one session per transaction by design.
void fill_sessions(const std::string& path, long sessions) {
    open_archive(path);  // creates the schema
    sqlite3* db = nullptr;
    check(sqlite3_open(path.c_str(), &db), db, "open");
    exec(db, "PRAGMA synchronous = OFF; BEGIN IMMEDIATE");
    sqlite3_stmt* board = nullptr;
    sqlite3_stmt* session = nullptr;
    check(sqlite3_prepare_v2(db,
                             "INSERT INTO boards(id, serial, created_utc) "
                             "VALUES (?, ?, '2026-01-01T00:00:00Z')",
                             -1, &board, nullptr),
          db, "prepare boards");
    check(sqlite3_prepare_v2(db,
                             "INSERT INTO sessions(uuid, board_id, kind, status, started_utc, "
                             "heartbeat_unix_s) VALUES (?, ?, 'sweep', 'complete', ?, 1.8e9)",
                             -1, &session, nullptr),
          db, "prepare sessions");
    const long boards = std::max(1L, sessions / 10);
    for (long b = 1; b <= boards; ++b) {
        const std::string serial = fmt::format("PA1-{:04}-{:04}", b / 10000, b % 10000);
        sqlite3_bind_int64(board, 1, b);
        sqlite3_bind_text(board, 2, serial.c_str(), -1, SQLITE_TRANSIENT);
        check(sqlite3_step(board), db, "board");
        sqlite3_reset(board);
    }
    for (long i = 0; i < sessions; ++i) {
        const std::string uuid = fmt::format("{:08x}-0000-4000-8000-{:012x}", i, i);
        const std::string started =
            fmt::format("2026-{:02}-{:02}T{:02}:00:00Z", 1 + i % 12, 1 + i % 28, i % 24);
        sqlite3_bind_text(session, 1, uuid.c_str(), -1, SQLITE_TRANSIENT);
        sqlite3_bind_int64(session, 2, 1 + (i * 7919) % boards);  // spread over the boards
        sqlite3_bind_text(session, 3, started.c_str(), -1, SQLITE_TRANSIENT);
        check(sqlite3_step(session), db, "session");
        sqlite3_reset(session);
    }
    exec(db, "COMMIT");
    sqlite3_finalize(board);
    sqlite3_finalize(session);
    sqlite3_close(db);
}

// Median wall time of history() for one serial.
double history_s(const std::string& path, const std::string& serial, size_t* found) {
    auto archive = open_archive(path);
    std::vector<double> times;
    for (int i = 0; i < 41; ++i) {
        const auto start = Clock::now();
        *found = archive->history(serial).size();
        times.push_back(seconds_since(start));
    }
    std::nth_element(times.begin(), times.begin() + 20, times.end());
    return times[20];
}

// The PostgreSQL archive: write rates against the SQLite archive's, and history() among
// `sessions` sessions filled server-side.
void postgres_figures(const std::string& server, int per_commit, int batched, int batch,
                      long sessions, double sqlite_one, double sqlite_batch) {
    const std::string database = fmt::format("ampbench_bench_{}", ::getpid());
    pqxx::connection admin(server);
    {
        pqxx::nontransaction t(admin);
        t.exec("CREATE DATABASE " + admin.quote_name(database));
    }
    const auto slash = server.rfind('/');
    const std::string url = server.substr(0, slash + 1) + database;
    try {
        fmt::print("PostgreSQL archive ({}), one connection\n", url);
        {
            auto archive = open_archive(url);
            const double one = archive_points_per_s(*archive, per_commit, 1);
            const double many = archive_points_per_s(*archive, batched, batch);
            fmt::print("  one commit per reading: {:9.0f}/s, SQLite archive {:9.0f}/s, ratio {:.2f}\n",
                       one, sqlite_one, one / sqlite_one);
            fmt::print("  {} readings a commit:   {:9.0f}/s, SQLite archive {:9.0f}/s, ratio {:.2f}\n",
                       batch, many, sqlite_batch, many / sqlite_batch);
        }
        pqxx::connection c(url);
        {
            pqxx::work t(c);
            const long boards = std::max(1L, sessions / 10);
            t.exec("DELETE FROM points; DELETE FROM sessions; DELETE FROM boards");
            t.exec_params(
                "INSERT INTO boards(id, serial, created_utc) SELECT b, 'PA1-' || "
                "lpad((b / 10000)::text, 4, '0') || '-' || lpad((b % 10000)::text, 4, '0'), "
                "'2026-01-01T00:00:00Z' FROM generate_series(1::bigint, $1::bigint) b",
                boards);
            t.exec_params(
                "INSERT INTO sessions(uuid, board_id, kind, status, started_utc, "
                "heartbeat_unix_s) SELECT lpad(to_hex(i), 8, '0') || '-0000-4000-8000-' || "
                "lpad(to_hex(i), 12, '0'), 1 + (i * 7919) % $2::bigint, 'sweep', 'complete', "
                "'2026-' || lpad((1 + i % 12)::text, 2, '0') || '-' || lpad((1 + i % 28)::text, "
                "2, '0') || 'T' || lpad((i % 24)::text, 2, '0') || ':00:00Z', 1.8e9 "
                "FROM generate_series(0::bigint, $1::bigint - 1) i",
                sessions, boards);
            t.commit();
        }
        {
            pqxx::nontransaction t(c);
            t.exec("ANALYZE");
            const auto plan = t.exec(std::string("PREPARE h(text) AS ") +
                                     PostgresArchive::history_query() +
                                     "; EXPLAIN EXECUTE h('PA1-0004-0242')");
            fmt::print("  plan of history() among {} sessions:\n", sessions);
            for (const auto& row : plan) fmt::print("    {}\n", row[0].c_str());
        }
        size_t found = 0;
        const double t_pg = history_s(url, "PA1-0004-0242", &found);
        fmt::print("  history among {:>8} sessions: {:8.1f} us ({} sessions of the board)\n",
                   sessions, t_pg * 1e6, found);
    } catch (...) {
        pqxx::nontransaction t(admin);
        t.exec("DROP DATABASE IF EXISTS " + admin.quote_name(database) + " WITH (FORCE)");
        throw;
    }
    pqxx::nontransaction t(admin);
    t.exec("DROP DATABASE IF EXISTS " + admin.quote_name(database) + " WITH (FORCE)");
}

}  // namespace

int main(int argc, char** argv) {
    const int per_commit = argc > 1 ? std::atoi(argv[1]) : 2000;
    const long sessions = argc > 2 ? std::atol(argv[2]) : 1000000;
    const int batched = per_commit * 10;
    constexpr int batch = 100;
    char pattern[] = "/tmp/ampbench-bench-store-XXXXXX";
    if (!::mkdtemp(pattern)) return 1;
    const std::string dir = pattern;
    try {
        fmt::print("archive writes (synchronous=FULL, WAL) in {}\n", dir);
        const double raw_one = raw_points_per_s(dir + "/raw.sqlite", per_commit, 1);
        const double raw_batch = raw_points_per_s(dir + "/raw.sqlite", batched, batch);
        auto archive = open_archive(dir + "/archive.sqlite");
        const double ours_one = archive_points_per_s(*archive, per_commit, 1);
        const double ours_batch = archive_points_per_s(*archive, batched, batch);
        fmt::print("  one commit per reading: archive {:9.0f}/s, raw C API {:9.0f}/s, ratio {:.2f}\n",
                   ours_one, raw_one, ours_one / raw_one);
        fmt::print("  {} readings a commit:   archive {:9.0f}/s, raw C API {:9.0f}/s, ratio {:.2f}\n",
                   batch, ours_batch, raw_batch, ours_batch / raw_batch);

        fmt::print("history of one serial\n");
        const long small = 1000;
        fill_sessions(dir + "/small.sqlite", small);
        const auto start = Clock::now();
        fill_sessions(dir + "/large.sqlite", sessions);
        fmt::print("  built {} sessions in {:.1f} s\n", sessions, seconds_since(start));
        size_t found_small = 0, found_large = 0;
        const double t_small = history_s(dir + "/small.sqlite", "PA1-0000-0042", &found_small);
        const double t_large = history_s(dir + "/large.sqlite", "PA1-0004-0242", &found_large);
        fmt::print("  among {:>8} sessions: {:8.1f} us ({} sessions of the board)\n", small,
                   t_small * 1e6, found_small);
        fmt::print("  among {:>8} sessions: {:8.1f} us ({} sessions of the board), ratio {:.2f}\n",
                   sessions, t_large * 1e6, found_large, t_large / t_small);

        const char* server = std::getenv("AMPBENCH_BENCH_PG");
        if (!server || !*server) server = std::getenv("AMPBENCH_TEST_PG");
        if (server && *server)
            postgres_figures(server, per_commit, batched, batch, sessions, ours_one, ours_batch);
        else
            fmt::print("PostgreSQL archive: skipped (set AMPBENCH_BENCH_PG to a throwaway cluster)\n");
    } catch (const std::exception& e) {
        std::fprintf(stderr, "bench_store: %s\n", e.what());
        std::filesystem::remove_all(dir);
        return 1;
    }
    std::filesystem::remove_all(dir);
    return 0;
}
