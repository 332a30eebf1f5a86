// A board design (`ampbench-design/1`, DESIGN.md §4.2) as plain data, and its loader with
// one-line errors naming the file, the part ref and the field.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <vector>

namespace ampbench::circuit {

enum class PartKind { resistor, capacitor, inductor, npn, pnp, vsource, isource };

const char* kind_name(PartKind kind);
bool is_transistor(PartKind kind);

// Parameters of one transistor model: the Gummel–Poon subset ampbench implements (no high-level
// injection, no recombination current), in SPICE units.
struct TransistorModel {
    std::string name;
    double saturation_current_a = 1e-14;  // IS
    double beta = 100.0;                  // BF
    std::optional<double> beta_low;       // beta_range, for the tolerance band
    std::optional<double> beta_high;
    double reverse_beta = 1.0;            // BR
    double emission_coefficient = 1.0;    // NF (NR stays 1)
    double early_voltage_v = 0.0;         // VAF; 0 means none (infinite)
    double base_resistance_ohm = 0.0;     // RB
    double cje_f = 0.0;                   // CJE
    double cjc_f = 0.0;                   // CJC
    double junction_potential_v = 0.75;   // VJE = VJC
    double grading = 0.33;                // MJE = MJC
    double transit_time_s = 0.0;          // TF
    double forward_bias_coefficient = 0.5;  // FC (fixed, not a design key)
};

struct Part {
    std::string ref;
    PartKind kind = PartKind::resistor;
    // Two-terminal parts: {a, b} ({plus, minus} for a vsource, from-to for an isource).
    // Transistors: {collector, base, emitter}. Ground is spelled "0".
    std::vector<std::string> nodes;
    double value = 0.0;      // ohms, farads, henries, volts or amperes; unused for transistors
    double tolerance = 0.0;  // fraction (0.05 for 5 %)
    std::string model;       // transistors only
};

struct Design {
    std::string path;  // the file it came from ("" when parsed from text without an origin)
    std::string name;
    std::string supply_node;
    double supply_volts = 0.0;
    double supply_current_limit_a = 0.0;
    std::string stimulus_node;
    std::vector<Part> parts;
    std::map<std::string, TransistorModel> models;
    std::map<std::string, std::string> probes;  // probe name -> node
    std::optional<double> max_input_vpp;

    const Part* find_part(const std::string& ref) const;
    const TransistorModel& model_of(const Part& part) const;
    // The node of probe `name` ("in", "out"); InputError when the design has no such probe.
    const std::string& probe_node(const std::string& probe) const;
};

// Reads and validates a design file. InputError names the file, the part ref and the field for:
// an unknown kind or model, a bad value, a duplicate ref, a node without a DC path to ground, a
// part shorted to itself, a missing supply, stimulus or probe node, a non-positive R, C or L, and
// a newer format version.
Design load_design(const std::string& path);
// The same from text; `origin` stands for the file name in messages.
Design parse_design(const std::string& text, const std::string& origin);

// Normalises a node name: "gnd" / "GND" / "0" become "0".
std::string canonical_node(const std::string& name);

}  // namespace ampbench::circuit
