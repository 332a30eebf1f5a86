// USBTMC transport on POSIX open/poll/read/write, one check() per call.
#include "drivers/transport/usbtmc.h"

#include <array>
#include <cerrno>
#include <cstring>

#include <fcntl.h>
#include <poll.h>
#include <unistd.h>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {

UsbtmcTransport::UsbtmcTransport(std::string device) : device_(std::move(device)) { open(); }

UsbtmcTransport::~UsbtmcTransport() { close(); }

void UsbtmcTransport::open() {
    fd_ = ::open(device_.c_str(), O_RDWR | O_NOCTTY | O_NONBLOCK | O_CLOEXEC);
    if (fd_ < 0) throw ConnectionError(fmt::format("{}: cannot open: {}", describe(), std::strerror(errno)));
}

void UsbtmcTransport::close() {
    if (fd_ >= 0) ::close(fd_);
    fd_ = -1;
}

void UsbtmcTransport::reopen(Deadline) {
    close();
    reset_buffer();
    open();
}

void UsbtmcTransport::wait_for(short events, Deadline deadline, const char* what) {
    for (;;) {
        pollfd p{fd_, events, 0};
        const int rc = ::poll(&p, 1, static_cast<int>(ms_left(deadline) + 0.999));
        if (rc > 0) {
            if ((p.revents & events) != 0) return;
            if ((p.revents & (POLLHUP | POLLERR | POLLNVAL)) != 0)
                throw ConnectionError(fmt::format("{}: device closed", describe()));
        }
        if (rc < 0 && errno != EINTR)
            throw ConnectionError(fmt::format("{}: poll failed: {}", describe(), std::strerror(errno)));
        if (rc == 0 && ms_left(deadline) <= 0.0)
            throw TimeoutError(fmt::format("{}: timeout while {}", describe(), what));
    }
}

void UsbtmcTransport::write(std::string_view bytes, Deadline deadline) {
    if (fd_ < 0) throw ConnectionError(describe() + ": not open");
    while (!bytes.empty()) {
        wait_for(POLLOUT, deadline, "sending");
        const ssize_t n = ::write(fd_, bytes.data(), bytes.size());
        if (n < 0) {
            if (errno == EAGAIN || errno == EINTR) continue;
            throw ConnectionError(fmt::format("{}: send failed: {}", describe(), std::strerror(errno)));
        }
        bytes.remove_prefix(static_cast<size_t>(n));
    }
}

void UsbtmcTransport::read_some(std::string& out, Deadline deadline, bool& eom) {
    if (fd_ < 0) throw ConnectionError(describe() + ": not open");
    std::array<char, kReadSize> chunk{};
    for (;;) {
        wait_for(POLLIN, deadline, "waiting for a reply");
        const ssize_t n = ::read(fd_, chunk.data(), chunk.size());
        if (n > 0) {
            out.append(chunk.data(), static_cast<size_t>(n));
            eom = static_cast<size_t>(n) < chunk.size();
            return;
        }
        if (n == 0) throw ConnectionError(fmt::format("{}: device closed", describe()));
        if (errno == EAGAIN || errno == EINTR) continue;
        throw ConnectionError(fmt::format("{}: read failed: {}", describe(), std::strerror(errno)));
    }
}

void UsbtmcTransport::discard_pending() {
    if (fd_ < 0) return;
    std::array<char, kReadSize> chunk{};
    while (::read(fd_, chunk.data(), chunk.size()) > 0) {
    }
}

}  // namespace ampbench::drivers
