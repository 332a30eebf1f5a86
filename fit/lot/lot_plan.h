// The lot plan `ampbench-lot-plan/1`: which jig and socket, which nodes to read, the spec with
// its test conditions, and the (n, c) sampling plan.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <vector>

#include "fit/lot/jig_design.h"
#include "fit/lot/sampling.h"

namespace ampbench::lot {

struct Limits {
    std::optional<double> min, max;
    bool contains(double value) const;
};

// A resistor value measured on the jig, replacing its nominal value and tolerance.
struct MeasuredValue {
    std::string ref;
    double ohms = 0.0;
    double rel_u = 0.0;  // relative standard uncertainty
};

struct LotPlan {
    std::string path;
    std::string part;
    std::string jig_path;  // resolved against the plan's directory
    std::string dut;
    std::vector<std::string> readings;
    std::vector<MeasuredValue> jig_measured;
    std::string measured_on;  // YYYY-MM-DD, empty when nothing was measured
    std::optional<double> condition_ic_a, condition_vce_v;
    // Quantity name ("hfe", "vbe_v", "ic_a", "ib_a", "vce_v") -> limits.
    std::map<std::string, Limits> spec;
    SamplingPlan sampling;
};

// The relative standard uncertainty given to a jig_measured value that states none: 0.1 %, a
// conservative figure for a bench ohmmeter reading (assumed; state your own per value or with
// jig_measured.uncertainty).
inline constexpr double kDefaultMeasuredRelU = 0.001;

// Reads a plan. InputError naming the file and key for a bad value or key, c >= n, min > max.
LotPlan load_lot_plan(const std::string& path);
LotPlan parse_lot_plan(const std::string& text, const std::string& origin);

// At lot start: the sample must fit in the lot (InputError naming the plan's sampling.n).
void validate_plan_quantity(const LotPlan& plan, long quantity);

// Against the loaded jig: the dut, every reading node and every jig_measured ref must exist
// (InputError naming the plan file and key).
void validate_plan_against_jig(const LotPlan& plan, const JigDesign& jig);

// Loads the plan's jig with `dut` as the socket, checks the plan against it and applies the
// measured values.
JigDesign load_plan_jig(const LotPlan& plan);

}  // namespace ampbench::lot
