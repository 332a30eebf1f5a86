// The test jig as the lot inspection needs it: the resistors, the supply and the socket
// transistor of an ordinary `ampbench-design/1` file (DESIGN.md §4.2).
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace ampbench::lot {

struct JigResistor {
    std::string ref;
    std::string node_a, node_b;
    double ohms = 0.0;       // the value used: measured where given, else nominal
    double tolerance = 0.0;  // fraction, of the nominal value
    // Set when jig_measured gives the value: its relative standard uncertainty and the date.
    std::optional<double> measured_rel_u;
    std::string measured_on;
};

// The parameters of the socket's model card that a simulation of the jig needs.
struct JigTransistorModel {
    std::string name;
    double saturation_current = 1e-14;  // IS, A
    double beta = 100.0;                // BF
    double early_voltage = 0.0;         // VAF, V; 0 = none
    double base_resistance = 0.0;       // RB, ohm
    std::optional<double> beta_min, beta_max;  // beta_range
};

struct JigDesign {
    std::string path;
    std::string name;
    std::string supply_node;
    double supply_v = 0.0;
    std::optional<double> supply_current_limit_a;
    std::string dut;       // ref of the socket transistor
    bool pnp = false;
    std::string node_c, node_b, node_e;
    JigTransistorModel model;
    std::vector<JigResistor> resistors;
    std::vector<std::string> nodes;        // every node of the design, ground as "0"
    std::vector<std::string> transistors;  // refs of every npn/pnp part
    std::vector<std::string> part_refs;    // refs of every part
    // (ref, node) for every connection of a part other than a resistor, a capacitor or the dut:
    // such a part at a DUT terminal would carry current the resistors do not account for.
    std::vector<std::pair<std::string, std::string>> other_connections;

    bool has_node(const std::string& node) const;
    const JigResistor* resistor(const std::string& ref) const;
    JigResistor* resistor(const std::string& ref);
};

// "0" and "gnd" name ground (DESIGN.md §4.2); both map to "0".
std::string canonical_node(const std::string& node);

// Reads the jig design at `path` with `dut` as the socket. InputError naming the file and key
// for a missing supply, an unknown dut (or one that is not a transistor), or a bad value.
// Read directly with core/json_read.h: only the parts the jig computation needs are taken.
JigDesign load_jig_design(const std::string& path, const std::string& dut);
JigDesign parse_jig_design(const std::string& text, const std::string& origin,
                           const std::string& dut);

}  // namespace ampbench::lot
