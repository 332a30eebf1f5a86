// Serial transport: asynchronous Asio reads and writes bounded by the deadline.
#include "drivers/transport/serial.h"

#include <array>

#include <termios.h>

#include <utility>  // Boost 1.74 Asio uses std::exchange without including it

#include <boost/asio.hpp>
#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {

namespace asio = boost::asio;

struct SerialTransport::Impl {
    std::string device;
    SerialSettings settings;
    asio::io_context io;
    asio::serial_port port{io};

    std::string name() const { return "serial://" + device; }

    void open() {
        boost::system::error_code ec;
        port.open(device, ec);
        if (ec) throw ConnectionError(fmt::format("{}: cannot open: {}", name(), ec.message()));
        using sp = asio::serial_port_base;
        const auto parity = settings.parity == "even" ? sp::parity::even
                            : settings.parity == "odd" ? sp::parity::odd
                                                       : sp::parity::none;
        const auto stop = settings.stop_bits == "2"     ? sp::stop_bits::two
                          : settings.stop_bits == "1.5" ? sp::stop_bits::onepointfive
                                                        : sp::stop_bits::one;
        const auto flow = settings.flow == "hardware"   ? sp::flow_control::hardware
                          : settings.flow == "software" ? sp::flow_control::software
                                                        : sp::flow_control::none;
        port.set_option(sp::baud_rate(settings.baud), ec);
        if (!ec) port.set_option(sp::character_size(settings.data_bits), ec);
        if (!ec) port.set_option(sp::parity(parity), ec);
        // 1.5 stop bits is not settable on Linux; such lines run at 2, which a receiver accepts.
        if (!ec) port.set_option(sp::stop_bits(stop == sp::stop_bits::onepointfive ? sp::stop_bits::two : stop), ec);
        if (!ec) port.set_option(sp::flow_control(flow), ec);
        if (ec) {
            port.close(ec);
            throw ConnectionError(fmt::format("{}: cannot configure the line: {}", name(), ec.message()));
        }
    }

    void run(Deadline deadline, const char* what) {
        io.restart();
        io.run_until(deadline);
        if (!io.stopped()) {
            boost::system::error_code ignored;
            port.cancel(ignored);
            io.restart();
            io.run();
            throw TimeoutError(fmt::format("{}: timeout while {}", name(), what));
        }
    }
};

SerialTransport::SerialTransport(std::string device, SerialSettings settings)
    : impl_(std::make_unique<Impl>()) {
    impl_->device = std::move(device);
    impl_->settings = std::move(settings);
    impl_->open();
}

SerialTransport::~SerialTransport() = default;

std::string SerialTransport::describe() const { return impl_->name(); }

void SerialTransport::write(std::string_view bytes, Deadline deadline) {
    if (!impl_->port.is_open()) throw ConnectionError(impl_->name() + ": not open");
    boost::system::error_code ec;
    asio::async_write(impl_->port, asio::buffer(bytes.data(), bytes.size()),
                      [&](const boost::system::error_code& e, size_t) { ec = e; });
    impl_->run(deadline, "sending");
    if (ec) throw ConnectionError(fmt::format("{}: send failed: {}", impl_->name(), ec.message()));
}

void SerialTransport::read_some(std::string& out, Deadline deadline, bool& eom) {
    eom = false;
    if (!impl_->port.is_open()) throw ConnectionError(impl_->name() + ": not open");
    std::array<char, 4096> chunk{};
    boost::system::error_code ec;
    size_t got = 0;
    impl_->port.async_read_some(asio::buffer(chunk), [&](const boost::system::error_code& e, size_t n) {
        ec = e;
        got = n;
    });
    impl_->run(deadline, "waiting for a reply");
    out.append(chunk.data(), got);
    if (ec && got == 0) {
        // A pseudo-terminal whose other side closed reads EIO; a USB adapter pulled out, the same.
        throw ConnectionError(fmt::format("{}: line closed: {}", impl_->name(), ec.message()));
    }
}

void SerialTransport::discard_pending() {
    if (impl_->port.is_open()) ::tcflush(impl_->port.native_handle(), TCIFLUSH);
}

void SerialTransport::close() {
    boost::system::error_code ec;
    impl_->port.close(ec);
}

void SerialTransport::reopen(Deadline) {
    close();
    reset_buffer();
    impl_->open();
}

}  // namespace ampbench::drivers
