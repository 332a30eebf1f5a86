// From node voltages read on the jig to the socket transistor's operating point (I_C, I_B, I_E,
// hFE, V_BE, V_CE) with standard uncertainties: GUM (JCGM 100:2008) by numeric sensitivity
// coefficients, or a seeded Monte Carlo (JCGM 101:2008).
#pragma once

#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "fit/lot/jig_design.h"

namespace ampbench::lot {

// The DC meter as the computation sees it (from the bench file's meter).
struct MeterModel {
    double input_ohms = 10e6;  // loads the node while it is read; 0 = ideal
    double accuracy = 0.0005;  // fraction of reading, taken as limits of a uniform distribution
};

struct Estimate {
    double value = 0.0;
    double u = 0.0;  // standard uncertainty
};

enum class Distribution { uniform, normal };

// One input quantity of the measurement function and what its uncertainty rests on.
struct UncertainInput {
    std::string name;  // "R:RB", "V:b", "V:supply"
    double value = 0.0;
    double u = 0.0;  // standard uncertainty
    Distribution distribution = Distribution::normal;
    std::string basis;  // "tolerance 1%", "measured 2026-11-20", "meter 0.05%"
};

// One line of an uncertainty budget: input, sensitivity coefficient, contribution |c_i| u_i.
struct BudgetLine {
    std::string name;
    double sensitivity = 0.0;
    double contribution = 0.0;
};

struct DutOperatingPoint {
    // Signed in the conventional directions: for an npn I_C and I_B flow in and I_E out, and
    // V_BE, V_CE are positive in the active region; for a pnp all are mirrored.
    Estimate ic_a, ib_a, ie_a, hfe, vbe_v, vce_v;
    std::vector<BudgetLine> hfe_budget;  // GUM only, largest first
    std::string problem;                 // non-empty when hFE is meaningless (no base current)
};

// The measurement function of one jig: which node voltages are read, how the DUT's terminal
// currents follow from the resistors by KCL, and the meter's loading of the node it reads.
class JigMeasurement {
public:
    // Throws InputError (naming the jig file) when a DUT terminal's voltage is neither read nor
    // fixed, or when fewer than two of its terminal currents can be found by KCL.
    JigMeasurement(JigDesign jig, std::vector<std::string> readings, MeterModel meter);

    const JigDesign& jig() const { return jig_; }
    const std::vector<std::string>& readings() const { return readings_; }

    // The input quantities for one device's readings (node -> volts as the meter showed them).
    // Throws InputError when a planned node has no reading.
    std::vector<UncertainInput> inputs(const std::map<std::string, double>& volts) const;

    // Best estimates with GUM standard uncertainties (law of propagation, uncorrelated inputs,
    // central-difference sensitivity coefficients).
    DutOperatingPoint evaluate(const std::map<std::string, double>& volts) const;

    // Monte Carlo propagation: `trials` draws of every input from its distribution, seeded;
    // values are the means and u the standard deviations of the outputs.
    DutOperatingPoint monte_carlo(const std::map<std::string, double>& volts, long trials,
                                  std::uint64_t seed) const;

private:
    // The six outputs for one vector of input values (order of inputs()).
    std::vector<double> compute(const std::vector<double>& x) const;
    double node_voltage(const std::string& node, const std::vector<double>& x) const;
    // The jig's small-signal impedance from `at` to ground, the DUT linearised as a hybrid-pi.
    double driving_point_ohms(const std::string& at, const std::vector<double>& x, double gm,
                              double g_pi) const;

    JigDesign jig_;
    std::vector<std::string> readings_;
    MeterModel meter_;
    bool supply_read_ = false;
};

}  // namespace ampbench::lot
