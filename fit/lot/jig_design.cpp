// Reads the resistors, supply and socket transistor of a design file for the jig computation.
#include "fit/lot/jig_design.h"

#include <algorithm>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "core/errors.h"
#include "core/json_read.h"

namespace ampbench::lot {
namespace {

// A resistor with no stated tolerance is taken at 5 % (common practice: the usual carbon-film
// grade), so its uncertainty is not understated.
constexpr double kDefaultTolerance = 0.05;

void add_node(std::vector<std::string>& nodes, const std::string& node) {
    if (std::find(nodes.begin(), nodes.end(), node) == nodes.end()) nodes.push_back(node);
}

JigDesign read(const JsonView& root, const std::string& dut) {
    root.require_format("ampbench-design/1");
    JigDesign jig;
    jig.path = root.file();
    jig.name = root.string_or("name", "");
    jig.dut = dut;
    const JsonView supply = root.at("supply");
    jig.supply_node = canonical_node(supply.string("node"));
    jig.supply_v = supply.number("volts");
    jig.supply_current_limit_a = supply.optional_number("current_limit");
    add_node(jig.nodes, "0");
    add_node(jig.nodes, jig.supply_node);

    std::string dut_model;
    bool found_dut = false;
    for (const JsonView& part : root.at("parts").elements()) {
        const std::string ref = part.string("ref");
        const std::string kind = part.string("kind");
        jig.part_refs.push_back(ref);
        const JsonView nodes = part.at("nodes");
        if (kind == "npn" || kind == "pnp") {
            jig.transistors.push_back(ref);
            if (!nodes.is_object()) nodes.fail_here("expected {\"c\": .., \"b\": .., \"e\": ..}");
            const std::string c = canonical_node(nodes.string("c"));
            const std::string b = canonical_node(nodes.string("b"));
            const std::string e = canonical_node(nodes.string("e"));
            for (const auto& n : {c, b, e}) add_node(jig.nodes, n);
            if (ref == dut) {
                found_dut = true;
                jig.pnp = kind == "pnp";
                jig.node_c = c;
                jig.node_b = b;
                jig.node_e = e;
                dut_model = part.string("model");
            } else {
                for (const auto& n : {c, b, e}) jig.other_connections.emplace_back(ref, n);
            }
            continue;
        }
        if (!nodes.is_array()) nodes.fail_here("expected a list of node names");
        std::vector<std::string> names;
        for (const JsonView& n : nodes.elements()) names.push_back(canonical_node(n.as_string()));
        for (const auto& n : names) add_node(jig.nodes, n);
        if (kind == "resistor") {
            if (names.size() != 2) nodes.fail_here("a resistor has two nodes");
            JigResistor r;
            r.ref = ref;
            r.node_a = names[0];
            r.node_b = names[1];
            r.ohms = part.number("value");
            if (!(r.ohms > 0.0)) part.fail("value", "a resistance must be positive");
            r.tolerance = part.tolerance_or("tol", kDefaultTolerance);
            jig.resistors.push_back(std::move(r));
        } else if (kind != "capacitor") {
            for (const auto& n : names) jig.other_connections.emplace_back(ref, n);
        }
    }
    if (!found_dut) {
        throw InputError(jig.path, "parts",
                         fmt::format("no transistor '{}' (the plan's dut) in the design; "
                                     "transistors here: {}",
                                     dut, jig.transistors.empty()
                                              ? std::string("none")
                                              : fmt::format("{}", fmt::join(jig.transistors, ", "))));
    }
    const JsonView model = root.at("models").at(dut_model);
    jig.model.name = dut_model;
    jig.model.saturation_current = model.number_or("saturation_current", 1e-14);
    jig.model.beta = model.number_or("beta", 100.0);
    jig.model.early_voltage = model.number_or("early_voltage", 0.0);
    jig.model.base_resistance = model.number_or("base_resistance", 0.0);
    if (auto range = model.find("beta_range")) {
        if (range->size() != 2) range->fail_here("expected [min, max]");
        jig.model.beta_min = range->at(0).as_number();
        jig.model.beta_max = range->at(1).as_number();
    }
    return jig;
}

}  // namespace

std::string canonical_node(const std::string& node) { return node == "gnd" ? "0" : node; }

bool JigDesign::has_node(const std::string& node) const {
    return std::find(nodes.begin(), nodes.end(), canonical_node(node)) != nodes.end();
}

const JigResistor* JigDesign::resistor(const std::string& ref) const {
    for (const auto& r : resistors)
        if (r.ref == ref) return &r;
    return nullptr;
}

JigResistor* JigDesign::resistor(const std::string& ref) {
    for (auto& r : resistors)
        if (r.ref == ref) return &r;
    return nullptr;
}

JigDesign load_jig_design(const std::string& path, const std::string& dut) {
    const JsonDocument doc = JsonDocument::load(path);
    return read(JsonView(doc), dut);
}

JigDesign parse_jig_design(const std::string& text, const std::string& origin,
                           const std::string& dut) {
    const JsonDocument doc = JsonDocument::parse(text, origin);
    return read(JsonView(doc), dut);
}

}  // namespace ampbench::lot
