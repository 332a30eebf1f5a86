// Opening a bench's instruments: URI -> transport (optionally traced) -> SCPI session with the
// profile's settings -> role object. sim:// instruments come from a factory the caller supplies
// (drivers never depend on the virtual bench).
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "core/bench_file.h"
#include "drivers/roles/generator.h"
#include "drivers/roles/meter.h"
#include "drivers/roles/scope.h"
#include "drivers/roles/supply.h"
#include "drivers/transport/trace.h"
#include "drivers/uri.h"

namespace ampbench::drivers {

// Makes the in-process transport of a sim:// instrument for `role`.
using VirtualTransportFactory =
    std::function<std::unique_ptr<Transport>(const std::string& role, const InstrumentUri& uri)>;

struct OpenOptions {
    std::shared_ptr<TraceLog> trace;           // --trace; null for none
    VirtualTransportFactory virtual_transport;  // required for sim:// benches
    Clock* clock = nullptr;                    // for role waits; null = real clock
    std::vector<std::string> profile_dirs;     // searched before the shipped profiles
    double timeout_s = 0.0;                    // > 0 overrides the profile's timeout
};

// Opens the transport named by `uri_text`. `field` names the bench key in errors.
std::unique_ptr<Transport> open_transport(const std::string& uri_text, const std::string& field,
                                          double connect_timeout_s, const OpenOptions& options);

// The profile and session of one instrument of the bench.
struct OpenedSession {
    Profile profile;
    std::unique_ptr<ScpiSession> session;
};
OpenedSession open_session(const InstrumentSpec& spec, const BenchFile& bench, const OpenOptions& options);

struct BenchInstruments {
    std::unique_ptr<Generator> generator;
    std::unique_ptr<Scope> scope;
    std::unique_ptr<Meter> meter;
    std::unique_ptr<Supply> supply;
};

// Opens every instrument the bench lists (the others stay null).
BenchInstruments open_bench_instruments(const BenchFile& bench, const OpenOptions& options);

// Switches the generator output off, then the supply output off, whatever their state; opens
// each instrument itself. Returns one problem line per instrument it could not switch off
// (the other is still tried).
std::vector<std::string> switch_outputs_off(const BenchFile& bench, const OpenOptions& options);

}  // namespace ampbench::drivers
