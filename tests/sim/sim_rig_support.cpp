// The driver-side rig of the virtual-bench tests.
#include "sim_rig_support.h"

#include <cmath>
#include <numbers>

#include "fit/circuit/ac.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/netlist.h"
#include "sim_support.h"

namespace ampbench::sim::test {

Rig::Rig(const std::string& sim_uri, double cap_scale) {
    const BenchFile bench_file = default_virtual_bench(sim_uri);
    bench = std::make_unique<VirtualBench>(ce_design(cap_scale), bench_file, parse_board_spec(sim_uri), clock);
    drivers::OpenOptions opt;
    opt.virtual_transport = bench->transport_factory();
    opt.clock = &clock;
    inst = drivers::open_bench_instruments(bench_file, opt);
}

void Rig::power_up(double supply_v, double limit_a) { power_up_bench(inst, supply_v, limit_a); }

void power_up_bench(drivers::BenchInstruments& inst, double supply_v, double limit_a) {
    inst.generator->set_output(false);
    inst.supply->set_voltage(supply_v);
    inst.supply->set_current_limit(limit_a);
    inst.supply->output_on();
    inst.generator->select_sine();
    inst.generator->set_load("high-z");
    for (const char* ch : {"1", "2"}) {
        drivers::ScopeChannelSetup s;
        s.channel = ch;
        s.probe_ratio = 10;
        s.range_vpp = 0.1;
        inst.scope->configure_channel(s);
    }
}

void set_stimulus(drivers::BenchInstruments& inst, double freq_hz, double vpp) {
    inst.generator->set_frequency(freq_hz);
    inst.generator->set_amplitude_vpp(vpp);
    if (!inst.generator->output_on()) inst.generator->set_output(true);
}

std::complex<double> capture_gain(drivers::BenchInstruments& inst, double freq_hz, double periods, double out_range_vpp,
                                  size_t points) {
    inst.scope->set_range("2", out_range_vpp, 0.0);
    inst.scope->set_timebase(periods / freq_hz, points);
    inst.scope->set_trigger("1", 0.0);
    inst.scope->single_and_wait(30.0);
    const drivers::Waveform in = inst.scope->fetch("1");
    const drivers::Waveform out = inst.scope->fetch("2");
    const SineFit a = fit_sine(in.volts, in.dt_s, in.t0_s, freq_hz);
    const SineFit b = fit_sine(out.volts, out.dt_s, out.t0_s, freq_hz);
    return std::polar(b.amplitude / a.amplitude, b.phase_rad - a.phase_rad);
}

std::complex<double> engine_gain(const std::string& design_json, double freq_hz) {
    const circuit::Design d = circuit::parse_design(design_json, "revealed");
    const circuit::Netlist nl = circuit::build_netlist(d, {});
    const circuit::OperatingPoint op = circuit::solve_operating_point(nl);
    circuit::AcAnalysis ac(nl, op);
    return ac.gain(freq_hz);
}

}  // namespace ampbench::sim::test
