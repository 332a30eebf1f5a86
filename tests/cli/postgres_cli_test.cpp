// The product on a shared PostgreSQL archive, run as a user would: `ampbench` processes on the
// virtual bench writing into one database, a role with only the privileges the README lists,
// the refusal for a role that may not create the tables, and a second station told who holds
// a running session.
#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <chrono>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "cli_support.h"
#include "test_backend.h"

extern char** environ;

using namespace ampbench::cli::testing;
using ampbench::backend_testing::Backend;
using ampbench::backend_testing::BackendKind;

namespace {

const std::string& source_dir() {
    static const std::string dir = AMPBENCH_SOURCE_DIR;
    return dir;
}

std::string sample(const std::string& name) { return source_dir() + "/sample_sessions/" + name; }

// The sample virtual bench with its sim:// seed replaced by `uri`, written into `path`.
void write_bench(const std::string& path, const std::string& uri) {
    std::string text = read_text(sample("virtual.bench.json"));
    const std::string from = "sim://?seed=2611";
    for (size_t at = text.find(from); at != std::string::npos; at = text.find(from, at + uri.size()))
        text.replace(at, from.size(), uri);
    write_text(path, text);
}

std::vector<std::string> sweep_args(const std::string& db, const std::string& bench,
                                    const std::string& serial) {
    return {"--db", db, "sweep", "--bench", bench, "--design", sample("pa1.design.json"),
            "--board", serial, "--yes", "--json", "--no-progress", "--per-decade", "4", "--to",
            "150e3", "--tolerance-runs", "100"};
}

// An `ampbench` child process with stdout and stderr in `log`.
class Process {
public:
    Process(const std::vector<std::string>& args, const std::string& log) {
        std::vector<std::string> a{AMPBENCH_EXE};
        a.insert(a.end(), args.begin(), args.end());
        std::vector<char*> argv;
        for (auto& s : a) argv.push_back(s.data());
        argv.push_back(nullptr);
        posix_spawn_file_actions_t actions;
        posix_spawn_file_actions_init(&actions);
        posix_spawn_file_actions_addopen(&actions, STDOUT_FILENO, log.c_str(),
                                         O_WRONLY | O_CREAT | O_TRUNC, 0644);
        posix_spawn_file_actions_adddup2(&actions, STDOUT_FILENO, STDERR_FILENO);
        posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
        const int rc = ::posix_spawn(&pid_, argv[0], &actions, nullptr, argv.data(), environ);
        posix_spawn_file_actions_destroy(&actions);
        REQUIRE(rc == 0);
    }
    Process(const Process&) = delete;
    Process& operator=(const Process&) = delete;
    ~Process() {
        if (pid_ > 0) {
            ::kill(pid_, SIGKILL);
            ::waitpid(pid_, nullptr, 0);
        }
    }
    pid_t pid() const { return pid_; }
    // The exit code (-1 when killed by a signal).
    int wait() {
        int status = 0;
        ::waitpid(pid_, &status, 0);
        pid_ = -1;
        return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
    }

private:
    pid_t pid_ = -1;
};

// A login role of the test cluster, dropped (after its grants) when the test ends.
class Role {
public:
    Role(const Backend& admin, const std::string& stem) : admin_(admin) {
        name_ = stem + "_" + std::to_string(::getpid()) + "_" + std::to_string(++counter());
        admin_.exec("CREATE ROLE " + name_ + " LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE");
    }
    ~Role() {
        try {
            admin_.exec("DROP OWNED BY " + name_ + "; DROP ROLE " + name_);
        } catch (const std::exception&) {
            // The cluster is thrown away after the run.
        }
    }
    Role(const Role&) = delete;
    Role& operator=(const Role&) = delete;
    const std::string& name() const { return name_; }
    std::string url(const std::string& location) const {
        return ampbench::backend_testing::url_with_user(location, name_);
    }

private:
    static int& counter() {
        static int n = 0;
        return n;
    }
    const Backend& admin_;
    std::string name_;
};

std::string database_of(const std::string& url) { return url.substr(url.rfind('/') + 1); }

// The README's privileges for daily use, and nothing from PUBLIC.
std::string daily_grants(const std::string& database, const std::string& role) {
    return "REVOKE ALL ON DATABASE " + database + " FROM PUBLIC; "
           "REVOKE ALL ON SCHEMA public FROM PUBLIC; "
           "GRANT CONNECT ON DATABASE " + database + " TO " + role + "; "
           "GRANT USAGE ON SCHEMA public TO " + role + "; "
           "GRANT SELECT, INSERT, UPDATE ON ALL TABLES IN SCHEMA public TO " + role + "; "
           "GRANT USAGE ON ALL SEQUENCES IN SCHEMA public TO " + role + ";";
}

std::string host_name() {
    std::array<char, 256> name{};
    ::gethostname(name.data(), name.size() - 1);
    return name.data();
}

}  // namespace

TEST_CASE("two stations sweep the virtual bench into one PostgreSQL archive at once",
          "[cli][postgres][sim]") {
    AMPBENCH_POSTGRES_ONLY(b);
    write_bench(b.path("a.bench.json"), "sim://?seed=2611");
    write_bench(b.path("b.bench.json"), "sim://?seed=2612");
    {
        Process first(sweep_args(b.location(), b.path("a.bench.json"), "PA1-2611-0201"),
                      b.path("first.log"));
        Process second(sweep_args(b.location(), b.path("b.bench.json"), "PA1-2611-0202"),
                       b.path("second.log"));
        const int first_code = first.wait();
        const int second_code = second.wait();
        INFO(read_text(b.path("first.log")) << "\n" << read_text(b.path("second.log")));
        REQUIRE(first_code == 0);
        REQUIRE(second_code == 0);
    }
    CHECK(b.query("SELECT count(*) FROM sessions WHERE status = 'complete'") == "2");
    CHECK(b.query("SELECT count(DISTINCT uuid) FROM sessions") == "2");
    // Every planned point of each session has exactly one current reading.
    CHECK(b.query("SELECT count(*) FROM plan_points pp WHERE (SELECT count(*) FROM points p "
                  "WHERE p.session_id = pp.session_id AND p.plan_index = pp.plan_index AND "
                  "p.superseded_by IS NULL) <> 1") == "0");
    for (const std::string serial : {"PA1-2611-0201", "PA1-2611-0202"}) {
        INFO(serial);
        const std::string planned = b.query(
            "SELECT count(*) FROM plan_points pp JOIN sessions s ON s.id = pp.session_id JOIN "
            "boards bo ON bo.id = s.board_id WHERE bo.serial = '" + serial + "'");
        CHECK(std::stol(planned) >= 10);
        const CliResult history = run_cli({"--db", b.location(), "history", serial, "--json"});
        REQUIRE(history.code == 0);
        const auto h = nlohmann::json::parse(history.out);
        REQUIRE(h["sessions"].size() == 1);
        CHECK(h["sessions"][0]["status"] == "complete");
        CHECK(std::to_string(h["sessions"][0]["points"].get<long>()) == planned);
    }
}

TEST_CASE("a role with only the README's privileges runs sweeps, history and boards",
          "[cli][postgres][sim]") {
    AMPBENCH_POSTGRES_ONLY(b);
    // The owner (here the test superuser) creates the tables on first use.
    REQUIRE(run_cli({"--db", b.location(), "boards"}).code == 0);
    Role limited(b, "ampbench_limited");
    b.exec(daily_grants(database_of(b.location()), limited.name()));
    CHECK(b.query("SELECT rolsuper::text FROM pg_roles WHERE rolname = '" + limited.name() +
                  "'") == "false");
    const std::string db = limited.url(b.location());

    write_bench(b.path("v.bench.json"), "sim://?seed=2611");
    const CliResult sweep = run_cli(sweep_args(db, b.path("v.bench.json"), "PA1-2611-0301"));
    INFO(sweep.out << sweep.err);
    REQUIRE(sweep.code == 0);
    const auto result = nlohmann::json::parse(sweep.out);
    CHECK(result["points"].get<int>() >= 10);

    const CliResult history = run_cli({"--db", db, "history", "PA1-2611-0301", "--json"});
    INFO(history.err);
    REQUIRE(history.code == 0);
    const auto h = nlohmann::json::parse(history.out);
    REQUIRE(h["sessions"].size() == 1);
    CHECK(h["sessions"][0]["status"] == "complete");
    CHECK(h["sessions"][0]["points"] == result["points"]);
    CHECK_FALSE(h["sessions"][0]["midband_gain_db"].is_null());

    const CliResult boards = run_cli({"--db", db, "boards", "--json"});
    REQUIRE(boards.code == 0);
    const auto bj = nlohmann::json::parse(boards.out);
    REQUIRE(bj["boards"].size() == 1);
    CHECK(bj["boards"][0]["serial"] == "PA1-2611-0301");
    const CliResult lots = run_cli({"--db", db, "lots"});
    INFO(lots.err);
    CHECK(lots.code == 0);

    // Import and export too, and the archive's rows say who wrote them.
    write_text(b.path("hand.csv"), "freq_hz,gain_db\n100,39.5\n1000,40.1\n");
    REQUIRE(run_cli({"--db", db, "import", b.path("hand.csv"), "--board", "PA1-2611-0302"}).code == 0);
    const CliResult exported = run_cli({"--db", db, "export", "2", "--csv"});
    REQUIRE(exported.code == 0);
    CHECK_THAT(exported.out, Catch::Contains("1000,40.1"));
    // Nothing beyond the list: the role cannot create a table of its own.
    CHECK_THROWS(Backend::exec_url(db, "CREATE TABLE intruder(x int)"));
}

TEST_CASE("a role that may not create tables meets an empty database with a clear refusal",
          "[cli][postgres]") {
    AMPBENCH_POSTGRES_ONLY(b);
    Role reader(b, "ampbench_reader");
    b.exec("REVOKE ALL ON DATABASE " + database_of(b.location()) + " FROM PUBLIC; "
           "REVOKE ALL ON SCHEMA public FROM PUBLIC; "
           "GRANT CONNECT ON DATABASE " + database_of(b.location()) + " TO " + reader.name() +
           "; GRANT USAGE ON SCHEMA public TO " + reader.name());
    const CliResult r = run_cli({"--db", reader.url(b.location()), "history", "PA1-2611-0042"});
    CHECK(r.code == 4);
    CHECK(r.out.empty());
    CHECK_THAT(r.err, Catch::Contains("has no ampbench tables and user " + reader.name() +
                                      " may not create them") &&
                          Catch::Contains("README"));
    CHECK(std::count(r.err.begin(), r.err.end(), '\n') == 1);
    CHECK(b.query("SELECT count(*) FROM pg_tables WHERE schemaname = 'public'") == "0");

    // Once the owner has created the tables, a role without rights on them is told which.
    REQUIRE(run_cli({"--db", b.location(), "boards"}).code == 0);
    const CliResult denied = run_cli({"--db", reader.url(b.location()), "boards"});
    CHECK(denied.code == 4);
    CHECK_THAT(denied.err, Catch::Contains("user " + reader.name() + " lacks a privilege") &&
                               Catch::Contains("permission denied") &&
                               Catch::Contains("README"));
}

TEST_CASE("resuming a session that a running sweep holds names the holding station",
          "[cli][postgres][sim]") {
    AMPBENCH_POSTGRES_ONLY(b);
    // The holder measures over TCP at wall-clock pace, so it is still running when asked.
    Process server({"simulate", "--design", sample("pa1.design.json"), "--bench",
                    sample("virtual.bench.json"), "--seed", "61", "--time-scale", "20"},
                   b.path("server.log"));
    std::string ready;
    for (int i = 0; i < 600 && ready.find("ready") == std::string::npos; ++i) {
        std::this_thread::sleep_for(std::chrono::milliseconds(100));
        ready = read_text(b.path("server.log"));
    }
    std::istringstream words(ready.substr(ready.find("ready")));
    std::string word;
    words >> word;
    REQUIRE(word == "ready");
    std::string text = read_text(sample("virtual.bench.json"));
    for (int port; words >> port;) {
        const size_t at = text.find("sim://?seed=2611");
        REQUIRE(at != std::string::npos);
        text.replace(at, std::string("sim://?seed=2611").size(),
                     "tcp://127.0.0.1:" + std::to_string(port));
    }
    write_text(b.path("tcp.bench.json"), text);
    Process holder(sweep_args(b.location(), b.path("tcp.bench.json"), "PA1-2611-0401"),
                   b.path("holder.log"));
    const auto give_up = std::chrono::steady_clock::now() + std::chrono::minutes(5);
    std::string points;
    while (std::chrono::steady_clock::now() < give_up) {
        try {
            points = b.query("SELECT count(*) FROM points");
        } catch (const std::exception&) {
            points = "";  // before the tables exist
        }
        if (!points.empty() && std::stol(points) >= 1) break;
        std::this_thread::sleep_for(std::chrono::milliseconds(100));
    }
    INFO(read_text(b.path("holder.log")));
    REQUIRE_FALSE(points.empty());
    REQUIRE(std::stol(points) >= 1);
    REQUIRE(b.query("SELECT status FROM sessions WHERE id = 1") == "running");

    write_bench(b.path("v.bench.json"), "sim://?seed=2611");
    const CliResult resumed = run_cli({"--db", b.location(), "sweep", "--bench",
                                       b.path("v.bench.json"), "--resume", "1", "--yes",
                                       "--no-progress"});
    CHECK(resumed.code == 4);
    CHECK_THAT(resumed.err, Catch::Contains("session 1 is held by station " + host_name() +
                                            " (pid " + std::to_string(holder.pid()) + ")"));
    // The holder is unharmed: still running, still its own.
    CHECK(b.query("SELECT pid FROM sessions WHERE id = 1") == std::to_string(holder.pid()));
    CHECK(b.query("SELECT status FROM sessions WHERE id = 1") == "running");
}
