// The byte pipe every instrument sits behind (TCP, serial, USBTMC, or an in-process virtual
// bench). Every blocking call takes a deadline: a stalled peer is a TimeoutError, a dropped one a
// ConnectionError, never a hang.
#pragma once

#include <chrono>
#include <cstddef>
#include <string>
#include <string_view>

namespace ampbench::drivers {

using Deadline = std::chrono::steady_clock::time_point;

// The deadline `seconds` from now.
Deadline deadline_after_s(double seconds);
// Milliseconds left until `deadline` (0 when already past).
double ms_left(Deadline deadline);

class Transport {
public:
    virtual ~Transport() = default;

    // Sends all of `bytes` (one message on transports that have messages).
    virtual void write(std::string_view bytes, Deadline deadline) = 0;
    // Reads up to and including `terminator`; ConnectionError if more than max_bytes arrive
    // without one (a peer spewing garbage is not allowed to fill memory).
    virtual std::string read_until(std::string_view terminator, Deadline deadline,
                                   size_t max_bytes = 1 << 20) = 0;
    // Reads exactly n bytes.
    virtual std::string read_exact(size_t n, Deadline deadline) = 0;
    // True when the transport marks the end of each reply (USBTMC EOM), so an indefinite block
    // can be read to the end of the message instead of to a terminator.
    virtual bool has_end_of_message() const { return false; }
    // Reads the rest of the current message; only where has_end_of_message().
    virtual std::string read_to_end_of_message(Deadline deadline, size_t max_bytes);
    // Discards anything buffered or waiting to be read (after a timeout, before a new exchange).
    virtual void clear() = 0;
    virtual void close() = 0;
    // Opens the connection again after a drop; ConnectionError where that is not possible.
    virtual void reopen(Deadline deadline);
    // A short name for messages and traces ("tcp://192.0.2.10:5025").
    virtual std::string describe() const = 0;
};

}  // namespace ampbench::drivers
