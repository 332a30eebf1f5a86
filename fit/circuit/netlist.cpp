// Design -> Netlist: node numbering, internal base nodes, the supply, generator and probe loading.
#include "fit/circuit/netlist.h"

#include <map>

#include <fmt/format.h>

#include "core/bench_file.h"
#include "core/errors.h"

namespace ampbench::circuit {

BenchLoading bench_loading(const BenchFile& bench) {
    BenchLoading out;
    if (bench.generator.present) out.generator_ohms = bench.generator.output_ohms;
    if (bench.scope.present)
        for (const auto& ch : bench.scope.channels)
            out.probes.push_back({ch.probe, ch.ohms, ch.farads});
    return out;
}

int Netlist::node_index(const std::string& name) const {
    for (size_t i = 0; i < node_names.size(); ++i)
        if (node_names[i] == name) return static_cast<int>(i);
    return -1;
}

Netlist build_netlist(const Design& design, const BenchLoading& bench) {
    Netlist nl;
    nl.source = design.path;
    nl.node_names.push_back("0");
    std::map<std::string, int> index{{"0", 0}};
    auto node = [&](const std::string& name) {
        auto [it, added] = index.try_emplace(name, static_cast<int>(nl.node_names.size()));
        if (added) nl.node_names.push_back(name);
        return it->second;
    };
    for (const auto& p : design.parts)
        for (const auto& n : p.nodes) node(n);
    nl.vsources.push_back({node(design.supply_node), 0, design.supply_volts, -1, nl.branch_count++});

    for (size_t i = 0; i < design.parts.size(); ++i) {
        const Part& p = design.parts[i];
        const int part = static_cast<int>(i);
        const int a = node(p.nodes[0]);
        const int b = p.nodes.size() > 1 ? node(p.nodes[1]) : 0;
        switch (p.kind) {
            case PartKind::resistor: nl.resistors.push_back({a, b, p.value, part}); break;
            case PartKind::capacitor: nl.capacitors.push_back({a, b, p.value, part}); break;
            case PartKind::inductor:
                nl.inductors.push_back({a, b, p.value, part, nl.branch_count++});
                break;
            case PartKind::vsource:
                nl.vsources.push_back({a, b, p.value, part, nl.branch_count++});
                break;
            case PartKind::isource: nl.isources.push_back({a, b, p.value, part}); break;
            case PartKind::npn:
            case PartKind::pnp: {
                const TransistorModel& m = design.model_of(p);
                Transistor t;
                t.ref = p.ref;
                t.part = part;
                t.c = a;
                t.b = b;
                t.e = node(p.nodes[2]);
                BjtParams& bp = t.params;
                bp.polarity = p.kind == PartKind::npn ? 1 : -1;
                bp.is_a = m.saturation_current_a;
                bp.bf = m.beta;
                bp.br = m.reverse_beta;
                bp.nf = m.emission_coefficient;
                bp.vaf_v = m.early_voltage_v;
                bp.rb_ohm = m.base_resistance_ohm;
                bp.cje_f = m.cje_f;
                bp.cjc_f = m.cjc_f;
                bp.vje_v = bp.vjc_v = m.junction_potential_v;
                bp.mje = bp.mjc = m.grading;
                bp.fc = m.forward_bias_coefficient;
                bp.tf_s = m.transit_time_s;
                t.b_internal = t.b;
                nl.transistors.push_back(std::move(t));
                break;
            }
        }
    }
    // Internal base nodes go after the board's nodes so board node numbers stay stable.
    for (auto& t : nl.transistors)
        if (t.params.rb_ohm > 0) t.b_internal = node(t.ref + "#b");

    nl.stimulus = node(design.stimulus_node);
    if (!(bench.generator_ohms > 0))
        throw InputError("", "generator.output_ohms",
                         fmt::format("must be positive, not {}", bench.generator_ohms));
    nl.generator_ohms = bench.generator_ohms;
    nl.in = node(design.probe_node("in"));
    nl.out = node(design.probe_node("out"));
    for (const auto& load : bench.probes) {
        auto it = design.probes.find(load.probe);
        if (it == design.probes.end())
            throw InputError(design.path, "probes",
                             fmt::format("the bench probes '{}', which the design does not name",
                                         load.probe));
        const int n = node(it->second);
        if (n == 0) continue;
        if (load.ohms > 0) nl.resistors.push_back({n, 0, load.ohms, -1});
        if (load.farads > 0) nl.capacitors.push_back({n, 0, load.farads, -1});
    }
    return nl;
}

PartValues nominal_values(const Design& design) {
    PartValues v;
    v.value.reserve(design.parts.size());
    for (const auto& p : design.parts)
        v.value.push_back(is_transistor(p.kind) ? design.model_of(p).beta : p.value);
    return v;
}

void apply_values(const PartValues& values, Netlist& nl) {
    auto at = [&](int part) { return values.value[static_cast<size_t>(part)]; };
    for (auto& r : nl.resistors)
        if (r.part >= 0) r.ohms = at(r.part);
    for (auto& c : nl.capacitors)
        if (c.part >= 0) c.farads = at(c.part);
    for (auto& l : nl.inductors)
        if (l.part >= 0) l.henries = at(l.part);
    for (auto& s : nl.vsources)
        if (s.part >= 0) s.volts = at(s.part);
    for (auto& s : nl.isources)
        if (s.part >= 0) s.amps = at(s.part);
    for (auto& t : nl.transistors)
        if (t.part >= 0) t.params.bf = at(t.part);
}

}  // namespace ampbench::circuit
