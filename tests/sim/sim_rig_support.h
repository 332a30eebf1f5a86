// A virtual bench opened through the real drivers, and a gain measurement on it as a sweep
// procedure would make it (sine fits of both scope channels).
#pragma once

#include <complex>
#include <memory>
#include <string>

#include "core/clock.h"
#include "drivers/bench_instruments.h"
#include "drivers/sim/virtual_bench.h"

namespace ampbench::sim::test {

struct Rig {
    VirtualClock clock;
    std::unique_ptr<VirtualBench> bench;
    drivers::BenchInstruments inst;
    explicit Rig(const std::string& sim_uri, double cap_scale = 1.0);
    void power_up(double supply_v = 12.0, double limit_a = 0.05);
};

// Generator off, supply on at supply_v with limit_a, generator sine into high-Z, scope channels
// 1 and 2 (10× probes) on their smallest range.
void power_up_bench(drivers::BenchInstruments& inst, double supply_v = 12.0, double limit_a = 0.05);

// Sets the generator (phase-continuous) and returns at once.
void set_stimulus(drivers::BenchInstruments& inst, double freq_hz, double vpp);
// One capture of `periods` periods; returns V(out)/V(in) from three-parameter sine fits.
std::complex<double> capture_gain(drivers::BenchInstruments& inst, double freq_hz, double periods = 10,
                                  double out_range_vpp = 4.0, size_t points = 5000);

// |H| of a design (ampbench-design/1 text) at freq_hz by fit/circuit AC analysis, generator 50 Ω.
std::complex<double> engine_gain(const std::string& design_json, double freq_hz);

}  // namespace ampbench::sim::test
