// The circuit the engines solve: a design (plus the bench's generator and probe loading) turned
// into indexed nodes and elements. Plain data, no Eigen, so other fit/circuit engines can stamp
// it their own way.
#pragma once

#include <string>
#include <vector>

#include "fit/circuit/bjt.h"
#include "fit/circuit/design.h"

namespace ampbench {
struct BenchFile;
}

namespace ampbench::circuit {

// What the bench adds to the board: the generator's output resistance at the stimulus node and
// each scope probe's R ‖ C at its probe node.
struct ProbeLoad {
    std::string probe;  // a probe name of the design ("in", "out")
    double ohms = 10e6;
    double farads = 12e-12;
};
struct BenchLoading {
    double generator_ohms = 50.0;
    std::vector<ProbeLoad> probes;
};
// From a bench file: generator.output_ohms and every scope channel's probe loading.
BenchLoading bench_loading(const BenchFile& bench);

// Node 0 is ground. Element `part` is the index into Design::parts, or −1 for what the bench
// or the supply adds.
struct Resistor {
    int a = 0, b = 0;
    double ohms = 0;
    int part = -1;
};
struct Capacitor {
    int a = 0, b = 0;
    double farads = 0;
    int part = -1;
};
struct Inductor {
    int a = 0, b = 0;
    double henries = 0;
    int part = -1;
    int branch = 0;  // index of its current among the branch unknowns
};
struct VoltageSource {
    int plus = 0, minus = 0;
    double volts = 0;
    int part = -1;   // −1: the supply
    int branch = 0;  // its current flows from plus through the source to minus
};
struct CurrentSource {
    int from = 0, to = 0;  // current leaves `from`, passes through the source, enters `to`
    double amps = 0;
    int part = -1;
};
struct Transistor {
    std::string ref;
    int c = 0, b = 0, e = 0;
    int b_internal = 0;  // == b when RB is 0
    BjtParams params;
    int part = -1;
};

struct Netlist {
    std::string source;                // the design file, for error messages
    std::vector<std::string> node_names;  // [0] = "0"; internal base nodes are "Q1#b"
    std::vector<Resistor> resistors;
    std::vector<Capacitor> capacitors;
    std::vector<Inductor> inductors;
    std::vector<VoltageSource> vsources;  // [0] is the supply
    std::vector<CurrentSource> isources;
    std::vector<Transistor> transistors;
    int branch_count = 0;
    // The generator: an ideal 0 V DC (1 V AC) source behind generator_ohms at `stimulus`.
    int stimulus = 0;
    double generator_ohms = 50.0;
    int in = 0, out = 0;  // probe nodes "in" and "out"
    double vt = thermal_voltage();

    int node_count() const { return static_cast<int>(node_names.size()); }  // with ground
    // MNA unknowns: node voltages 1..N−1 at 0..N−2, then the branch currents.
    int unknown_count() const { return node_count() - 1 + branch_count; }
    int branch_unknown(int branch) const { return node_count() - 1 + branch; }
    int node_index(const std::string& name) const;  // −1 when absent
};

Netlist build_netlist(const Design& design, const BenchLoading& bench = {});

// Per-part values the tolerance band varies: element values by Design::parts index, and BF for
// transistors. apply_values writes them into a netlist built from the same design.
struct PartValues {
    std::vector<double> value;  // ohms / farads / henries / volts / amps; BF for transistors
};
PartValues nominal_values(const Design& design);
void apply_values(const PartValues& values, Netlist& netlist);

// Modified nodal analysis: the ±1 entries tying branch-current unknown k to the KCL rows of
// its nodes and its own voltage row to their voltages (node 0 is ground and has no row).
template <class Matrix>
void stamp_branch_incidence(Matrix& m, int plus, int minus, int k) {
    if (plus) {
        m(plus - 1, k) += 1;
        m(k, plus - 1) += 1;
    }
    if (minus) {
        m(minus - 1, k) -= 1;
        m(k, minus - 1) -= 1;
    }
}

}  // namespace ampbench::circuit
