// ChildProcess: posix_spawn with redirections, a polled line reader and a bounded wait.
#include "common/child_process.h"

#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstring>
#include <sstream>
#include <stdexcept>
#include <thread>

extern char** environ;

namespace ampbench::testing {

ChildProcess::ChildProcess(const std::vector<std::string>& args, const ChildOutput& output) {
    std::vector<std::string> a = args;
    std::vector<char*> argv;
    for (auto& s : a) argv.push_back(s.data());
    argv.push_back(nullptr);
    int fds[2] = {-1, -1};
    posix_spawn_file_actions_t actions;
    posix_spawn_file_actions_init(&actions);
    const char* err = output.stderr_path.empty() ? "/dev/null" : output.stderr_path.c_str();
    posix_spawn_file_actions_addopen(&actions, STDERR_FILENO, err, O_WRONLY | O_CREAT | O_TRUNC, 0644);
    if (output.stdout_to_stderr) {
        posix_spawn_file_actions_adddup2(&actions, STDERR_FILENO, STDOUT_FILENO);
    } else if (output.stdout_path.empty()) {
        if (::pipe(fds) != 0) throw std::runtime_error(std::string("pipe: ") + std::strerror(errno));
        posix_spawn_file_actions_adddup2(&actions, fds[1], STDOUT_FILENO);
        posix_spawn_file_actions_addclose(&actions, fds[0]);
    } else {
        posix_spawn_file_actions_addopen(&actions, STDOUT_FILENO, output.stdout_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    }
    posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
    // This process's environment with output.env laid over it.
    std::vector<std::string> env_text;
    for (char** e = environ; *e; ++e) {
        const std::string entry = *e;
        const std::string name = entry.substr(0, entry.find('='));
        bool replaced = false;
        for (const std::string& extra : output.env) replaced = replaced || extra.substr(0, extra.find('=')) == name;
        if (!replaced) env_text.push_back(entry);
    }
    env_text.insert(env_text.end(), output.env.begin(), output.env.end());
    std::vector<char*> envp;
    for (auto& e : env_text) envp.push_back(e.data());
    envp.push_back(nullptr);
    const int rc = ::posix_spawn(&pid_, argv[0], &actions, nullptr, argv.data(), envp.data());
    posix_spawn_file_actions_destroy(&actions);
    if (fds[1] >= 0) ::close(fds[1]);
    out_fd_ = fds[0];
    if (rc != 0) {
        pid_ = -1;
        throw std::runtime_error("cannot start " + args.at(0) + ": " + std::strerror(rc));
    }
}

ChildProcess::~ChildProcess() {
    if (pid_ > 0) kill9();
    if (out_fd_ >= 0) ::close(out_fd_);
}

std::string ChildProcess::read_line(double timeout_s) {
    std::string line;
    if (out_fd_ < 0) return line;
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::duration<double>(timeout_s);
    while (std::chrono::steady_clock::now() < deadline) {
        pollfd p{out_fd_, POLLIN, 0};
        if (::poll(&p, 1, 200) <= 0) continue;
        char c;
        if (::read(out_fd_, &c, 1) != 1) break;
        if (c == '\n') return line;
        line += c;
    }
    return "";
}

std::vector<int> ChildProcess::ready_ports(double timeout_s) {
    std::istringstream in(read_line(timeout_s));
    std::string word;
    in >> word;
    if (word != "ready") return {};
    std::vector<int> ports;
    for (int p; in >> p;) ports.push_back(p);
    return ports;
}

bool ChildProcess::running() {
    if (pid_ <= 0) return false;
    int status = 0;
    if (::waitpid(pid_, &status, WNOHANG) == pid_) {
        pid_ = -1;
        return false;
    }
    return true;
}

void ChildProcess::kill9() {
    if (pid_ <= 0) return;
    ::kill(pid_, SIGKILL);
    ::waitpid(pid_, nullptr, 0);
    pid_ = -1;
}

int ChildProcess::wait(double timeout_s, bool terminate) {
    if (pid_ <= 0) return -1;
    if (terminate) ::kill(pid_, SIGTERM);
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::duration<double>(timeout_s);
    while (std::chrono::steady_clock::now() < deadline) {
        int status = 0;
        if (::waitpid(pid_, &status, WNOHANG) == pid_) {
            pid_ = -1;
            return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
        }
        std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
    return -1;
}

std::vector<std::string> ampbench_argv(const std::vector<std::string>& args) {
    std::vector<std::string> a{AMPBENCH_EXE};
    a.insert(a.end(), args.begin(), args.end());
    return a;
}

}  // namespace ampbench::testing
