// Scripted peers on POSIX sockets and ptys (no Asio here, so the test code is independent of
// the transports it tests).
#include "peer_support.h"

#include <cerrno>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <stdexcept>

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <unistd.h>

extern char** environ;

namespace ampbench::test {
namespace {

void send_all(int fd, const std::string& bytes, size_t chunk) {
    size_t off = 0;
    while (off < bytes.size()) {
        const size_t n = chunk == 0 ? bytes.size() - off : std::min(chunk, bytes.size() - off);
        const ssize_t w = ::write(fd, bytes.data() + off, n);
        if (w < 0) {
            if (errno == EAGAIN || errno == EINTR) {
                ::usleep(200);
                continue;
            }
            return;
        }
        off += static_cast<size_t>(w);
        if (chunk != 0) ::usleep(1000);
    }
}

std::string trim_line(std::string s) {
    while (!s.empty() && (s.back() == '\r' || s.back() == '\n')) s.pop_back();
    return s;
}

}  // namespace

void serve_fd(int fd, const PeerHandler& handler, const std::atomic<bool>& stop) {
    std::string buffer;
    char chunk[4096];
    while (!stop) {
        pollfd p{fd, POLLIN, 0};
        const int rc = ::poll(&p, 1, 20);
        if (rc <= 0) continue;
        const ssize_t n = ::read(fd, chunk, sizeof chunk);
        if (n <= 0) {
            if (n < 0 && (errno == EAGAIN || errno == EINTR)) continue;
            return;
        }
        buffer.append(chunk, static_cast<size_t>(n));
        size_t pos;
        while ((pos = buffer.find('\n')) != std::string::npos) {
            const std::string line = trim_line(buffer.substr(0, pos));
            buffer.erase(0, pos + 1);
            const PeerAction a = handler(line);
            if (a.stall) continue;
            send_all(fd, a.reply, a.chunk);
            if (a.close_after) return;
        }
    }
}

TcpPeer::TcpPeer(PeerHandler handler) {
    listen_fd_ = ::socket(AF_INET, SOCK_STREAM, 0);
    int one = 1;
    ::setsockopt(listen_fd_, SOL_SOCKET, SO_REUSEADDR, &one, sizeof one);
    sockaddr_in addr{};
    addr.sin_family = AF_INET;
    addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    addr.sin_port = 0;  // system-chosen, so parallel tests never collide
    if (::bind(listen_fd_, reinterpret_cast<sockaddr*>(&addr), sizeof addr) != 0 || ::listen(listen_fd_, 4) != 0)
        throw std::runtime_error("test peer: cannot listen");
    socklen_t len = sizeof addr;
    ::getsockname(listen_fd_, reinterpret_cast<sockaddr*>(&addr), &len);
    port_ = ntohs(addr.sin_port);
    thread_ = std::thread([this, handler = std::move(handler)] {
        while (!stop_) {
            pollfd p{listen_fd_, POLLIN, 0};
            if (::poll(&p, 1, 20) <= 0) continue;
            const int fd = ::accept(listen_fd_, nullptr, nullptr);
            if (fd < 0) continue;
            serve_fd(fd, handler, stop_);
            ::close(fd);
        }
    });
}

TcpPeer::~TcpPeer() {
    stop_ = true;
    thread_.join();
    ::close(listen_fd_);
}

PtyPair::PtyPair() {
    char tmpl[] = "/tmp/ampbench-pty-XXXXXX";
    if (!::mkdtemp(tmpl)) throw std::runtime_error("pty pair: mkdtemp failed");
    dir_ = tmpl;
    a_ = dir_ + "/A";
    b_ = dir_ + "/B";
    const std::string pa = "pty,raw,echo=0,link=" + a_;
    const std::string pb = "pty,raw,echo=0,link=" + b_;
    std::vector<std::string> args{"socat", "pty,raw,echo=0,link=" + a_, "pty,raw,echo=0,link=" + b_};
    std::vector<char*> argv;
    for (auto& s : args) argv.push_back(s.data());
    argv.push_back(nullptr);
    pid_t pid = 0;
    if (::posix_spawnp(&pid, "socat", nullptr, nullptr, argv.data(), environ) != 0)
        throw std::runtime_error("pty pair: cannot start socat");
    pid_ = pid;
    for (int i = 0; i < 500; ++i) {
        if (std::filesystem::exists(a_) && std::filesystem::exists(b_)) return;
        ::usleep(10000);
    }
    throw std::runtime_error("pty pair: socat did not create the links");
}

PtyPair::~PtyPair() {
    stop_ = true;
    if (thread_.joinable()) thread_.join();
    if (peer_fd_ >= 0) ::close(peer_fd_);
    if (pid_ > 0) {
        ::kill(pid_, SIGTERM);
        ::waitpid(pid_, nullptr, 0);
    }
    std::error_code ec;
    std::filesystem::remove_all(dir_, ec);
}

void PtyPair::serve(PeerHandler handler) {
    peer_fd_ = ::open(b_.c_str(), O_RDWR | O_NOCTTY);
    if (peer_fd_ < 0) throw std::runtime_error("pty pair: cannot open the peer side");
    thread_ = std::thread([this, handler = std::move(handler)] { serve_fd(peer_fd_, handler, stop_); });
}

ModelInstrument::ModelInstrument(std::string name, std::shared_ptr<std::vector<std::string>> log,
                                 std::shared_ptr<std::mutex> log_mutex)
    : name_(std::move(name)), log_(std::move(log)), mutex_(std::move(log_mutex)) {}

void ModelInstrument::set(const std::string& header, const std::string& value) { values_[header] = value; }

PeerAction ModelInstrument::operator()(const std::string& line) {
    {
        std::lock_guard lock(*mutex_);
        log_->push_back(name_ + ": " + line);
    }
    if (line == "*IDN?") return {identity + "\n"};
    if (line == "*OPC?") return {"1\n"};
    if (line == "*CLS") {
        errors_.clear();
        return {};
    }
    if (line == "SYSTem:ERRor?") {
        if (errors_.empty()) return {"0,\"No error\"\n"};
        const std::string e = errors_.front();
        errors_.erase(errors_.begin());
        return {e + "\n"};
    }
    if (!line.empty() && line.back() == '?') {
        const std::string header = line.substr(0, line.size() - 1);
        if (auto o = overrides.find(header); o != overrides.end()) return {o->second + "\n"};
        if (auto v = values_.find(header); v != values_.end()) {
            std::string value = v->second;
            if (value == "ON") value = "1";
            if (value == "OFF") value = "0";
            return {value + "\n"};
        }
        errors_.push_back("-113,\"Undefined header\"");
        return {"\n"};
    }
    const auto space = line.find(' ');
    if (space == std::string::npos) values_[line] = "1";
    else values_[line.substr(0, space)] = line.substr(space + 1);
    return {};
}

std::vector<std::string> commands_of(const std::vector<std::string>& log, const std::string& name) {
    std::vector<std::string> out;
    const std::string prefix = name + ": ";
    for (const auto& entry : log)
        if (entry.rfind(prefix, 0) == 0) out.push_back(entry.substr(prefix.size()));
    return out;
}

std::string write_temp_file(const std::string& name, const std::string& text) {
    static const std::string dir = [] {
        char tmpl[] = "/tmp/ampbench-test-XXXXXX";
        return std::string(::mkdtemp(tmpl));
    }();
    const std::string path = dir + "/" + name;
    std::ofstream(path) << text;
    return path;
}

}  // namespace ampbench::test
