// A Transport over a byte stream: keeps the read buffer and implements read_until/read_exact
// once, so each concrete transport only moves bytes (TCP, serial, USBTMC).
#pragma once

#include <string>

#include "drivers/transport/transport.h"

namespace ampbench::drivers {

class StreamTransport : public Transport {
public:
    std::string read_until(std::string_view terminator, Deadline deadline,
                           size_t max_bytes = 1 << 20) override;
    std::string read_exact(size_t n, Deadline deadline) override;
    std::string read_to_end_of_message(Deadline deadline, size_t max_bytes) override;
    void clear() override;

protected:
    // Appends at least one byte to `out` or throws TimeoutError / ConnectionError. `eom` is set
    // when the transport knows the message ended with these bytes.
    virtual void read_some(std::string& out, Deadline deadline, bool& eom) = 0;
    // Drops bytes the device has already sent but nobody read.
    virtual void discard_pending() = 0;
    void reset_buffer() { buffer_.clear(); eom_ = false; }

private:
    std::string buffer_;
    bool eom_ = false;  // the buffered bytes end a message
};

}  // namespace ampbench::drivers
