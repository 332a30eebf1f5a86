// The jig's measurement function: KCL at each DUT terminal over the resistors whose far end has
// a known voltage, after undoing the meter's loading of each node it read.
#include "fit/lot/jig_measurement.h"

#include <algorithm>
#include <array>
#include <cmath>

#include <fmt/format.h>

#include "core/errors.h"
#include "core/random.h"

namespace ampbench::lot {
namespace {

// kT/q at 27 °C (the temperature ngspice simulates at by default), CODATA 2018 constants.
constexpr double kThermalVoltage = 1.380649e-23 * 300.15 / 1.602176634e-19;
// Assumed when the supply node is not read: bench supplies commonly set within ±0.5 %.
constexpr double kSupplySettingAccuracy = 0.005;
const double kSqrt3 = std::sqrt(3.0);

enum Output { ic, ib, ie, hfe, vbe, vce, output_count };

std::string percent(double fraction) { return fmt::format("{:g}%", fraction * 100.0); }

}  // namespace

JigMeasurement::JigMeasurement(JigDesign jig, std::vector<std::string> readings, MeterModel meter)
    : jig_(std::move(jig)), meter_(meter) {
    for (auto& r : readings) readings_.push_back(canonical_node(r));
    const auto fail = [&](const std::string& text) { throw InputError(jig_.path, "", text); };
    for (const auto& node : readings_) {
        if (!jig_.has_node(node)) fail(fmt::format("no node '{}' to read in this design", node));
        if (node == "0") fail("ground is the meter's reference and is not read");
        if (node == jig_.supply_node) supply_read_ = true;
        if (std::count(readings_.begin(), readings_.end(), node) > 1)
            fail(fmt::format("node '{}' is read twice", node));
    }
    const auto is_read = [&](const std::string& n) {
        return std::find(readings_.begin(), readings_.end(), n) != readings_.end();
    };
    const auto is_known = [&](const std::string& n) {
        return n == "0" || n == jig_.supply_node || is_read(n);
    };
    const std::pair<const char*, const std::string*> terminals[] = {
        {"collector", &jig_.node_c}, {"base", &jig_.node_b}, {"emitter", &jig_.node_e}};
    int missing_currents = 0;
    for (const auto& [what, node] : terminals) {
        if (!is_known(*node))
            fail(fmt::format("the {} of {} (node '{}') is neither read nor fixed; add '{}' to "
                             "the plan's readings",
                             what, jig_.dut, *node, *node));
        if (*node == "0" || *node == jig_.supply_node) {
            ++missing_currents;
            continue;
        }
        for (const auto& [ref, at] : jig_.other_connections)
            if (at == *node)
                fail(fmt::format("{} at the {} node '{}' of {} carries current the jig "
                                 "computation cannot see; only resistors may join a DUT terminal",
                                 ref, what, *node, jig_.dut));
        for (const auto& r : jig_.resistors) {
            if (r.node_a != *node && r.node_b != *node) continue;
            const std::string& far = r.node_a == *node ? r.node_b : r.node_a;
            if (!is_known(far))
                fail(fmt::format("{} joins the {} node '{}' to node '{}', whose voltage is not "
                                 "known; add '{}' to the plan's readings",
                                 r.ref, what, *node, far, far));
        }
    }
    if (missing_currents > 1)
        fail(fmt::format("two terminals of {} sit on fixed nodes, so KCL cannot give its "
                         "currents; put a resistor in at least two terminals",
                         jig_.dut));
}

std::vector<UncertainInput> JigMeasurement::inputs(const std::map<std::string, double>& volts) const {
    std::vector<UncertainInput> out;
    for (const auto& r : jig_.resistors) {
        UncertainInput in;
        in.name = "R:" + r.ref;
        in.value = r.ohms;
        if (r.measured_rel_u) {
            in.u = *r.measured_rel_u * r.ohms;
            in.distribution = Distribution::normal;
            in.basis = fmt::format("measured {}, u {}", r.measured_on, percent(*r.measured_rel_u));
        } else {
            in.u = r.tolerance * r.ohms / kSqrt3;
            in.distribution = Distribution::uniform;
            in.basis = "tolerance " + percent(r.tolerance);
        }
        out.push_back(std::move(in));
    }
    for (const auto& node : readings_) {
        auto it = volts.find(node);
        if (it == volts.end())
            throw InputError(jig_.path, "", fmt::format("no reading for the planned node '{}'", node));
        if (!std::isfinite(it->second))
            throw InputError(jig_.path, "", fmt::format("the reading of node '{}' is not a number", node));
        UncertainInput in;
        in.name = "V:" + node;
        in.value = it->second;
        in.u = meter_.accuracy * std::fabs(it->second) / kSqrt3;
        in.distribution = Distribution::uniform;
        in.basis = "meter " + percent(meter_.accuracy) + " of reading";
        out.push_back(std::move(in));
    }
    if (!supply_read_) {
        UncertainInput in;
        in.name = "V:supply";
        in.value = jig_.supply_v;
        in.u = kSupplySettingAccuracy * std::fabs(jig_.supply_v) / kSqrt3;
        in.distribution = Distribution::uniform;
        in.basis = "supply setting " + percent(kSupplySettingAccuracy) + " (assumed; not read)";
        out.push_back(std::move(in));
    }
    return out;
}

double JigMeasurement::node_voltage(const std::string& node, const std::vector<double>& x) const {
    if (node == "0") return 0.0;
    const size_t reading_base = jig_.resistors.size();
    for (size_t i = 0; i < readings_.size(); ++i)
        if (readings_[i] == node) return x[reading_base + i];
    // Validated in the constructor: the only other known node is an unread supply.
    return x[reading_base + readings_.size()];
}

double JigMeasurement::driving_point_ohms(const std::string& at, const std::vector<double>& x,
                                          double gm, double g_pi) const {
    // Small-signal nodal analysis: every node but ground and the supply is free (a read node
    // moves when the meter loads its neighbour's node). Capacitors are open at DC; the DUT is a
    // hybrid-pi (r_pi between b and e, g_m v_be from c to e; output resistance neglected, as
    // the readings do not give it). Same stamp for npn and pnp.
    std::vector<std::string> free;
    for (const auto& n : jig_.nodes)
        if (n != "0" && n != jig_.supply_node) free.push_back(n);
    const size_t size = free.size();
    const auto index = [&](const std::string& n) -> long {
        for (size_t i = 0; i < size; ++i)
            if (free[i] == n) return static_cast<long>(i);
        return -1;
    };
    std::vector<double> g(size * size, 0.0);
    const auto add = [&](long row, long col, double value) {
        if (row >= 0 && col >= 0) g[static_cast<size_t>(row) * size + static_cast<size_t>(col)] += value;
    };
    const auto conductance = [&](long a, long b, double value) {
        add(a, a, value);
        add(b, b, value);
        add(a, b, -value);
        add(b, a, -value);
    };
    for (size_t i = 0; i < jig_.resistors.size(); ++i)
        conductance(index(jig_.resistors[i].node_a), index(jig_.resistors[i].node_b), 1.0 / x[i]);
    const long c = index(jig_.node_c), b = index(jig_.node_b), e = index(jig_.node_e);
    conductance(b, e, g_pi);
    add(c, b, gm);
    add(c, e, -gm);
    add(e, b, -gm);
    add(e, e, gm);
    // A tiny conductance to ground keeps nodes with no DC path (capacitors only) solvable.
    for (size_t i = 0; i < size; ++i) g[i * size + i] += 1e-12;

    // Solve G z = unit current into `at`, by Gaussian elimination with partial pivoting.
    std::vector<double> rhs(size, 0.0);
    const long target = index(at);
    if (target < 0) return 0.0;
    rhs[static_cast<size_t>(target)] = 1.0;
    for (size_t k = 0; k < size; ++k) {
        size_t pivot = k;
        for (size_t r = k + 1; r < size; ++r)
            if (std::fabs(g[r * size + k]) > std::fabs(g[pivot * size + k])) pivot = r;
        if (pivot != k) {
            for (size_t col = 0; col < size; ++col) std::swap(g[k * size + col], g[pivot * size + col]);
            std::swap(rhs[k], rhs[pivot]);
        }
        for (size_t r = k + 1; r < size; ++r) {
            const double f = g[r * size + k] / g[k * size + k];
            if (f == 0.0) continue;
            for (size_t col = k; col < size; ++col) g[r * size + col] -= f * g[k * size + col];
            rhs[r] -= f * rhs[k];
        }
    }
    std::vector<double> z(size, 0.0);
    for (size_t k = size; k-- > 0;) {
        double sum = rhs[k];
        for (size_t col = k + 1; col < size; ++col) sum -= g[k * size + col] * z[col];
        z[k] = sum / g[k * size + k];
    }
    return z[static_cast<size_t>(target)];
}

std::vector<double> JigMeasurement::compute(const std::vector<double>& x) const {
    const std::string* terminal_nodes[3] = {&jig_.node_c, &jig_.node_b, &jig_.node_e};
    const size_t reading_base = jig_.resistors.size();
    const auto fixed = [&](const std::string& n) { return n == "0" || n == jig_.supply_node; };

    // Node voltages as read; corrected for the meter's loading below.
    std::map<std::string, double> v;
    const auto voltage = [&](const std::string& n) {
        auto it = v.find(n);
        return it != v.end() ? it->second : node_voltage(n, x);
    };
    // Currents into the DUT's c, b, e by KCL; NaN where a terminal sits on a fixed node.
    const auto into_dut = [&]() {
        std::array<double, 3> in{};
        int unknown = -1;
        for (int t = 0; t < 3; ++t) {
            const std::string& node = *terminal_nodes[t];
            if (fixed(node)) {
                unknown = t;
                continue;
            }
            double sum = 0.0;
            for (size_t i = 0; i < jig_.resistors.size(); ++i) {
                const auto& r = jig_.resistors[i];
                if ((r.node_a == node) == (r.node_b == node)) continue;
                const std::string& far = r.node_a == node ? r.node_b : r.node_a;
                sum += (voltage(far) - voltage(node)) / x[i];
            }
            in[t] = sum;
        }
        if (unknown >= 0) in[unknown] = -(in[0] + in[1] + in[2] - in[unknown]);
        return in;
    };
    const double sign = jig_.pnp ? -1.0 : 1.0;

    if (meter_.input_ohms > 0.0) {
        // The meter (to ground) draws exactly V_read / R_in from the node it reads, and the
        // node sags by that current times the jig's driving-point impedance there. Undo it with
        // the impedance of the jig linearised at the operating point (hybrid-pi from the
        // readings); two passes so g_m and r_pi come from corrected readings.
        for (int pass = 0; pass < 2; ++pass) {
            const auto currents = into_dut();
            const double ic_a = sign * currents[0], ib_a = sign * currents[1];
            const double beta = ib_a != 0.0 ? ic_a / ib_a : 0.0;
            const bool active = ic_a > 0.0 && beta > 0.0 && std::isfinite(beta);
            const double gm = active ? ic_a / kThermalVoltage : 0.0;
            std::map<std::string, double> corrected;
            for (size_t i = 0; i < readings_.size(); ++i) {
                const std::string& node = readings_[i];
                if (fixed(node)) continue;
                const double z = driving_point_ohms(node, x, gm, active ? gm / beta : 0.0);
                corrected[node] = x[reading_base + i] * (1.0 + z / meter_.input_ohms);
            }
            v = std::move(corrected);
        }
    }

    const auto in = into_dut();
    std::vector<double> out(output_count);
    out[ic] = sign * in[0];
    out[ib] = sign * in[1];
    out[ie] = -sign * in[2];
    out[hfe] = out[ib] != 0.0 ? out[ic] / out[ib] : 0.0;
    out[vbe] = sign * (voltage(jig_.node_b) - voltage(jig_.node_e));
    out[vce] = sign * (voltage(jig_.node_c) - voltage(jig_.node_e));
    return out;
}

namespace {

void set_outputs(DutOperatingPoint& op, const std::vector<double>& value,
                 const std::vector<double>& u) {
    Estimate* fields[output_count] = {&op.ic_a, &op.ib_a, &op.ie_a, &op.hfe, &op.vbe_v, &op.vce_v};
    for (int k = 0; k < output_count; ++k) *fields[k] = Estimate{value[k], u[k]};
    // Below a picoampere the base current is leakage or noise, not a gain.
    if (!(op.ib_a.value > 1e-12) || !(op.hfe.value > 0.0))
        op.problem = "no forward base current (open junction or reversed device?)";
    // common practice: below about 0.3 V the collector junction conducts and I_C / I_B is the
    // forced gain of a saturated transistor, not its hFE.
    else if (op.vce_v.value < 0.3)
        op.problem = fmt::format("the device is saturated (V_CE {:.3g} V); hFE cannot be measured "
                                 "in this jig",
                                 op.vce_v.value);
}

}  // namespace

DutOperatingPoint JigMeasurement::evaluate(const std::map<std::string, double>& volts) const {
    const auto ins = inputs(volts);
    std::vector<double> x(ins.size());
    for (size_t i = 0; i < ins.size(); ++i) x[i] = ins[i].value;
    const auto y = compute(x);
    std::vector<double> variance(output_count, 0.0);
    DutOperatingPoint op;
    for (size_t i = 0; i < ins.size(); ++i) {
        if (!(ins[i].u > 0.0)) continue;
        // Central differences with a step well inside the uncertainty: the function is smooth
        // and nearly linear there, so this matches the analytic coefficient closely.
        const double h = 1e-2 * ins[i].u;
        auto up = x, down = x;
        up[i] += h;
        down[i] -= h;
        const auto yu = compute(up), yd = compute(down);
        for (int k = 0; k < output_count; ++k) {
            const double c = (yu[k] - yd[k]) / (2.0 * h);
            variance[k] += c * c * ins[i].u * ins[i].u;
            if (k == hfe) op.hfe_budget.push_back({ins[i].name, c, std::fabs(c) * ins[i].u});
        }
    }
    std::vector<double> u(output_count);
    for (int k = 0; k < output_count; ++k) u[k] = std::sqrt(variance[k]);
    set_outputs(op, y, u);
    std::sort(op.hfe_budget.begin(), op.hfe_budget.end(),
              [](const BudgetLine& a, const BudgetLine& b) { return a.contribution > b.contribution; });
    return op;
}

DutOperatingPoint JigMeasurement::monte_carlo(const std::map<std::string, double>& volts,
                                              long trials, std::uint64_t seed) const {
    if (trials < 2) throw FitInputError("a Monte Carlo propagation needs at least 2 trials");
    const auto ins = inputs(volts);
    Random rng(seed);
    std::vector<double> x(ins.size());
    // Welford's running mean and variance per output.
    std::vector<double> mean(output_count, 0.0), m2(output_count, 0.0);
    for (long t = 0; t < trials; ++t) {
        for (size_t i = 0; i < ins.size(); ++i) {
            const double z = ins[i].distribution == Distribution::uniform
                                 ? kSqrt3 * (2.0 * rng.uniform01() - 1.0)
                                 : rng.normal();
            x[i] = ins[i].value + ins[i].u * z;
        }
        const auto y = compute(x);
        for (int k = 0; k < output_count; ++k) {
            const double d = y[k] - mean[k];
            mean[k] += d / static_cast<double>(t + 1);
            m2[k] += d * (y[k] - mean[k]);
        }
    }
    std::vector<double> u(output_count);
    for (int k = 0; k < output_count; ++k) u[k] = std::sqrt(m2[k] / static_cast<double>(trials - 1));
    DutOperatingPoint op;
    set_outputs(op, mean, u);
    return op;
}

}  // namespace ampbench::lot
