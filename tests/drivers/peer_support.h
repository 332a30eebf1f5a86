// Scripted SCPI peers for driver and CLI tests: a real loopback TCP server (port 0, so tests
// run in parallel), a socat pseudo-terminal pair, and a small instrument model that records
// every command it is sent.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <thread>
#include <vector>

namespace ampbench::test {

// What the peer does with one received line.
struct PeerAction {
    std::string reply;        // bytes to send back (include the terminator)
    size_t chunk = 0;         // send in chunks of this many bytes (0 = at once), 1 ms apart
    bool close_after = false; // close the connection after sending the reply
    bool stall = false;       // send nothing
};

using PeerHandler = std::function<PeerAction(const std::string& line)>;

// Reads lines from `fd` and answers them until the fd closes or `stop` is set.
void serve_fd(int fd, const PeerHandler& handler, const std::atomic<bool>& stop);

class TcpPeer {
public:
    explicit TcpPeer(PeerHandler handler);
    ~TcpPeer();
    uint16_t port() const { return port_; }
    std::string uri() const { return "tcp://127.0.0.1:" + std::to_string(port_); }

private:
    int listen_fd_ = -1;
    uint16_t port_ = 0;
    std::atomic<bool> stop_{false};
    std::thread thread_;
};

// socat pty pair: the code under test opens device_a(); the peer serves device_b().
class PtyPair {
public:
    PtyPair();
    ~PtyPair();
    const std::string& device_a() const { return a_; }
    const std::string& device_b() const { return b_; }
    // Starts a peer thread on device_b.
    void serve(PeerHandler handler);

private:
    std::string dir_, a_, b_;
    int pid_ = -1;
    int peer_fd_ = -1;
    std::atomic<bool> stop_{false};
    std::thread thread_;
};

// A tiny SCPI instrument: "X val" stores val under X, "X?" answers it; *IDN?, *OPC?, *CLS and
// SYSTem:ERRor? behave per IEEE 488.2 / SCPI-1999; unknown queries push -113 onto the queue.
// Every command is recorded in the shared log as "<name>: <command>".
class ModelInstrument {
public:
    ModelInstrument(std::string name, std::shared_ptr<std::vector<std::string>> log,
                    std::shared_ptr<std::mutex> log_mutex);
    PeerAction operator()(const std::string& line);
    void set(const std::string& header, const std::string& value);
    std::string identity = "Harrow Vale Electronics,Test Rig TR-1,PA1-2611-0042,1.0";
    // Value answered instead of the stored one (an instrument that rounds or misbehaves).
    std::map<std::string, std::string> overrides;

private:
    std::string name_;
    std::shared_ptr<std::vector<std::string>> log_;
    std::shared_ptr<std::mutex> mutex_;
    std::map<std::string, std::string> values_;
    std::vector<std::string> errors_;
};

// The commands a log holds, in order, for one instrument name.
std::vector<std::string> commands_of(const std::vector<std::string>& log, const std::string& name);

// Writes `text` to a fresh file in a per-test temporary directory; returns its path.
std::string write_temp_file(const std::string& name, const std::string& text);

}  // namespace ampbench::test
