// Buffered reads shared by the stream transports, and the Transport defaults.
#include "drivers/transport/stream_transport.h"

#include <algorithm>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {

Deadline deadline_after_s(double seconds) {
    const auto ns = std::chrono::nanoseconds(static_cast<long long>(std::max(0.0, seconds) * 1e9));
    return std::chrono::steady_clock::now() + ns;
}

double ms_left(Deadline deadline) {
    const auto left = deadline - std::chrono::steady_clock::now();
    return std::max(0.0, std::chrono::duration<double, std::milli>(left).count());
}

std::string Transport::read_to_end_of_message(Deadline, size_t) {
    throw ConnectionError(describe() + ": this transport has no end-of-message marker");
}

void Transport::reopen(Deadline) {
    throw ConnectionError(describe() + ": cannot be reopened");
}

std::string StreamTransport::read_until(std::string_view terminator, Deadline deadline,
                                        size_t max_bytes) {
    size_t searched = 0;
    for (;;) {
        const size_t from = searched >= terminator.size() ? searched - terminator.size() + 1 : 0;
        if (const auto pos = buffer_.find(terminator, from); pos != std::string::npos) {
            std::string line = buffer_.substr(0, pos + terminator.size());
            buffer_.erase(0, pos + terminator.size());
            if (buffer_.empty()) eom_ = false;
            return line;
        }
        searched = buffer_.size();
        if (buffer_.size() > max_bytes)
            throw ConnectionError(fmt::format("{}: more than {} bytes without a terminator",
                                              describe(), max_bytes));
        bool eom = false;
        read_some(buffer_, deadline, eom);
        eom_ = eom;
    }
}

std::string StreamTransport::read_exact(size_t n, Deadline deadline) {
    while (buffer_.size() < n) {
        bool eom = false;
        read_some(buffer_, deadline, eom);
        eom_ = eom;
    }
    std::string out = buffer_.substr(0, n);
    buffer_.erase(0, n);
    if (buffer_.empty()) eom_ = false;
    return out;
}

std::string StreamTransport::read_to_end_of_message(Deadline deadline, size_t max_bytes) {
    if (!has_end_of_message()) return Transport::read_to_end_of_message(deadline, max_bytes);
    while (!eom_) {
        if (buffer_.size() > max_bytes)
            throw ConnectionError(fmt::format("{}: message longer than {} bytes", describe(),
                                              max_bytes));
        bool eom = false;
        read_some(buffer_, deadline, eom);
        eom_ = eom;
    }
    std::string out;
    out.swap(buffer_);
    eom_ = false;
    return out;
}

void StreamTransport::clear() {
    reset_buffer();
    discard_pending();
}

}  // namespace ampbench::drivers
