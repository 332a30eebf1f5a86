// Loader for `ampbench-design/1`: JSON through JsonView, then the topology checks.
#include "fit/circuit/design.h"

#include <algorithm>
#include <cmath>
#include <numeric>

#include <fmt/format.h>

#include "core/errors.h"
#include "core/json_read.h"

namespace ampbench::circuit {
namespace {

constexpr const char* kFormat = "ampbench-design/1";

std::string part_field(size_t index, const std::string& ref, std::string_view key) {
    if (ref.empty()) return fmt::format("parts[{}].{}", index, key);
    return fmt::format("parts[{}] ({}).{}", index, ref, key);
}

// Runs `read`, re-labelling any InputError with the part's field name.
template <class F>
auto relabel(const std::string& file, const std::string& field, F&& read) {
    try {
        return read();
    } catch (const InputError& e) {
        throw InputError(file, field, e.text());
    }
}

PartKind parse_kind(const std::string& text, const std::string& file, const std::string& field) {
    static const std::pair<const char*, PartKind> kinds[] = {
        {"resistor", PartKind::resistor}, {"capacitor", PartKind::capacitor},
        {"inductor", PartKind::inductor}, {"npn", PartKind::npn},
        {"pnp", PartKind::pnp},           {"vsource", PartKind::vsource},
        {"isource", PartKind::isource}};
    for (const auto& [name, kind] : kinds)
        if (text == name) return kind;
    throw InputError(file, field,
                     fmt::format("unknown kind '{}' (use resistor, capacitor, inductor, npn, pnp, "
                                 "vsource or isource)",
                                 text));
}

TransistorModel parse_model(const JsonView& m, const std::string& name) {
    m.reject_unknown_keys({"saturation_current", "beta", "beta_range", "early_voltage",
                           "base_resistance", "cje", "cjc", "transit_time", "junction_potential",
                           "grading", "reverse_beta", "emission_coefficient", "note"});
    TransistorModel model;
    model.name = name;
    auto positive = [&](std::string_view key, double fallback) {
        const double v = m.number_or(key, fallback);
        if (!(v > 0) || !std::isfinite(v)) m.fail(key, fmt::format("must be positive, not {}", v));
        return v;
    };
    auto non_negative = [&](std::string_view key) {
        const double v = m.number_or(key, 0.0);
        if (!(v >= 0) || !std::isfinite(v))
            m.fail(key, fmt::format("must not be negative, not {}", v));
        return v;
    };
    model.saturation_current_a = positive("saturation_current", model.saturation_current_a);
    model.beta = positive("beta", model.beta);
    model.reverse_beta = positive("reverse_beta", model.reverse_beta);
    model.emission_coefficient = positive("emission_coefficient", model.emission_coefficient);
    model.junction_potential_v = positive("junction_potential", model.junction_potential_v);
    model.grading = positive("grading", model.grading);
    if (model.grading >= 1.0) m.fail("grading", "must be below 1");
    model.early_voltage_v = non_negative("early_voltage");
    model.base_resistance_ohm = non_negative("base_resistance");
    model.cje_f = non_negative("cje");
    model.cjc_f = non_negative("cjc");
    model.transit_time_s = non_negative("transit_time");
    if (auto range = m.find("beta_range")) {
        if (!range->is_array() || range->size() != 2)
            m.fail("beta_range", "expected two values [low, high]");
        const double lo = range->at(0).as_number();
        const double hi = range->at(1).as_number();
        if (!(lo > 0) || !(hi >= lo))
            m.fail("beta_range", fmt::format("needs 0 < low <= high, not [{}, {}]", lo, hi));
        model.beta_low = lo;
        model.beta_high = hi;
    }
    return model;
}

// Union-find over node names, for the DC-path check.
class NodeSets {
public:
    size_t id(const std::string& node) {
        auto [it, added] = index_.try_emplace(node, parent_.size());
        if (added) parent_.push_back(parent_.size());
        return it->second;
    }
    size_t root(size_t i) {
        while (parent_[i] != i) i = parent_[i] = parent_[parent_[i]];
        return i;
    }
    void join(const std::string& a, const std::string& b) {
        const size_t ra = root(id(a)), rb = root(id(b));
        parent_[ra] = rb;
    }
    bool connected(const std::string& a, const std::string& b) {
        return root(id(a)) == root(id(b));
    }

private:
    std::map<std::string, size_t> index_;
    std::vector<size_t> parent_;
};

void check_topology(const Design& d) {
    const std::string& file = d.path;
    NodeSets sets;
    std::map<std::string, size_t> first_user;  // node -> index of the first part on it
    for (size_t i = 0; i < d.parts.size(); ++i) {
        const Part& p = d.parts[i];
        for (const auto& n : p.nodes) first_user.try_emplace(n, i);
        if (p.kind == PartKind::capacitor || p.kind == PartKind::isource) {
            for (const auto& n : p.nodes) sets.id(n);
            continue;
        }
        // Resistors, inductors, voltage sources and transistor junctions conduct at DC.
        for (size_t k = 1; k < p.nodes.size(); ++k) sets.join(p.nodes[0], p.nodes[k]);
    }
    auto require_used = [&](const std::string& node, const std::string& field) {
        if (node == "0") throw InputError(file, field, "must not be ground");
        if (!first_user.count(node))
            throw InputError(file, field,
                             fmt::format("node '{}' is not connected to any part", node));
    };
    require_used(d.supply_node, "supply.node");
    require_used(d.stimulus_node, "stimulus.node");
    for (const auto& [name, node] : d.probes)
        if (node != "0") require_used(node, "probes." + name);
    // The supply and the generator (0 V behind its output resistance) tie their nodes to ground.
    sets.join(d.supply_node, "0");
    sets.join(d.stimulus_node, "0");
    sets.id("0");
    // Report the first floating node in file order, on the part that names it.
    for (size_t i = 0; i < d.parts.size(); ++i)
        for (const auto& node : d.parts[i].nodes)
            if (!sets.connected(node, "0"))
                throw InputError(file, part_field(i, d.parts[i].ref, "nodes"),
                                 fmt::format("node '{}' has no DC path to ground", node));
}

}  // namespace

const char* kind_name(PartKind kind) {
    switch (kind) {
        case PartKind::resistor: return "resistor";
        case PartKind::capacitor: return "capacitor";
        case PartKind::inductor: return "inductor";
        case PartKind::npn: return "npn";
        case PartKind::pnp: return "pnp";
        case PartKind::vsource: return "vsource";
        case PartKind::isource: return "isource";
    }
    return "?";
}

bool is_transistor(PartKind kind) { return kind == PartKind::npn || kind == PartKind::pnp; }

std::string canonical_node(const std::string& name) {
    if (name == "0" || name == "gnd" || name == "GND" || name == "Gnd") return "0";
    return name;
}

const Part* Design::find_part(const std::string& ref) const {
    for (const auto& p : parts)
        if (p.ref == ref) return &p;
    return nullptr;
}

const TransistorModel& Design::model_of(const Part& part) const {
    auto it = models.find(part.model);
    if (it == models.end())
        throw InputError(path, part.ref + ".model", fmt::format("unknown model '{}'", part.model));
    return it->second;
}

const std::string& Design::probe_node(const std::string& probe) const {
    auto it = probes.find(probe);
    if (it == probes.end())
        throw InputError(path, "probes." + probe, "the design has no such probe");
    return it->second;
}

namespace {

Design read_design(const JsonDocument& doc) {
    const std::string& origin = doc.origin();
    const JsonView root(doc);
    root.require_format(kFormat);
    root.reject_unknown_keys({"format", "name", "description", "supply", "stimulus", "parts",
                              "models", "probes", "limits"});
    Design d;
    d.path = origin;
    d.name = root.string_or("name", "");

    const JsonView supply = root.at("supply");
    supply.reject_unknown_keys({"node", "volts", "current_limit"});
    d.supply_node = canonical_node(supply.string("node"));
    d.supply_volts = supply.number("volts");
    d.supply_current_limit_a = supply.number("current_limit");
    if (!(d.supply_current_limit_a > 0))
        supply.fail("current_limit", "must be positive (a supply is never used without a limit)");

    const JsonView stimulus = root.at("stimulus");
    stimulus.reject_unknown_keys({"node"});
    d.stimulus_node = canonical_node(stimulus.string("node"));

    if (auto models = root.find("models")) {
        if (!models->is_object()) models->fail_here("expected an object of models");
        for (const auto& name : models->keys()) d.models.emplace(name, parse_model(models->at(name), name));
    }

    const JsonView parts = root.at("parts");
    const auto elements = parts.elements();
    if (elements.empty()) parts.fail_here("the design has no parts");
    for (size_t i = 0; i < elements.size(); ++i) {
        const JsonView& e = elements[i];
        if (!e.is_object()) e.fail_here("expected a part object");
        Part p;
        p.ref = relabel(origin, part_field(i, "", "ref"), [&] { return e.string("ref"); });
        if (p.ref.empty()) throw InputError(origin, part_field(i, "", "ref"), "must not be empty");
        auto field = [&](std::string_view key) { return part_field(i, p.ref, key); };
        for (const auto& k : e.keys()) {
            static const std::vector<std::string> allowed{"ref", "kind", "nodes", "value",
                                                          "tol", "model", "note"};
            if (std::find(allowed.begin(), allowed.end(), k) == allowed.end())
                throw InputError(origin, field(k), "unknown key");
        }
        if (d.find_part(p.ref))
            throw InputError(origin, field("ref"), fmt::format("duplicate ref '{}'", p.ref));
        p.kind = parse_kind(relabel(origin, field("kind"), [&] { return e.string("kind"); }),
                            origin, field("kind"));
        if (is_transistor(p.kind)) {
            const JsonView nodes = relabel(origin, field("nodes"), [&] { return e.at("nodes"); });
            if (!nodes.is_object())
                throw InputError(origin, field("nodes"), "expected {\"c\": …, \"b\": …, \"e\": …}");
            for (const char* t : {"c", "b", "e"}) {
                p.nodes.push_back(canonical_node(
                    relabel(origin, field(std::string("nodes.") + t),
                            [&] { return nodes.string(t); })));
            }
            for (const auto& k : nodes.keys())
                if (k != "c" && k != "b" && k != "e")
                    throw InputError(origin, field("nodes." + k), "unknown terminal (use c, b, e)");
            if (p.nodes[0] == p.nodes[1] && p.nodes[1] == p.nodes[2])
                throw InputError(origin, field("nodes"),
                                 fmt::format("all terminals on node '{}': the part is shorted "
                                             "to itself",
                                             p.nodes[0]));
            p.model = relabel(origin, field("model"), [&] { return e.string("model"); });
            if (!d.models.count(p.model))
                throw InputError(origin, field("model"), fmt::format("unknown model '{}'", p.model));
            if (e.has("value")) throw InputError(origin, field("value"), "a transistor takes a model, not a value");
            p.tolerance = 0.0;
        } else {
            const JsonView nodes = relabel(origin, field("nodes"), [&] { return e.at("nodes"); });
            if (!nodes.is_array() || nodes.size() != 2)
                throw InputError(origin, field("nodes"), "expected two nodes [\"a\", \"b\"]");
            for (size_t k = 0; k < 2; ++k)
                p.nodes.push_back(canonical_node(
                    relabel(origin, field("nodes"), [&] { return nodes.at(k).as_string(); })));
            if (p.nodes[0] == p.nodes[1])
                throw InputError(origin, field("nodes"),
                                 fmt::format("both ends on node '{}': the part is shorted to "
                                             "itself",
                                             p.nodes[0]));
            p.value = relabel(origin, field("value"), [&] { return e.number("value"); });
            if (!std::isfinite(p.value))
                throw InputError(origin, field("value"), "must be a finite number");
            const bool passive = p.kind == PartKind::resistor || p.kind == PartKind::capacitor ||
                                 p.kind == PartKind::inductor;
            if (passive && !(p.value > 0))
                throw InputError(origin, field("value"),
                                 fmt::format("a {} needs a positive value, not {}",
                                             kind_name(p.kind), p.value));
            p.tolerance = relabel(origin, field("tol"), [&] { return e.tolerance_or("tol", 0.0); });
            if (e.has("model")) throw InputError(origin, field("model"), "only transistors take a model");
        }
        d.parts.push_back(std::move(p));
    }

    const JsonView probes = root.at("probes");
    if (!probes.is_object()) probes.fail_here("expected an object of probe name -> node");
    for (const auto& name : probes.keys())
        d.probes.emplace(name, canonical_node(probes.string(name)));
    for (const char* required : {"in", "out"})
        if (!d.probes.count(required)) probes.fail(required, "missing");

    if (auto limits = root.find("limits")) {
        limits->reject_unknown_keys({"max_input_vpp"});
        d.max_input_vpp = limits->optional_number("max_input_vpp");
    }
    check_topology(d);
    return d;
}

}  // namespace

Design parse_design(const std::string& text, const std::string& origin) {
    return read_design(JsonDocument::parse(text, origin));
}

Design load_design(const std::string& path) { return read_design(JsonDocument::load(path)); }

}  // namespace ampbench::circuit
