// Fresh archive locations on SQLite and PostgreSQL for the tests.
#include "test_backend.h"

#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <stdexcept>
#include <thread>

#include <SQLiteCpp/SQLiteCpp.h>
#include <pqxx/pqxx>

namespace ampbench::backend_testing {

namespace {

std::string sqlite_path(const std::string& location) {
    return location.rfind("sqlite:", 0) == 0 ? location.substr(7) : location;
}

std::string new_database_name() {
    static std::atomic<int> counter{0};
    // Digits and underscores only: the name goes into CREATE DATABASE as an identifier.
    return "ampbench_t" + std::to_string(::getpid()) + "_" + std::to_string(++counter) + "_" +
           std::to_string(std::chrono::steady_clock::now().time_since_epoch().count() % 1000000);
}

}  // namespace

std::string test_server_url() {
    const char* url = std::getenv("AMPBENCH_TEST_PG");
    return url && *url ? url : "";
}

bool postgres_required() {
    const char* flag = std::getenv("AMPBENCH_REQUIRE_PG");
    return flag && std::string(flag) == "1";
}

std::string url_with_database(const std::string& url, const std::string& database) {
    const auto scheme = url.find("://");
    const auto query = url.find('?');
    const auto slash = url.find('/', scheme == std::string::npos ? 0 : scheme + 3);
    const std::string head = slash == std::string::npos || (query != std::string::npos && slash > query)
                                 ? url.substr(0, query)
                                 : url.substr(0, slash);
    return head + "/" + database + (query == std::string::npos ? "" : url.substr(query));
}

std::string url_with_user(const std::string& url, const std::string& user) {
    const auto scheme = url.find("://");
    const auto start = scheme == std::string::npos ? 0 : scheme + 3;
    const auto end = url.find_first_of("/?", start);
    std::string authority = url.substr(start, end == std::string::npos ? std::string::npos : end - start);
    if (const auto at = authority.rfind('@'); at != std::string::npos) authority = authority.substr(at + 1);
    return url.substr(0, start) + user + "@" + authority +
           (end == std::string::npos ? "" : url.substr(end));
}

Backend::Backend(BackendKind kind) : kind_(kind) {
    const char* base = std::getenv("TMPDIR");
    std::string pattern = std::string(base && *base ? base : "/tmp") + "/ampbench-backend-XXXXXX";
    if (!::mkdtemp(pattern.data())) throw std::runtime_error("mkdtemp failed");
    dir_ = pattern;
    if (kind_ == BackendKind::postgres && test_server_url().empty()) {
        available_ = false;
        return;
    }
    location_ = another("archive");
}

std::string Backend::another(const std::string& name) {
    if (sqlite()) return path(name + ".sqlite");
    const std::string database = new_database_name();
    pqxx::connection admin(test_server_url());
    pqxx::nontransaction t(admin);
    t.exec("CREATE DATABASE " + admin.quote_name(database));
    databases_.push_back(database);
    return url_with_database(test_server_url(), database);
}

Backend::~Backend() {
    if (!databases_.empty()) {
        try {
            pqxx::connection admin(test_server_url());
            pqxx::nontransaction t(admin);
            for (const auto& d : databases_)
                t.exec("DROP DATABASE IF EXISTS " + admin.quote_name(d) + " WITH (FORCE)");
        } catch (const std::exception&) {
            // The cluster is thrown away at the end of the run anyway.
        }
    }
    std::error_code ec;
    std::filesystem::remove_all(dir_, ec);
}

void Backend::exec_at(const std::string& location, const std::string& sql) const {
    if (sqlite()) {
        SQLite::Database db(sqlite_path(location), SQLite::OPEN_READWRITE | SQLite::OPEN_CREATE);
        db.exec(sql);
        return;
    }
    const auto slash = location.rfind('/');
    pqxx::connection c(url_with_database(test_server_url(), location.substr(slash + 1)));
    pqxx::nontransaction t(c);
    t.exec(sql);
}

void Backend::exec_url(const std::string& url, const std::string& sql) {
    pqxx::connection c(url);
    pqxx::nontransaction t(c);
    t.exec(sql);
}

std::string Backend::query(const std::string& sql) const {
    const auto rows = column(sql);
    return rows.empty() ? std::string() : rows.front();
}

std::vector<std::string> Backend::column(const std::string& sql) const {
    std::vector<std::string> out;
    if (sqlite()) {
        SQLite::Database db(sqlite_path(location_), SQLite::OPEN_READONLY);
        SQLite::Statement st(db, sql);
        while (st.executeStep())
            out.push_back(st.getColumn(0).isNull() ? "" : st.getColumn(0).getString());
        return out;
    }
    const auto slash = location_.rfind('/');
    pqxx::connection c(url_with_database(test_server_url(), location_.substr(slash + 1)));
    pqxx::nontransaction t(c);
    for (const auto& row : t.exec(sql)) out.push_back(row[0].is_null() ? "" : row[0].c_str());
    return out;
}

void Backend::wait_for_other_connections_to_close(int still_open) const {
    if (sqlite()) return;
    const auto give_up = std::chrono::steady_clock::now() + std::chrono::seconds(30);
    while (std::chrono::steady_clock::now() < give_up) {
        if (query("SELECT count(*) FROM pg_stat_activity WHERE datname = current_database() "
                  "AND pid <> pg_backend_pid()") == std::to_string(still_open))
            return;
        std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
    throw std::runtime_error("connections to " + location_ + " stayed open for 30 s");
}

}  // namespace ampbench::backend_testing
