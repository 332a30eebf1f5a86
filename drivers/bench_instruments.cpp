// Instrument factory from a bench file.
#include "drivers/bench_instruments.h"

#include <fmt/format.h>

#include "core/errors.h"
#include "drivers/transport/serial.h"
#include "drivers/transport/serial_ports.h"
#include "drivers/transport/tcp.h"
#include "drivers/transport/usbtmc.h"

namespace ampbench::drivers {

std::unique_ptr<Transport> open_transport(const std::string& uri_text, const std::string& field,
                                          double connect_timeout_s, const OpenOptions& options) {
    const InstrumentUri uri = parse_uri(uri_text, field);
    const std::string role = field.substr(0, field.find('.'));
    std::unique_ptr<Transport> t;
    if (uri.scheme == "tcp") {
        t = std::make_unique<TcpTransport>(uri.host, uri.port, deadline_after_s(connect_timeout_s));
    } else if (uri.scheme == "serial") {
        const std::string device = uri.usb_serial.empty() ? uri.path : find_port_by_usb_serial(uri.usb_serial);
        t = std::make_unique<SerialTransport>(device, serial_settings(uri, field));
    } else if (uri.scheme == "usbtmc") {
        t = std::make_unique<UsbtmcTransport>(uri.path);
    } else {
        if (!options.virtual_transport)
            throw InputError("", field, "sim:// instruments need the virtual bench, which this command does not provide");
        t = options.virtual_transport(role, uri);
    }
    if (options.trace) t = std::make_unique<TracingTransport>(std::move(t), role, options.trace);
    return t;
}

OpenedSession open_session(const InstrumentSpec& spec, const BenchFile& bench, const OpenOptions& options) {
    OpenedSession out;
    try {
        out.profile = find_profile(spec.profile, options.profile_dirs, bench.path, spec.role + ".profile");
    } catch (const InputError& e) {
        if (e.file().empty()) throw e.in_file(bench.path);
        throw;
    }
    SessionOptions so = out.profile.session;
    so.instrument = spec.role;
    if (options.timeout_s > 0) so.timeout_s = options.timeout_s;
    std::unique_ptr<Transport> t;
    try {
        t = open_transport(spec.uri, spec.role + ".uri", so.timeout_s, options);
    } catch (const InputError& e) {
        if (e.file().empty()) throw e.in_file(bench.path);
        throw;
    } catch (const TimeoutError& e) {
        throw TimeoutError(fmt::format("{}: {}", spec.role, e.what()));
    } catch (const ConnectionError& e) {
        throw ConnectionError(fmt::format("{}: {}", spec.role, e.what()));
    }
    out.session = std::make_unique<ScpiSession>(std::move(t), so);
    return out;
}

BenchInstruments open_bench_instruments(const BenchFile& bench, const OpenOptions& options) {
    BenchInstruments b;
    if (bench.generator.present) {
        auto s = open_session(bench.generator, bench, options);
        b.generator = std::make_unique<Generator>(std::move(s.session), std::move(s.profile), options.clock);
    }
    if (bench.scope.present) {
        auto s = open_session(bench.scope, bench, options);
        b.scope = std::make_unique<Scope>(std::move(s.session), std::move(s.profile), options.clock);
    }
    if (bench.meter.present) {
        auto s = open_session(bench.meter, bench, options);
        b.meter = std::make_unique<Meter>(std::move(s.session), std::move(s.profile), options.clock);
    }
    if (bench.supply.present) {
        auto s = open_session(bench.supply, bench, options);
        b.supply = std::make_unique<Supply>(std::move(s.session), std::move(s.profile), options.clock);
    }
    return b;
}

std::vector<std::string> switch_outputs_off(const BenchFile& bench, const OpenOptions& options) {
    std::vector<std::string> problems;
    // Generator first: the board must not be driven while its supply collapses (DESIGN.md §6).
    if (bench.generator.present) {
        try {
            auto s = open_session(bench.generator, bench, options);
            Generator g(std::move(s.session), std::move(s.profile), options.clock);
            g.set_output(false);
        } catch (const InputError&) {
            throw;
        } catch (const Error& e) {
            problems.push_back(e.what());
        }
    }
    if (bench.supply.present) {
        try {
            auto s = open_session(bench.supply, bench, options);
            Supply sup(std::move(s.session), std::move(s.profile), options.clock);
            sup.output_off();
        } catch (const InputError&) {
            throw;
        } catch (const Error& e) {
            problems.push_back(e.what());
        }
    }
    return problems;
}

}  // namespace ampbench::drivers
