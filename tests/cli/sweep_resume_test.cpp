// A sweep killed with SIGKILL part way, then `ampbench off` and `sweep --resume`, run as a user
// would: the ampbench executable as a child process measuring `ampbench simulate` over TCP (so
// `off` has real outputs to switch off), the archive read with the sqlite3 shell. Every planned
// frequency ends with exactly one current reading.
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <ctime>
#include <string>
#include <sstream>
#include <thread>
#include <vector>

#include <catch2/catch.hpp>

#include "cli_support.h"
#include "common/child_process.h"


using namespace ampbench::cli::testing;

namespace {

long sql_long(const std::string& db, const std::string& query) {
    const std::string v = sqlite3_value(db, query);
    try {
        return v.empty() ? -1 : std::stol(v);
    } catch (const std::exception&) {
        return -1;
    }
}

}  // namespace

TEST_CASE("a sweep killed with SIGKILL resumes to exactly one current point per planned frequency", "[sweep][resume]") {
    REQUIRE(std::system("command -v sqlite3 > /dev/null 2>&1") == 0);
    CliTempDir dir;
    const std::string db = dir.db();
    // Built in two steps: GCC 12 warns falsely (-Warray-bounds) on `std::string(LITERAL) + "..."` at -O2.
    std::string sim_bench = AMPBENCH_SOURCE_DIR, design = AMPBENCH_SOURCE_DIR;
    sim_bench += "/sample_sessions/virtual.bench.json";
    design += "/sample_sessions/pa1.design.json";
    // The virtual bench served over TCP, 20 virtual seconds per wall second.
    ampbench::testing::ChildProcess server(
        ampbench::testing::ampbench_argv({"simulate", "--design", design, "--bench", sim_bench, "--seed", "51", "--time-scale", "20"}),
        {"", dir.path("server.log")});
    const std::vector<int> ports = server.ready_ports();
    REQUIRE(ports.size() == 4);
    std::string text = read_text(sim_bench);
    for (int port : ports) {
        const size_t at = text.find("sim://?seed=2611");
        REQUIRE(at != std::string::npos);
        text.replace(at, std::string("sim://?seed=2611").size(), "tcp://127.0.0.1:" + std::to_string(port));
    }
    REQUIRE(text.find("sim://") == std::string::npos);
    const std::string bench = dir.path("tcp.bench.json");
    write_text(bench, text);
    const std::vector<std::string> plan{"--per-decade", "4", "--from", "5", "--to", "150e3", "--tolerance-runs", "100"};

    long before_kill = 0;
    {
        std::vector<std::string> args{"--db", db, "sweep", "--bench", bench, "--design", design, "--board", "PA1-2611-0051", "--yes",
                                      "--no-progress"};
        args.insert(args.end(), plan.begin(), plan.end());
        ampbench::testing::ChildProcess sweep(ampbench::testing::ampbench_argv(args), {"", dir.path("first.log"), true});
        // Kill once a few points are committed: the archive says when, not a guess at the speed.
        const auto give_up = std::chrono::steady_clock::now() + std::chrono::minutes(10);
        long planned = 0;
        while (std::chrono::steady_clock::now() < give_up && sweep.running()) {
            before_kill = sql_long(db, "SELECT count(*) FROM points WHERE session_id = 1");
            planned = sql_long(db, "SELECT count(*) FROM plan_points WHERE session_id = 1");
            if (before_kill >= 4) break;
            std::this_thread::sleep_for(std::chrono::milliseconds(100));
        }
        INFO(read_text(dir.path("first.log")));
        REQUIRE(sweep.running());
        sweep.kill9();
        before_kill = sql_long(db, "SELECT count(*) FROM points WHERE session_id = 1");
        INFO("planned " << planned << ", measured " << before_kill << " before the kill");
        REQUIRE(before_kill >= 4);
        REQUIRE(before_kill < planned);  // killed in the middle, not after the last point
    }
    const std::string kept = sqlite3_value(db, "SELECT group_concat(id || ':' || plan_index, ',') FROM points WHERE session_id = 1 AND superseded_by IS NULL");
    CHECK(sqlite3_value(db, "SELECT status FROM sessions WHERE id = 1") == "running");

    // What a user runs after a crash.
    const CliResult off = run_cli({"off", bench});
    INFO(off.out << off.err);
    CHECK(off.code == 0);
    CHECK(off.out.find("supply output off") != std::string::npos);

    // The archive takes a session as abandoned once its heartbeat is 15 s old and its pid is gone.
    const long heartbeat = sql_long(db, "SELECT CAST(heartbeat_unix_s AS INTEGER) FROM sessions WHERE id = 1");
    REQUIRE(heartbeat > 0);
    while (static_cast<long>(std::time(nullptr)) < heartbeat + 17) std::this_thread::sleep_for(std::chrono::milliseconds(250));

    std::vector<std::string> args{"--db", db, "sweep", "--bench", bench, "--resume", "1", "--yes", "--no-progress"};
    args.insert(args.end(), plan.begin(), plan.end());
    const CliResult resumed = run_cli(args);
    INFO(resumed.out << resumed.err);
    REQUIRE(resumed.code == 0);
    CHECK(resumed.out.find("board PA1-2611-0051") != std::string::npos);

    CHECK(sqlite3_value(db, "SELECT status FROM sessions WHERE id = 1") == "complete");
    const long planned = sql_long(db, "SELECT count(*) FROM plan_points WHERE session_id = 1");
    INFO("planned " << planned);
    REQUIRE(planned > before_kill);
    // Every planned frequency has exactly one current point ...
    CHECK(sql_long(db, "SELECT count(*) FROM plan_points pp WHERE pp.session_id = 1 AND (SELECT count(*) FROM points p WHERE "
                       "p.session_id = 1 AND p.plan_index = pp.plan_index AND p.superseded_by IS NULL) <> 1") == 0);
    CHECK(sql_long(db, "SELECT count(*) FROM points WHERE session_id = 1 AND superseded_by IS NULL") == planned);
    // ... no frequency is planned twice, and every superseded reading is a retake of its own point.
    CHECK(sql_long(db, "SELECT count(*) - count(DISTINCT freq_hz) FROM plan_points WHERE session_id = 1") == 0);
    CHECK(sql_long(db, "SELECT count(*) FROM points p JOIN points q ON p.superseded_by = q.id WHERE p.session_id = 1 AND "
                       "p.plan_index <> q.plan_index") == 0);
    // The readings taken before the kill stand: resuming measured only what was missing.
    std::string ids;
    size_t kept_count = 0;
    for (size_t at = 0; at < kept.size(); ++kept_count) {
        const size_t colon = kept.find(':', at), comma = kept.find(',', at);
        ids += (ids.empty() ? "" : ",") + kept.substr(at, colon - at);
        at = comma == std::string::npos ? kept.size() : comma + 1;
    }
    REQUIRE(kept_count >= 3);
    CHECK(sql_long(db, "SELECT count(*) FROM points WHERE session_id = 1 AND superseded_by IS NULL AND id IN (" + ids + ")") ==
          static_cast<long>(kept_count));
}
