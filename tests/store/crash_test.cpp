// Acceptance 1 and 2 of the archive: a writer killed with SIGKILL at random moments loses no
// reading whose append had returned, and two processes writing at once both succeed.
#include <catch2/catch.hpp>

#include <poll.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <map>
#include <set>
#include <sstream>

#include "core/errors.h"
#include "core/random.h"
#include "store/archive.h"
#include "store_support.h"
#include "test_backend.h"

using namespace ampbench;
using namespace ampbench::store;

namespace {

void say(int fd, const std::string& line) {
    const std::string text = line + "\n";
    // Lines are far below PIPE_BUF, so each write is atomic.
    if (::write(fd, text.data(), text.size()) != static_cast<ssize_t>(text.size())) ::_exit(9);
}

// The child: a sweep that reports each reading after its append has returned.
[[noreturn]] void sweep_child(const std::string& path, int fd, int plan_size) {
    try {
        auto archive = open_archive(path);
        NewSession ns;
        ns.board_serial = "PA1-2611-0042";
        const Session s = archive->begin_session(ns);
        archive->add_plan_points(s.id, testing::log_plan(plan_size));
        say(fd, "S " + std::to_string(s.id));
        for (int i = 0; i < plan_size; ++i) {
            archive->append_point(s.id, testing::reading(10.0 * (i + 1), 40.0, i));
            say(fd, "P " + std::to_string(i));
        }
        archive->finish_session(s.id, SessionStatus::complete);
        say(fd, "D");
    } catch (const std::exception& e) {
        say(fd, std::string("E ") + e.what());
        ::_exit(3);
    }
    ::_exit(0);
}

// Reads whole lines from fd until EOF or until `want` lines have arrived.
struct LineReader {
    int fd;
    std::string buffer;
    std::vector<std::string> lines;
    bool eof = false;

    void read_until(size_t want, int timeout_ms) {
        while (!eof && lines.size() < want) {
            pollfd p{fd, POLLIN, 0};
            const int ready = ::poll(&p, 1, timeout_ms);
            if (ready <= 0) throw std::runtime_error("the child went quiet");
            char chunk[512];
            const ssize_t n = ::read(fd, chunk, sizeof chunk);
            if (n <= 0) {
                eof = true;
                break;
            }
            buffer.append(chunk, static_cast<size_t>(n));
            size_t nl;
            while ((nl = buffer.find('\n')) != std::string::npos) {
                lines.push_back(buffer.substr(0, nl));
                buffer.erase(0, nl + 1);
            }
        }
    }
};

}  // namespace

TEST_CASE("a writer killed at random moments loses no committed reading", "[store][crash]") {
    AMPBENCH_EACH_BACKEND(b);
    const std::string path = b.location();
    open_archive(path);  // created before any child runs
    constexpr int rounds = 50;
    constexpr int plan_size = 16;
    Random rng(20261105);
    int interrupted = 0, completed = 0, before_session = 0;

    for (int round = 0; round < rounds; ++round) {
        int fds[2];
        REQUIRE(::pipe(fds) == 0);
        const pid_t child = ::fork();
        REQUIRE(child >= 0);
        if (child == 0) {
            ::close(fds[0]);
            sweep_child(path, fds[1], plan_size);
        }
        ::close(fds[1]);
        LineReader reader{fds[0], {}, {}, false};
        // Kill after a random number of reports (0 = while it opens), plus a random delay
        // of up to 3 ms so the kill also lands inside commits.
        const auto reports = static_cast<size_t>(rng.integer(0, plan_size + 1));
        reader.read_until(reports, 60000);
        ::usleep(static_cast<useconds_t>(rng.integer(0, 3000)));
        ::kill(child, SIGKILL);
        reader.read_until(static_cast<size_t>(plan_size + 2), 60000);  // whatever it said first
        ::close(fds[0]);
        int status = 0;
        REQUIRE(::waitpid(child, &status, 0) == child);
        // PostgreSQL: the killed client's server process goes (and frees its locks) shortly after.
        b.wait_for_other_connections_to_close();

        std::int64_t session_id = 0;
        std::set<std::int64_t> acknowledged;
        bool done = false;
        for (const auto& line : reader.lines) {
            INFO("child said: " << line);
            REQUIRE(line.rfind("E ", 0) != 0);
            if (line.rfind("S ", 0) == 0) session_id = std::stoll(line.substr(2));
            if (line.rfind("P ", 0) == 0) acknowledged.insert(std::stoll(line.substr(2)));
            if (line == "D") done = true;
        }
        if (b.sqlite()) REQUIRE(testing::integrity_check(path) == "ok");

        // The next open, past the stale allowance, finds the dead writer.
        ArchiveOptions later;
        const double now_s = testing::unix_now_s() + 60.0;
        later.clock_unix_s = [now_s] { return now_s; };
        auto archive = open_archive(path, later);
        if (session_id == 0) {
            ++before_session;
            continue;
        }
        const auto session = archive->session(session_id);
        REQUIRE(session);
        std::set<std::int64_t> stored;
        for (const auto& p : archive->current_points(session_id)) stored.insert(*p.plan_index);
        for (auto index : acknowledged) {
            INFO("round " << round << ", planned point " << index);
            CHECK(stored.count(index) == 1);
        }
        if (done) {
            CHECK(session->status == SessionStatus::complete);
            ++completed;
            continue;
        }
        if (session->status == SessionStatus::complete) {  // killed after the commit, before "D"
            CHECK(stored.size() == plan_size);
            ++completed;
            continue;
        }
        REQUIRE(session->status == SessionStatus::interrupted);
        ++interrupted;

        // Resume and complete: no duplicate and no missing planned point.
        const ResumeState state = archive->resume_session(session_id);
        REQUIRE(state.plan.size() == plan_size);
        std::set<std::int64_t> have;
        for (const auto& p : state.points) REQUIRE(have.insert(*p.plan_index).second);
        for (const auto& planned : state.plan)
            if (!have.count(planned.index))
                archive->append_point(session_id,
                                      testing::reading(planned.freq_hz, 40.0, planned.index));
        archive->finish_session(session_id, SessionStatus::complete);
        const auto final_points = archive->current_points(session_id);
        std::map<std::int64_t, int> per_index;
        for (const auto& p : final_points) ++per_index[*p.plan_index];
        CHECK(final_points.size() == plan_size);
        CHECK(per_index.size() == plan_size);
    }
    INFO("interrupted " << interrupted << ", completed " << completed << ", killed before the "
                        << "session existed " << before_session);
    CHECK(interrupted >= rounds / 2);  // the seed makes most kills land mid-sweep
    if (b.sqlite()) CHECK(testing::integrity_check(path) == "ok");
}

TEST_CASE("two processes write different sessions at once without SQLITE_BUSY",
          "[store][concurrency]") {
    AMPBENCH_EACH_BACKEND(b);
    const std::string path = b.location();
    open_archive(path);
    constexpr double run_s = 2.5;
    struct Writer {
        pid_t pid;
        int fd;
    };
    std::vector<Writer> writers;
    for (int w = 0; w < 2; ++w) {
        int fds[2];
        REQUIRE(::pipe(fds) == 0);
        const pid_t child = ::fork();
        REQUIRE(child >= 0);
        if (child == 0) {
            ::close(fds[0]);
            try {
                auto archive = open_archive(path);
                NewSession ns;
                ns.board_serial = w == 0 ? "PA1-2611-0100" : "SB3-2611-0200";
                const Session s = archive->begin_session(ns);
                say(fds[1], "S " + std::to_string(s.id));
                const auto start = std::chrono::steady_clock::now();
                long appended = 0;
                while (std::chrono::duration<double>(std::chrono::steady_clock::now() - start)
                           .count() < run_s) {
                    if (appended % 10 == 9) {  // now and then a batch, a longer transaction
                        std::vector<Point> batch(5, testing::reading(1000.0 + static_cast<double>(appended), 20.0));
                        archive->append_points(s.id, batch);
                        appended += 5;
                    } else {
                        archive->append_point(s.id, testing::reading(100.0 + static_cast<double>(appended), 20.0));
                        ++appended;
                    }
                    archive->history(ns.board_serial);  // a reader between writes
                }
                archive->finish_session(s.id, SessionStatus::complete);
                say(fds[1], "N " + std::to_string(appended));
            } catch (const std::exception& e) {
                say(fds[1], std::string("E ") + e.what());
                ::_exit(3);
            }
            ::_exit(0);
        }
        ::close(fds[1]);
        writers.push_back({child, fds[0]});
    }
    // The parent reads while they write.
    {
        auto reader = open_archive(path);
        const auto start = std::chrono::steady_clock::now();
        while (std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count() <
               run_s / 2)
            reader->boards();
    }
    auto archive = open_archive(path);
    for (auto& w : writers) {
        LineReader reader{w.fd, {}, {}, false};
        reader.read_until(100, 120000);
        ::close(w.fd);
        int status = 0;
        REQUIRE(::waitpid(w.pid, &status, 0) == w.pid);
        std::int64_t session_id = 0;
        long appended = -1;
        for (const auto& line : reader.lines) {
            INFO("writer said: " << line);
            CHECK(line.rfind("E ", 0) != 0);
            if (line.rfind("S ", 0) == 0) session_id = std::stoll(line.substr(2));
            if (line.rfind("N ", 0) == 0) appended = std::stol(line.substr(2));
        }
        CHECK(WIFEXITED(status));
        CHECK(WEXITSTATUS(status) == 0);
        REQUIRE(session_id > 0);
        REQUIRE(appended > 0);
        CHECK(archive->current_points(session_id).size() == static_cast<size_t>(appended));
        CHECK(archive->session(session_id)->status == SessionStatus::complete);
    }
    if (b.sqlite()) CHECK(testing::integrity_check(path) == "ok");
}
