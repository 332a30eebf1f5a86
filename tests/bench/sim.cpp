// Benchmark: virtual seconds simulated per wall second for a 40-point sweep of HVE-PA1 from 10 Hz
// to 10 MHz through the in-process virtual bench and the real drivers, against brute-force
// trapezoidal integration of the same board measured in the same run.
#include <chrono>
#include <cmath>
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "core/bench_file.h"
#include "core/clock.h"
#include "drivers/bench_instruments.h"
#include "drivers/sim/board.h"
#include "drivers/sim/virtual_bench.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/transient.h"

using namespace ampbench;
using WallClock = std::chrono::steady_clock;

namespace {

double seconds_since(WallClock::time_point start) {
    return std::chrono::duration<double>(WallClock::now() - start).count();
}

constexpr double kSettleS = 3.0;  // six of the board's slowest time constant (C3, about 0.5 s)
constexpr int kPoints = 40;

}  // namespace

int main() {
    const std::string uri = "sim://?seed=7";
    const circuit::Design design =
        circuit::load_design(std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/pa1.design.json");
    const BenchFile bench_file = default_virtual_bench(uri);

    VirtualClock clock;
    sim::VirtualBench bench(design, bench_file, sim::parse_board_spec(uri), clock);
    drivers::OpenOptions opt;
    opt.virtual_transport = bench.transport_factory();
    opt.clock = &clock;
    drivers::BenchInstruments inst = drivers::open_bench_instruments(bench_file, opt);
    inst.generator->set_output(false);
    inst.supply->set_voltage(12.0);
    inst.supply->set_current_limit(0.02);
    inst.supply->output_on();
    inst.generator->select_sine();
    inst.generator->set_load("high-z");
    for (const char* ch : {"1", "2"}) {
        drivers::ScopeChannelSetup s;
        s.channel = ch;
        s.probe_ratio = 10;
        s.range_vpp = ch[0] == '1' ? 0.1 : 4.0;
        inst.scope->configure_channel(s);
    }
    inst.generator->set_amplitude_vpp(5e-3);
    inst.generator->set_frequency(10.0);
    inst.generator->set_output(true);

    const double virtual_start_s = clock.now_s();
    const auto wall_start = WallClock::now();
    double sink = 0;
    for (int i = 0; i < kPoints; ++i) {
        const double f = 10.0 * std::pow(1e6, static_cast<double>(i) / (kPoints - 1));
        inst.generator->set_frequency(f);
        clock.sleep_s(kSettleS);
        inst.scope->set_timebase(10.0 / f, 2000);
        inst.scope->set_trigger("1", 0.0);
        inst.scope->single_and_wait(30.0);
        sink += inst.scope->fetch("1").volts.back() + inst.scope->fetch("2").volts.back();
    }
    const double wall_s = seconds_since(wall_start);
    const double virtual_s = clock.now_s() - virtual_start_s;
    inst.generator->set_output(false);
    inst.supply->output_off();

    // Baseline: the same board integrated step by step (200 steps per period at 1 kHz), the way a
    // transient simulator without shooting or period jumps would have to reach each settled point.
    const circuit::Netlist nl = circuit::build_netlist(design, circuit::bench_loading(bench_file));
    const circuit::OperatingPoint op = circuit::solve_operating_point(nl);
    circuit::TransientEngine engine(nl);
    circuit::TransientState s = engine.state_at_rest(op.x);
    const circuit::SineStimulus g{2.5e-3, 1e3, 0.0, 0.0};
    const long steps = 200L * 200;  // 0.2 virtual seconds
    const auto brute_start = WallClock::now();
    engine.integrate(s, 0.0, g.period_s() / 200, steps, g);
    const double brute_wall_s = seconds_since(brute_start);
    const double brute_virtual_s = static_cast<double>(steps) * g.period_s() / 200;
    sink += s.x[0];

    const double rate = virtual_s / wall_s, brute_rate = brute_virtual_s / brute_wall_s;
    std::printf("board: %s (%d unknowns)\n", design.name.c_str(), nl.unknown_count());
    std::printf("sweep: %d points 10 Hz - 10 MHz, %.1f s settling wait + 10-period capture of both channels each\n",
                kPoints, kSettleS);
    std::printf("virtual time simulated:             %10.3f s\n", virtual_s);
    std::printf("wall time:                          %10.3f s\n", wall_s);
    std::printf("virtual s per wall s (sweep):       %10.2f  (%s real time)\n", rate,
                rate > 1 ? "faster than" : "slower than");
    std::printf("virtual s per wall s (brute force): %10.4f  (trapezoidal, 200 steps per period at 1 kHz)\n",
                brute_rate);
    std::printf("ratio sweep / brute force:          %10.1f\n", rate / brute_rate);
    volatile double keep = sink;  // keeps the work from being optimised away
    (void)keep;
    return 0;
}
