// The circuit engine against ngspice (`ngspice -b`): operating point, midband gain, −3 dB
// corners and impedances of six circuits, each with and without a bench's probe loading.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <optional>

#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/predict.h"
#include "reference/circuit_deck_support.h"

using namespace ampbench;
using namespace ampbench::circuit;

namespace {

struct SpiceResult {
    std::map<std::string, double> node_volts;
    std::map<std::string, double> ic;
    double gain_max = 0;
    std::optional<double> f_low, f_high;
    std::complex<double> z_in, z_out;
};

size_t column(const testing::WrData& d, const std::string& name) {
    for (size_t i = 0; i < d.names.size(); ++i)
        if (d.names[i] == name) return i;
    throw std::runtime_error("no column " + name);
}

// The −3 dB crossing between grid points i and i+1, by linear interpolation of log|H| in log f.
double crossing(const std::vector<double>& f, const std::vector<double>& mag, size_t i,
                double target) {
    const double a = std::log(mag[i] / target), b = std::log(mag[i + 1] / target);
    const double u = std::log10(f[i]) + (std::log10(f[i + 1]) - std::log10(f[i])) * a / (a - b);
    return std::pow(10.0, u);
}

SpiceResult run_spice(const Design& d, const BenchLoading& bench, double f_mid_hz,
                      const std::string& tag) {
    std::ostringstream deck;
    deck << testing::spice_circuit(d, bench);
    deck << ".control\nset wr_singlescale\nset wr_vecnames\noption gmin=1e-12\nop\n";
    std::vector<std::string> nodes;
    for (const auto& p : d.parts)
        for (const auto& n : p.nodes)
            if (n != "0" && std::find(nodes.begin(), nodes.end(), n) == nodes.end())
                nodes.push_back(n);
    std::string op_vectors;
    for (const auto& n : nodes) op_vectors += " v(" + testing::spice_node(n) + ")";
    for (const auto& p : d.parts)
        if (is_transistor(p.kind)) {
            deck << "let ic_" << p.ref << " = @q_" << p.ref << "[ic]\n";
            op_vectors += " ic_" + p.ref;
        }
    const std::string in = testing::spice_node(d.probe_node("in"));
    const std::string out = testing::spice_node(d.probe_node("out"));
    const std::string stim = testing::spice_node(d.stimulus_node);
    deck << "wrdata op.txt" << op_vectors << "\n";
    deck << "ac dec 200 0.01 1e9\nwrdata ac.txt v(" << out << ") v(" << in << ")\n";
    deck << "ac lin 1 " << testing::spice_number(f_mid_hz) << " " << testing::spice_number(f_mid_hz)
         << "\nwrdata zin.txt v(" << stim << ")\n";
    deck << "alter vgen acmag=0\nalter iout acmag=1\n";
    deck << "ac lin 1 " << testing::spice_number(f_mid_hz) << " " << testing::spice_number(f_mid_hz)
         << "\nwrdata zout.txt v(" << out << ")\n.endc\n.end\n";
    const auto dir = testing::scratch_dir("ref-" + tag);
    REQUIRE(testing::run_ngspice(dir, deck.str()));

    SpiceResult r;
    const auto op = testing::read_wrdata((dir / "op.txt").string());
    REQUIRE(op.rows.size() == 1);
    for (const auto& n : nodes)
        r.node_volts[n] = op.rows[0][column(op, "v(" + testing::spice_node(n) + ")")];
    for (const auto& p : d.parts)
        if (is_transistor(p.kind)) r.ic[p.ref] = op.rows[0][column(op, "ic_" + p.ref)];

    const auto ac = testing::read_wrdata((dir / "ac.txt").string());
    const size_t co = column(ac, "v(" + out + ")"), ci = column(ac, "v(" + in + ")");
    std::vector<double> f, mag;
    for (const auto& row : ac.rows) {
        f.push_back(row[0]);
        mag.push_back(std::abs(std::complex<double>(row[co], row[co + 1]) /
                               std::complex<double>(row[ci], row[ci + 1])));
    }
    const size_t best = static_cast<size_t>(std::max_element(mag.begin(), mag.end()) - mag.begin());
    r.gain_max = mag[best];
    const double target = r.gain_max / std::numbers::sqrt2;
    for (size_t i = best; i > 0; --i)
        if (mag[i - 1] < target) {
            r.f_low = crossing(f, mag, i - 1, target);
            break;
        }
    for (size_t i = best; i + 1 < mag.size(); ++i)
        if (mag[i + 1] < target) {
            r.f_high = crossing(f, mag, i, target);
            break;
        }
    const auto zin = testing::read_wrdata((dir / "zin.txt").string());
    const std::complex<double> vs(zin.rows.at(0)[1], zin.rows.at(0)[2]);
    r.z_in = bench.generator_ohms * vs / (1.0 - vs);
    const auto zout = testing::read_wrdata((dir / "zout.txt").string());
    r.z_out = {zout.rows.at(0)[1], zout.rows.at(0)[2]};
    std::filesystem::remove_all(dir);
    return r;
}

void compare(const std::string& path, const BenchLoading& bench, const std::string& tag) {
    INFO(path << " (" << tag << ")");
    const Design d = load_design(path);
    const Netlist nl = build_netlist(d, bench);
    const Prediction p = predict(nl);
    const SpiceResult s = run_spice(d, bench, p.response.midband_freq_hz, tag);

    for (const auto& [node, volts] : s.node_volts) {
        INFO("node " << node);
        // Acceptance: DC node voltages within 1 mV of ngspice.
        CHECK(std::abs(p.op.node_volts[nl.node_index(node)] - volts) < 1e-3);
    }
    for (const auto& t : p.op.transistors) {
        INFO("I_C of " << t.ref);
        // Acceptance: collector currents within 0.5 %.
        CHECK(t.ic_a == Approx(s.ic.at(t.ref)).epsilon(0.005));
    }
    // Acceptance: midband gain within 0.5 %, corners within 1 %, impedances within 2 %.
    CHECK(p.response.midband_gain == Approx(s.gain_max).epsilon(0.005));
    REQUIRE(p.response.f_low_hz.has_value() == s.f_low.has_value());
    if (s.f_low) CHECK(*p.response.f_low_hz == Approx(*s.f_low).epsilon(0.01));
    REQUIRE(p.response.f_high_hz.has_value() == s.f_high.has_value());
    if (s.f_high) CHECK(*p.response.f_high_hz == Approx(*s.f_high).epsilon(0.01));
    CHECK(p.response.input_impedance_ohm == Approx(std::abs(s.z_in)).epsilon(0.02));
    CHECK(p.response.output_impedance_ohm == Approx(std::abs(s.z_out)).epsilon(0.02));
}

// A bench with visible loading: a 600 Ω generator and ×1 probes (1 MΩ ‖ 100 pF) on both nodes.
BenchLoading heavy_bench() { return {600.0, {{"in", 1e6, 100e-12}, {"out", 1e6, 100e-12}}}; }
// The default virtual bench of the bench-file reader: 50 Ω, 10 MΩ ‖ 12 pF probes.
BenchLoading scope_bench() { return {50.0, {{"in", 10e6, 12e-12}, {"out", 10e6, 12e-12}}}; }

const char* const kCircuits[] = {
    "/sample_sessions/pa1.design.json",        // CE, emitter fully bypassed
    "/sample_sessions/sb3.design.json",        // pnp CE, emitter partly bypassed
    "/sample_sessions/ld2.design.json",        // two stages: CE into an emitter follower
    "/tests/data/designs/follower.design.json",   // emitter follower
    "/tests/data/designs/ce_partial.design.json", // npn CE partly bypassed, optional model keys
    "/tests/data/designs/choke_cs.design.json",   // pnp, inductor, current and voltage sources
};

}  // namespace

TEST_CASE("circuit engine agrees with ngspice without bench loading", "[reference][circuit]") {
    int k = 0;
    for (const char* c : kCircuits)
        compare(std::string(AMPBENCH_SOURCE_DIR) + c, BenchLoading{}, "bare" + std::to_string(k++));
}

TEST_CASE("circuit engine agrees with ngspice with probe loading", "[reference][circuit]") {
    int k = 0;
    for (const char* c : kCircuits) {
        compare(std::string(AMPBENCH_SOURCE_DIR) + c, scope_bench(), "scope" + std::to_string(k));
        compare(std::string(AMPBENCH_SOURCE_DIR) + c, heavy_bench(), "heavy" + std::to_string(k++));
    }
}
