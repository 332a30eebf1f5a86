// TCP transport: Asio asynchronous operations run against the deadline, the pattern of Asio's
// blocking-client-with-timeout example, so no call can block past its deadline.
#include "drivers/transport/tcp.h"

#include <array>

#include <utility>  // Boost 1.74 Asio uses std::exchange without including it

#include <boost/asio.hpp>
#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {

namespace asio = boost::asio;
using asio::ip::tcp;

struct TcpTransport::Impl {
    std::string host;
    uint16_t port = 0;
    asio::io_context io;
    tcp::socket socket{io};

    std::string name() const { return fmt::format("tcp://{}:{}", host, port); }

    // Runs the queued operation until it completes or the deadline passes; on timeout cancels
    // it (the connection stays usable) and throws.
    void run(Deadline deadline, const char* what) {
        io.restart();
        io.run_until(deadline);
        if (!io.stopped()) {
            boost::system::error_code ignored;
            socket.cancel(ignored);
            io.restart();
            io.run();
            throw TimeoutError(fmt::format("{}: timeout while {}", name(), what));
        }
    }

    void connect(Deadline deadline) {
        const double budget_ms = ms_left(deadline);
        boost::system::error_code ec;
        tcp::resolver resolver(io);
        tcp::resolver::results_type endpoints;
        bool resolved = false;
        resolver.async_resolve(host, std::to_string(port),
                               [&](const boost::system::error_code& e, tcp::resolver::results_type r) {
                                   ec = e;
                                   endpoints = std::move(r);
                                   resolved = true;
                               });
        io.restart();
        io.run_until(deadline);
        if (!resolved) {
            resolver.cancel();
            io.restart();
            io.run();
            throw TimeoutError(fmt::format("{}: host name not resolved within {:.0f} ms", name(), budget_ms));
        }
        if (ec) throw ConnectionError(fmt::format("{}: cannot resolve host: {}", name(), ec.message()));
        asio::async_connect(socket, endpoints,
                            [&](const boost::system::error_code& e, const tcp::endpoint&) { ec = e; });
        io.restart();
        io.run_until(deadline);
        if (!io.stopped()) {
            socket.close(ec);
            io.restart();
            io.run();
            throw TimeoutError(fmt::format("{}: no connection within {:.0f} ms", name(), budget_ms));
        }
        if (ec) {
            socket.close();
            throw ConnectionError(fmt::format("{}: {}", name(), ec == asio::error::connection_refused
                                                                     ? std::string("connection refused")
                                                                     : ec.message()));
        }
        socket.set_option(asio::socket_base::keep_alive(true));
        socket.set_option(tcp::no_delay(true));
    }
};

TcpTransport::TcpTransport(std::string host, uint16_t port, Deadline connect_deadline)
    : impl_(std::make_unique<Impl>()) {
    impl_->host = std::move(host);
    impl_->port = port;
    impl_->connect(connect_deadline);
}

TcpTransport::~TcpTransport() = default;

std::string TcpTransport::describe() const { return impl_->name(); }

void TcpTransport::write(std::string_view bytes, Deadline deadline) {
    if (!impl_->socket.is_open()) throw ConnectionError(impl_->name() + ": not connected");
    boost::system::error_code ec;
    asio::async_write(impl_->socket, asio::buffer(bytes.data(), bytes.size()),
                      [&](const boost::system::error_code& e, size_t) { ec = e; });
    impl_->run(deadline, "sending");
    if (ec) throw ConnectionError(fmt::format("{}: send failed: {}", impl_->name(), ec.message()));
}

void TcpTransport::read_some(std::string& out, Deadline deadline, bool& eom) {
    eom = false;
    if (!impl_->socket.is_open()) throw ConnectionError(impl_->name() + ": not connected");
    std::array<char, 4096> chunk{};
    boost::system::error_code ec;
    size_t got = 0;
    impl_->socket.async_read_some(asio::buffer(chunk),
                                  [&](const boost::system::error_code& e, size_t n) {
                                      ec = e;
                                      got = n;
                                  });
    impl_->run(deadline, "waiting for a reply");
    out.append(chunk.data(), got);
    if (ec && got == 0) {
        impl_->socket.close();
        throw ConnectionError(fmt::format("{}: {}", impl_->name(),
                                          ec == asio::error::eof ? std::string("connection closed by the instrument")
                                                                 : ec.message()));
    }
}

void TcpTransport::discard_pending() {
    if (!impl_->socket.is_open()) return;
    boost::system::error_code ec;
    std::array<char, 4096> chunk{};
    while (impl_->socket.available(ec) > 0 && !ec) impl_->socket.read_some(asio::buffer(chunk), ec);
}

void TcpTransport::close() {
    boost::system::error_code ec;
    impl_->socket.shutdown(tcp::socket::shutdown_both, ec);
    impl_->socket.close(ec);
}

void TcpTransport::reopen(Deadline deadline) {
    close();
    reset_buffer();
    impl_->connect(deadline);
}

}  // namespace ampbench::drivers
