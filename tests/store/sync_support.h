// Shared by the store and CLI sync tests (header-only, so both suites can include it): an
// archive's rows per table and every UUID in it, read through the Archive interface so the same
// check runs on any backend; and a fresh PostgreSQL database per test on the server that
// AMPBENCH_TEST_PG names.
#pragma once

#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cstdio>
#include <cstdlib>
#include <optional>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

#include "store/archive.h"

namespace ampbench::store::testing {

struct ArchiveRows {
    std::int64_t designs = 0, boards = 0;
    CopyCounts rows;
    std::int64_t uuid_rows = 0;   // UUIDs seen (sessions, points, fits, lots, devices)
    std::set<std::string> uuids;  // the distinct ones: uuids.size() == uuid_rows, no duplicate

    // "designs=1 boards=2 sessions=3 ..." for messages and comparisons.
    std::string text() const {
        const CopyCounts& r = rows;
        return "designs=" + std::to_string(designs) + " boards=" + std::to_string(boards) +
               " sessions=" + std::to_string(r.sessions) +
               " instruments=" + std::to_string(r.instruments) +
               " probes=" + std::to_string(r.probes) +
               " plan_points=" + std::to_string(r.plan_points) +
               " points=" + std::to_string(r.points) + " fits=" + std::to_string(r.fits) +
               " lots=" + std::to_string(r.lots) + " devices=" + std::to_string(r.devices);
    }
};

inline ArchiveRows archive_rows(Archive& a) {
    ArchiveRows out;
    std::set<std::string> designs;
    for (const auto& b : a.boards()) {
        ++out.boards;
        if (!b.board.design_address.empty()) designs.insert(b.board.design_address);
    }
    out.designs = static_cast<std::int64_t>(designs.size());
    auto note = [&](const std::string& uuid) {
        ++out.uuid_rows;
        out.uuids.insert(uuid);
    };
    for (const auto& s : a.sessions()) {
        const SessionDetail d = a.session_detail(s.id);
        ++out.rows.sessions;
        note(s.uuid);
        out.rows.instruments += static_cast<std::int64_t>(d.instruments.size());
        out.rows.probes += static_cast<std::int64_t>(d.probes.size());
        out.rows.plan_points += static_cast<std::int64_t>(d.plan.size());
        for (const auto& p : d.points) {
            ++out.rows.points;
            note(p.uuid);
        }
        for (const auto& f : d.fits) {
            ++out.rows.fits;
            note(f.uuid);
        }
    }
    for (const auto& l : a.lots()) {
        ++out.rows.lots;
        note(l.uuid);
        for (const auto& d : a.devices(l.id)) {
            ++out.rows.devices;
            note(d.uuid);
        }
    }
    return out;
}

// The server URL for PostgreSQL tests, or nullopt when AMPBENCH_TEST_PG is unset.
inline std::optional<std::string> test_pg_server() {
    const char* url = std::getenv("AMPBENCH_TEST_PG");
    if (!url || !*url) return std::nullopt;
    return std::string(url);
}

// A new database on the AMPBENCH_TEST_PG server, created and dropped with psql; url() is the
// same server URL with the new database name. (The one place to adapt if the CI cluster helper
// offers its own way to make a database.)
class TestPgDatabase {
public:
    TestPgDatabase(const std::string& server, const std::string& tag) : server_(server) {
        static std::atomic<int> counter{0};
        name_ = "ampbench_" + tag + "_" + std::to_string(::getpid()) + "_" +
                std::to_string(counter++);
        psql("CREATE DATABASE " + name_);
        // postgresql://user@host:port/dbname?options: replace dbname, keep the options.
        const auto scheme = server.find("://");
        const auto start = scheme == std::string::npos ? 0 : scheme + 3;
        const auto query = server.find('?', start);
        const auto slash = server.find('/', start);
        const auto host_end = std::min(slash, query);
        url_ = server.substr(0, host_end) + "/" + name_ +
               (query == std::string::npos ? "" : server.substr(query));
    }
    ~TestPgDatabase() {
        try {
            psql("DROP DATABASE IF EXISTS " + name_ + " WITH (FORCE)");
        } catch (const std::exception&) {
            // A server gone at the end of the run leaves nothing to drop.
        }
    }
    TestPgDatabase(const TestPgDatabase&) = delete;
    TestPgDatabase& operator=(const TestPgDatabase&) = delete;
    const std::string& url() const { return url_; }

private:
    void psql(const std::string& sql) const {
        std::string quoted = "'";
        for (char c : server_) quoted += c == '\'' ? std::string("'\\''") : std::string(1, c);
        quoted += "'";
        const std::string cmd =
            "psql " + quoted + " -v ON_ERROR_STOP=1 -qAt -c \"" + sql + "\" > /dev/null 2>&1";
        if (std::system(cmd.c_str()) != 0)
            throw std::runtime_error("psql failed on the AMPBENCH_TEST_PG server: " + sql);
    }

    std::string server_, name_, url_;
};

}  // namespace ampbench::store::testing
