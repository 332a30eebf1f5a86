// Serial line on Boost.Asio serial_port: any tty, pseudo-terminals included (libserialport is
// only used to find ports, see serial_ports.h).
#pragma once

#include <memory>
#include <string>

#include "drivers/transport/stream_transport.h"
#include "drivers/uri.h"

namespace ampbench::drivers {

class SerialTransport final : public StreamTransport {
public:
    // Opens and configures `device`; ConnectionError naming the device when that fails.
    SerialTransport(std::string device, SerialSettings settings);
    ~SerialTransport() override;

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
