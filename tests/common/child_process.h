// A child process for tests that run programs as a user would (the ampbench executable, or a
// tool): stdout to a pipe or a file, stderr to a file, stdin from /dev/null; SIGKILLed and
// reaped by the destructor if the test left it running.
#pragma once

#include <sys/types.h>

#include <string>
#include <utility>
#include <vector>

namespace ampbench::testing {

struct ChildOutput {
    std::string stdout_path;        // empty: a pipe, read with read_line()
    std::string stderr_path;        // empty: /dev/null
    bool stdout_to_stderr = false;  // stdout into the stderr file (stdout_path ignored)
    std::vector<std::string> env;   // "NAME=VALUE" set in the child on top of this environment

    ChildOutput(std::string out = {}, std::string err = {}, bool out_to_err = false, std::vector<std::string> extra_env = {})
        : stdout_path(std::move(out)), stderr_path(std::move(err)), stdout_to_stderr(out_to_err), env(std::move(extra_env)) {}
};

class ChildProcess {
public:
    // argv[0] is the program's path. std::runtime_error when it cannot be started.
    ChildProcess(const std::vector<std::string>& argv, const ChildOutput& output);
    ~ChildProcess();
    ChildProcess(const ChildProcess&) = delete;
    ChildProcess& operator=(const ChildProcess&) = delete;

    // The next stdout line, or "" after `timeout_s` or at end of output (the sanitized build
    // starts slowly, hence the long default).
    std::string read_line(double timeout_s = 120.0);
    // The ports of `ampbench simulate`'s "ready P1 P2 ..." line; empty when it did not come.
    std::vector<int> ready_ports(double timeout_s = 120.0);
    bool running();
    void kill9();
    // Waits for the exit (SIGTERM first when `terminate`): the exit status (128 + signal for a
    // signal), or −1 when it has not ended within timeout_s.
    int wait(double timeout_s, bool terminate = false);
    pid_t pid() const { return pid_; }

private:
    pid_t pid_ = -1;
    int out_fd_ = -1;
};

// The ampbench executable under test with `args` after it.
std::vector<std::string> ampbench_argv(const std::vector<std::string>& args);

}  // namespace ampbench::testing
