// The archive backends the store and CLI tests run on: a SQLite file in a temporary directory,
// or a database of its own on the throwaway PostgreSQL cluster named by $AMPBENCH_TEST_PG
// (created for the test, dropped after it). Without $AMPBENCH_TEST_PG the PostgreSQL cases are
// skipped with a warning, unless $AMPBENCH_REQUIRE_PG=1 (CI), which makes that a failure.
#pragma once

#include <string>
#include <vector>

namespace ampbench::backend_testing {

enum class BackendKind { sqlite, postgres };

class Backend {
public:
    explicit Backend(BackendKind kind);
    ~Backend();
    Backend(const Backend&) = delete;
    Backend& operator=(const Backend&) = delete;

    BackendKind kind() const { return kind_; }
    bool sqlite() const { return kind_ == BackendKind::sqlite; }
    const char* name() const { return sqlite() ? "SQLite" : "PostgreSQL"; }
    // False for PostgreSQL when $AMPBENCH_TEST_PG is unset.
    bool available() const { return available_; }
    // A fresh archive location for --db / open_archive (nothing created yet).
    const std::string& location() const { return location_; }
    // Another fresh location on the same backend (a second file, a second database).
    std::string another(const std::string& name);
    // A scratch directory for other files of the test.
    std::string path(const std::string& name) const { return dir_ + "/" + name; }
    // Runs a fixed SQL script on the archive at `location` as its owner.
    void exec(const std::string& sql) const { exec_at(location_, sql); }
    void exec_at(const std::string& location, const std::string& sql) const;
    // Runs SQL on a PostgreSQL URL as the user it names.
    static void exec_url(const std::string& url, const std::string& sql);
    // The first column of the first row of a query ("" when there is none or it is NULL).
    std::string query(const std::string& sql) const;
    // The first column of every row of the last statement of a script.
    std::vector<std::string> column(const std::string& sql) const;
    // PostgreSQL: waits until no other connection is open to the archive's database (a killed
    // client's server process may take a moment to go). Nothing to wait for on SQLite.
    void wait_for_other_connections_to_close(int still_open = 0) const;

private:
    BackendKind kind_;
    bool available_ = true;
    std::string dir_;
    std::string location_;
    std::vector<std::string> databases_;
};

// $AMPBENCH_TEST_PG (a superuser URL of a throwaway cluster), or "".
std::string test_server_url();
// Whether PostgreSQL cases must run ($AMPBENCH_REQUIRE_PG=1).
bool postgres_required();
// `url` with its database name replaced.
std::string url_with_database(const std::string& url, const std::string& database);
// `url` with its user replaced (and no password).
std::string url_with_user(const std::string& url, const std::string& user);

}  // namespace ampbench::backend_testing

// Ends a PostgreSQL test case early with a warning when there is no server (a failure when
// one is required).
#define AMPBENCH_SKIP_UNAVAILABLE(var)                                                      \
    if (!var.available()) {                                                                 \
        if (::ampbench::backend_testing::postgres_required())                               \
            FAIL("AMPBENCH_REQUIRE_PG=1 but AMPBENCH_TEST_PG is not set: PostgreSQL cases " \
                 "did not run");                                                            \
        WARN("PostgreSQL case skipped: AMPBENCH_TEST_PG is not set");                       \
        return;                                                                             \
    }                                                                                       \
    INFO("backend " << var.name())

// Runs the rest of the test case once per backend; `var` is the Backend.
#define AMPBENCH_EACH_BACKEND(var)                                                          \
    const auto var##_kind = GENERATE(::ampbench::backend_testing::BackendKind::sqlite,      \
                                     ::ampbench::backend_testing::BackendKind::postgres);   \
    ::ampbench::backend_testing::Backend var(var##_kind);                                   \
    AMPBENCH_SKIP_UNAVAILABLE(var)

// A PostgreSQL-only test case; `var` is the Backend.
#define AMPBENCH_POSTGRES_ONLY(var)                                                          \
    ::ampbench::backend_testing::Backend var(::ampbench::backend_testing::BackendKind::postgres); \
    AMPBENCH_SKIP_UNAVAILABLE(var)
