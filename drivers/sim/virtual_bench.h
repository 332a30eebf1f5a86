// The virtual bench: a simulated board and four simulated instruments answering the
// scpi-generic profile, driven in virtual time by a Clock; in-process transports for the drivers.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <memory>
#include <string>
#include <string_view>

#include "core/bench_file.h"
#include "core/clock.h"
#include "drivers/bench_instruments.h"
#include "drivers/sim/board.h"
#include "drivers/sim/scpi_server_side.h"

namespace ampbench::sim {

// Fixed behaviour of the simulated instruments (documented in DEVELOPERS.md "Virtual bench").
struct SimLimits {
    double generator_max_freq_hz = 50e6;
    double generator_min_freq_hz = 1e-3;
    double generator_max_vpp = 20.0;  // at the high-Z setting
    double scope_max_sample_rate_hz = 1e9;
    double scope_max_points = 250000;
    double scope_min_points = 16;
    double scope_full_bandwidth_hz = 200e6;
    double scope_ac_corner_hz = 10.0;       // from memory: AC coupling corners sit near 10 Hz
    double scope_noise_fraction = 0.0015;   // input noise, fraction of full screen (rms)
    double scope_skew_s = 150e-12;          // channel k lags channel 1 by (k−1)·skew
    double scope_gain_error = 0.003;        // each channel's vertical gain error, uniform within ±this
    double supply_max_v = 30.0, supply_max_a = 3.0;
};

class VirtualBench {
public:
    // `nominal` is the design as drawn on paper; the board is drawn from `spec`. `clock` must
    // outlive the bench (a VirtualClock in-process, a ScaledClock when served).
    VirtualBench(const circuit::Design& nominal, const BenchFile& bench, const BoardSpec& spec, Clock& clock);
    ~VirtualBench();
    VirtualBench(const VirtualBench&) = delete;
    VirtualBench& operator=(const VirtualBench&) = delete;

    // Executes one line for `role` ("generator", "scope", "meter", "supply") at the clock's
    // present time; the caller charges busy_s and delivers the reply.
    Outcome execute(const std::string& role, std::string_view line);
    // The factory the drivers take (OpenOptions::virtual_transport): in-process transports that
    // charge each command's latency to the clock.
    drivers::VirtualTransportFactory transport_factory();

    SimulatedBoard& board();
    Clock& clock();
    const BenchFile& bench() const;
    const circuit::Design& drawn_design() const;
    // The ampbench-design/1 text of the board as simulated, probe loading included.
    std::string reveal() const;

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

// The vertical gain error (fraction) the virtual scope of board spec `seed` has on channel
// `channel` (0-based): drawn uniformly within ±limits.scope_gain_error, one draw per channel.
double virtual_scope_gain_error(std::uint64_t seed, size_t channel, const SimLimits& limits = {});

// An in-process transport for one role of a virtual bench.
std::unique_ptr<drivers::Transport> make_in_process_transport(VirtualBench& bench, const std::string& role);
// The same, asking `bench` for the bench at every line (a tray swaps benches under it); `name`
// is what describe() says.
std::unique_ptr<drivers::Transport> make_in_process_transport(std::function<VirtualBench&()> bench, const std::string& role,
                                                              std::string name);

}  // namespace ampbench::sim
