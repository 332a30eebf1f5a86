// Raw SCPI socket (`tcp://host[:port]`, port 5025 by default) on Boost.Asio, with a connect
// timeout, TCP keep-alive and reopen() after a drop.
#pragma once

#include <cstdint>
#include <memory>
#include <string>

#include "drivers/transport/stream_transport.h"

namespace ampbench::drivers {

class TcpTransport final : public StreamTransport {
public:
    // Connects; ConnectionError (refused, unreachable) or TimeoutError by the deadline.
    TcpTransport(std::string host, uint16_t port, Deadline connect_deadline);
    ~TcpTransport() override;

    void write(std::string_view bytes, Deadline deadline) override;
    void close() override;
    void reopen(Deadline deadline) override;
    std::string describe() const override;

protected:
    void read_some(std::string& out, Deadline deadline, bool& eom) override;
    void discard_pending() override;

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

}  // namespace ampbench::drivers
