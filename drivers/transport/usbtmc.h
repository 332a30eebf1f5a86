// USBTMC through the Linux `usbtmc` character device: each write() is one device-dependent
// message and each read() returns at most one message, so a short read marks its end.
#pragma once

#include <string>

#include "drivers/transport/stream_transport.h"

namespace ampbench::drivers {

class UsbtmcTransport final : public StreamTransport {
public:
    explicit UsbtmcTransport(std::string device);
    ~UsbtmcTransport() override;
    UsbtmcTransport(const UsbtmcTransport&) = delete;
    UsbtmcTransport& operator=(const UsbtmcTransport&) = delete;

    void write(std::string_view bytes, Deadline deadline) override;
    bool has_end_of_message() const override { return true; }
    void close() override;
    void reopen(Deadline deadline) override;
    std::string describe() const override { return "usbtmc://" + device_; }

    // Bytes asked for by each read(); a read returning fewer ends the message.
    static constexpr size_t kReadSize = 4096;

protected:
    void read_some(std::string& out, Deadline deadline, bool& eom) override;
    void discard_pending() override;

private:
    void open();
    // poll() for `events` until the deadline; TimeoutError after.
    void wait_for(short events, Deadline deadline, const char* what);
    std::string device_;
    int fd_ = -1;
};

}  // namespace ampbench::drivers
