// One single-threaded Asio loop serves all four instruments, so the shared board needs no
// locks; each connection handles its lines in order, replying after the command's latency.
#include "drivers/sim/server.h"

#include <fcntl.h>
#include <termios.h>
#include <unistd.h>

#include <array>
#include <chrono>
#include <cstdlib>

#include <boost/asio.hpp>
#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::sim {
namespace asio = boost::asio;
using asio::ip::tcp;

namespace {

const char* const kRoles[4] = {"generator", "scope", "meter", "supply"};

template <class Stream>
class Connection : public std::enable_shared_from_this<Connection<Stream>> {
public:
    Connection(Stream stream, VirtualBench& bench, std::string role, double scale)
        : stream_(std::move(stream)), timer_(stream_.get_executor()), bench_(bench), role_(std::move(role)), scale_(scale) {}

    void start() { read(); }

private:
    void read() {
        auto self = this->shared_from_this();
        stream_.async_read_some(asio::buffer(buf_), [self](const boost::system::error_code& ec, size_t n) {
            if (ec) return;  // peer gone: the connection ends with its last handler
            self->in_.append(self->buf_.data(), n);
            if (self->in_.size() > (1u << 20) && self->in_.find('\n') == std::string::npos) return;
            self->process();
            self->read();
        });
    }

    void process() {
        if (busy_) return;
        const size_t nl = in_.find('\n');
        if (nl == std::string::npos) return;
        std::string line = in_.substr(0, nl);
        in_.erase(0, nl + 1);
        if (!line.empty() && line.back() == '\r') line.pop_back();
        Outcome o = bench_.execute(role_, line);
        busy_ = true;
        auto self = this->shared_from_this();
        timer_.expires_after(std::chrono::duration_cast<std::chrono::steady_clock::duration>(
            std::chrono::duration<double>(o.busy_s / scale_)));
        timer_.async_wait([self, o = std::move(o)](const boost::system::error_code& ec) {
            if (ec) return;
            if (!o.has_reply) {
                self->busy_ = false;
                self->process();
                return;
            }
            self->out_ = o.reply + "\n";
            asio::async_write(self->stream_, asio::buffer(self->out_), [self](const boost::system::error_code& wec, size_t) {
                if (wec) return;
                self->busy_ = false;
                self->process();
            });
        });
    }

    Stream stream_;
    asio::steady_timer timer_;
    VirtualBench& bench_;
    std::string role_;
    double scale_;
    std::array<char, 4096> buf_{};
    std::string in_, out_;
    bool busy_ = false;
};

struct Pty {
    int slave_fd = -1;
    std::string path;
};

}  // namespace

struct BenchServer::Impl {
    VirtualBench& bench;
    ServeOptions options;
    asio::io_context io;
    std::vector<std::unique_ptr<tcp::acceptor>> acceptors;
    std::vector<Pty> ptys;
    std::vector<std::string> endpoints;

    Impl(VirtualBench& b, const ServeOptions& o) : bench(b), options(o) {}
    ~Impl() {
        for (auto& p : ptys)
            if (p.slave_fd >= 0) ::close(p.slave_fd);
    }

    void accept(tcp::acceptor& acc, const std::string& role) {
        acc.async_accept([this, &acc, role](const boost::system::error_code& ec, tcp::socket socket) {
            if (!ec) {
                socket.set_option(tcp::no_delay(true));
                std::make_shared<Connection<tcp::socket>>(std::move(socket), bench, role, options.time_scale)->start();
            }
            if (acc.is_open()) accept(acc, role);
        });
    }

    void open_tcp() {
        boost::system::error_code ec;
        const auto address = asio::ip::make_address(options.host, ec);
        if (ec) throw UsageError(fmt::format("--listen: '{}' is not an IP address", options.host));
        if (!address.is_loopback() && !options.allow_remote)
            throw UsageError(fmt::format("--listen {}: the virtual bench listens on loopback only unless --allow-remote is given",
                                         options.host));
        if (options.port != 0 && options.port > 65532)
            throw UsageError(fmt::format("--listen: port {} leaves no room for the four instruments", options.port));
        for (int i = 0; i < 4; ++i) {
            const auto port = static_cast<unsigned short>(options.port == 0 ? 0 : options.port + i);
            auto acc = std::make_unique<tcp::acceptor>(io);
            const tcp::endpoint ep(address, port);
            acc->open(ep.protocol(), ec);
            if (!ec) acc->set_option(tcp::acceptor::reuse_address(true), ec);
            if (!ec) acc->bind(ep, ec);
            if (!ec) acc->listen(asio::socket_base::max_listen_connections, ec);
            if (ec)
                throw ConnectionError(fmt::format("cannot listen on {}:{} for the virtual {}: {}", options.host, port,
                                                  kRoles[i], ec.message()));
            endpoints.push_back(std::to_string(acc->local_endpoint().port()));
            accept(*acc, kRoles[i]);
            acceptors.push_back(std::move(acc));
        }
    }

    void open_pty() {
        for (int i = 0; i < 4; ++i) {
            const int master = ::posix_openpt(O_RDWR | O_NOCTTY);
            if (master < 0 || ::grantpt(master) != 0 || ::unlockpt(master) != 0)
                throw ConnectionError(fmt::format("cannot make a pseudo-terminal for the virtual {}", kRoles[i]));
            const char* name = ::ptsname(master);
            Pty p;
            p.path = name ? name : "";
            // Holding the slave open keeps the master readable when a client closes it.
            p.slave_fd = ::open(p.path.c_str(), O_RDWR | O_NOCTTY);
            termios tio{};
            if (p.slave_fd >= 0 && ::tcgetattr(p.slave_fd, &tio) == 0) {
                ::cfmakeraw(&tio);
                ::tcsetattr(p.slave_fd, TCSANOW, &tio);
            }
            endpoints.push_back(p.path);
            ptys.push_back(p);
            asio::posix::stream_descriptor stream(io, master);
            std::make_shared<Connection<asio::posix::stream_descriptor>>(std::move(stream), bench, kRoles[i],
                                                                          options.time_scale)
                ->start();
        }
    }
};

BenchServer::BenchServer(VirtualBench& bench, const ServeOptions& options) : impl_(std::make_unique<Impl>(bench, options)) {
    if (!(options.time_scale > 0)) throw UsageError("--time-scale must be positive");
    if (options.pty) impl_->open_pty();
    else impl_->open_tcp();
}

BenchServer::~BenchServer() = default;

std::vector<std::string> BenchServer::endpoints() const { return impl_->endpoints; }

void BenchServer::run(const std::function<bool()>& stop) {
    while (!stop()) {
        impl_->io.run_for(std::chrono::milliseconds(50));
        if (impl_->io.stopped()) impl_->io.restart();
    }
    for (auto& a : impl_->acceptors) a->close();
}

}  // namespace ampbench::sim
