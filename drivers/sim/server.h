// Serving a virtual bench: the generator, scope, meter and supply each on a TCP port (or a
// pseudo-terminal), answering line by line after each command's latency in scaled wall time.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "drivers/sim/virtual_bench.h"

namespace ampbench::sim {

struct ServeOptions {
    std::string host = "127.0.0.1";
    std::uint16_t port = 0;  // generator on port, scope port+1, meter port+2, supply port+3; 0: system-chosen
    bool pty = false;
    bool allow_remote = false;
    double time_scale = 1.0;  // virtual seconds per wall second (the bench's ScaledClock)
};

class BenchServer {
public:
    // Binds and listens at once (UsageError for a non-loopback host without allow_remote,
    // ConnectionError when a port cannot be bound).
    BenchServer(VirtualBench& bench, const ServeOptions& options);
    ~BenchServer();
    BenchServer(const BenchServer&) = delete;
    BenchServer& operator=(const BenchServer&) = delete;

    // "port" numbers (TCP) or device paths (pty), in the order generator, scope, meter, supply.
    std::vector<std::string> endpoints() const;
    // Serves until `stop()` returns true (polled every 50 ms).
    void run(const std::function<bool()>& stop);

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

}  // namespace ampbench::sim
