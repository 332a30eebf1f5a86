// The simulated board's parts, loading and evolution in virtual time.
#include "drivers/sim/board.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <numbers>
#include <tuple>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "core/errors.h"
#include "core/random.h"
#include "core/value.h"
#include "drivers/uri.h"
#include "fit/circuit/ac.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/steady_state.h"
#include "fit/circuit/transient.h"

namespace ampbench::sim {
namespace {

std::pair<std::string, std::string> split_ref(const std::string& text, const std::string& field) {
    const size_t colon = text.find(':');
    if (colon == std::string::npos || colon == 0 || colon + 1 == text.size())
        throw InputError("", field, fmt::format("expected REF:SETTING, not '{}'", text));
    return {text.substr(0, colon), text.substr(colon + 1)};
}

constexpr double kTwoPi = 2.0 * std::numbers::pi;

}  // namespace

void add_fault(BoardSpec& spec, const std::string& text) {
    auto [ref, kind] = split_ref(text, "fault");
    if (kind != "open" && kind != "short")
        throw InputError("", "fault", fmt::format("'{}': the fault must be open or short, not '{}'", text, kind));
    spec.faults.emplace_back(ref, kind);
}

void add_value(BoardSpec& spec, const std::string& text) {
    auto [ref, value] = split_ref(text, "value");
    parse_value(value, "value " + ref);
    spec.values.emplace_back(ref, value);
}

BoardSpec parse_board_spec(const std::string& sim_uri, const std::string& field) {
    const drivers::InstrumentUri uri = drivers::parse_uri(sim_uri, field);
    if (uri.scheme != "sim") throw InputError("", field, fmt::format("'{}' is not a sim:// address", sim_uri));
    BoardSpec spec;
    for (const auto& [key, value] : uri.query) {
        if (key == "seed") {
            const double s = parse_value(value, field + ": seed");
            if (s < 0 || s != std::floor(s) || s > 1.8e19)
                throw InputError("", field, fmt::format("seed must be a whole number, not '{}'", value));
            spec.seed = static_cast<std::uint64_t>(s);
        } else if (key == "fault") {
            add_fault(spec, value);
        } else if (key == "value") {
            add_value(spec, value);
        } else {
            throw InputError("", field, fmt::format("unknown sim:// key '{}' (expected seed, fault, value)", key));
        }
    }
    return spec;
}

circuit::Design draw_board(const circuit::Design& nominal, const BoardSpec& spec) {
    using circuit::PartKind;
    circuit::Design d = nominal;
    Random rng(spec.seed);
    std::map<std::string, circuit::TransistorModel> models;
    for (auto& p : d.parts) {
        if (circuit::is_transistor(p.kind)) {
            circuit::TransistorModel m = d.model_of(p);
            const double u = rng.uniform01();
            if (m.beta_low && m.beta_high) m.beta = *m.beta_low + u * (*m.beta_high - *m.beta_low);
            m.name = p.model + "@" + p.ref;
            m.beta_low.reset();
            m.beta_high.reset();
            p.model = m.name;
            models[m.name] = m;
        } else {
            // σ = tol/3, cut at ±tol: a part within its marked tolerance.
            const double z = std::clamp(rng.normal(), -3.0, 3.0);
            if (p.tolerance > 0 && p.kind != PartKind::vsource && p.kind != PartKind::isource)
                p.value *= 1.0 + z * p.tolerance / 3.0;
        }
    }
    d.models = models;
    auto find = [&](const std::string& ref, const char* what) -> circuit::Part& {
        for (auto& p : d.parts)
            if (p.ref == ref) return p;
        throw InputError(nominal.path, what, fmt::format("the design has no part '{}'", ref));
    };
    for (const auto& [ref, text] : spec.values) {
        circuit::Part& p = find(ref, "value");
        const double v = parse_value(text, "value " + ref);
        if (!(v > 0)) throw InputError(nominal.path, "value", fmt::format("{}: the value must be positive", ref));
        if (circuit::is_transistor(p.kind)) d.models[p.model].beta = v;
        else p.value = v;
    }
    for (const auto& [ref, kind] : spec.faults) {
        circuit::Part& p = find(ref, "fault");
        if (circuit::is_transistor(p.kind))
            throw InputError(nominal.path, "fault", fmt::format("{}: only two-terminal parts can be open or short", ref));
        p.kind = PartKind::resistor;
        p.value = kind == "open" ? kOpenOhms : kShortOhms;
        p.tolerance = 0;
        p.model.clear();
    }
    return d;
}

std::string reveal_design_json(const circuit::Design& d, const BenchFile& bench) {
    using nlohmann::ordered_json;
    ordered_json j;
    j["format"] = "ampbench-design/1";
    j["name"] = d.name + " (as simulated)";
    j["supply"] = {{"node", d.supply_node}, {"volts", d.supply_volts}, {"current_limit", d.supply_current_limit_a}};
    j["stimulus"] = {{"node", d.stimulus_node}};
    ordered_json parts = ordered_json::array();
    for (const auto& p : d.parts) {
        ordered_json e;
        e["ref"] = p.ref;
        e["kind"] = circuit::kind_name(p.kind);
        if (circuit::is_transistor(p.kind)) {
            e["nodes"] = {{"c", p.nodes[0]}, {"b", p.nodes[1]}, {"e", p.nodes[2]}};
            e["model"] = p.model;
        } else {
            e["nodes"] = p.nodes;
            e["value"] = p.value;
            if (p.tolerance > 0) e["tol"] = p.tolerance;
        }
        parts.push_back(e);
    }
    const std::vector<ScopeChannelSpec> channels = bench.scope.present ? bench.scope.channels : std::vector<ScopeChannelSpec>{};
    for (const auto& ch : channels) {
        auto it = d.probes.find(ch.probe);
        if (it == d.probes.end() || it->second == "0") continue;
        if (ch.ohms > 0)
            parts.push_back({{"ref", "PROBE" + ch.name + "_R"}, {"kind", "resistor"}, {"nodes", {it->second, "0"}}, {"value", ch.ohms}});
        if (ch.farads > 0)
            parts.push_back({{"ref", "PROBE" + ch.name + "_C"}, {"kind", "capacitor"}, {"nodes", {it->second, "0"}}, {"value", ch.farads}});
    }
    j["parts"] = parts;
    ordered_json models = ordered_json::object();
    for (const auto& [name, m] : d.models)
        models[name] = {{"saturation_current", m.saturation_current_a}, {"beta", m.beta},
                        {"reverse_beta", m.reverse_beta}, {"emission_coefficient", m.emission_coefficient},
                        {"early_voltage", m.early_voltage_v}, {"base_resistance", m.base_resistance_ohm},
                        {"cje", m.cje_f}, {"cjc", m.cjc_f}, {"junction_potential", m.junction_potential_v},
                        {"grading", m.grading}, {"transit_time", m.transit_time_s}};
    j["models"] = models;
    j["probes"] = d.probes;
    if (d.max_input_vpp) j["limits"] = {{"max_input_vpp", *d.max_input_vpp}};
    return j.dump(2) + "\n";
}

// ---------------------------------------------------------------------------------------------

struct SimulatedBoard::Impl {
    circuit::Design design;
    circuit::BenchLoading loading;
    int meter_node = 0;
    double meter_ohms = 10e6;
    bool supply_on = false;
    double supply_set_v = 0, supply_limit_a = 0.1, supply_eff_v = 0;
    bool limited = false;

    circuit::Netlist nl;
    std::unique_ptr<circuit::TransientEngine> engine;
    circuit::OperatingPoint op;
    std::unique_ptr<circuit::AcAnalysis> ac;
    std::vector<double> x_dc;  // DC with the generator at its offset
    circuit::TransientState state;
    double t = 0, phase = 0;
    double amp = 0, freq = 1e3, offset = 0;
    double change_t = 0;
    std::map<std::tuple<double, double, double>, circuit::PeriodicSteadyState> cache;
    circuit::ShootingOptions shooting;
    long steps = 0;

    circuit::Netlist make_netlist(double supply_v) const {
        circuit::Netlist n = circuit::build_netlist(design, loading);
        n.vsources[0].volts = supply_v;
        if (meter_node > 0) n.resistors.push_back({meter_node, 0, meter_ohms, -1});
        return n;
    }

    void rebuild() {
        const std::vector<double> guess = op.x;
        nl = make_netlist(supply_on ? supply_eff_v : 0.0);
        engine = std::make_unique<circuit::TransientEngine>(nl);
        op = circuit::solve_operating_point(nl, {}, guess.size() == static_cast<size_t>(nl.unknown_count()) ? &guess : nullptr);
        ac = std::make_unique<circuit::AcAnalysis>(nl, op);
        x_dc = offset != 0 ? engine->dc_solution(offset, op.x) : op.x;
        cache.clear();
        if (state.x.size() != op.x.size()) state = engine->state_at_rest(x_dc);
    }

    circuit::SineStimulus stimulus() const { return {amp, freq, offset, 0.0}; }

    const circuit::PeriodicSteadyState& periodic() {
        const auto key = std::make_tuple(amp, freq, offset);
        auto it = cache.find(key);
        if (it != cache.end()) return it->second;
        if (cache.size() > 64) cache.clear();
        const circuit::SineStimulus g = stimulus();
        const circuit::TransientState guess = circuit::ac_initial_guess(*engine, x_dc, ac->solution(freq), g);
        return cache.emplace(key, circuit::shoot_periodic(*engine, g, guess, shooting)).first->second;
    }

    void integrate_span(double dt) {
        if (dt <= 0) return;
        const double h = 1.0 / (freq * shooting.steps_per_period);
        const long n = std::max(1L, static_cast<long>(std::ceil(dt / h - 1e-9)));
        engine->integrate(state, phase / (kTwoPi * freq), dt / static_cast<double>(n), n, stimulus());
        steps += n;
        t += dt;
        phase = std::fmod(phase + kTwoPi * freq * dt, kTwoPi);
    }

    void advance_to(double target) {
        const double period = 1.0 / freq;
        while (target - t > 1e-15 * std::max(1.0, std::abs(t))) {
            const double left = target - t;
            if (left <= 3 * period) {
                integrate_span(left);
                break;
            }
            const double warmup = change_t + 3 * period - t;
            if (warmup > 1e-9 * period) {
                // Right after a change, integrate: the transition matrix is a linearisation.
                integrate_span(std::min(left, warmup));
                if (left >= warmup) change_t = -INFINITY;
                continue;
            }
            const double to_zero = phase > 0 ? (kTwoPi - phase) / (kTwoPi * freq) : 0.0;
            integrate_span(to_zero);
            phase = 0;
            const auto k = static_cast<long long>(std::floor((target - t) / period)) - 1;
            if (k > 0) {
                state = circuit::settle_periods(periodic(), state, k);
                t += static_cast<double>(k) * period;
            }
        }
        t = std::max(t, target);
    }

    // The periodic orbit at the generator's present phase.
    void jump_to_steady_state() {
        const circuit::PeriodicSteadyState& pss = periodic();
        state = pss.start;
        const double dt = phase / (kTwoPi * freq);
        const double saved_phase = phase, saved_t = t;
        phase = 0;
        integrate_span(dt);
        phase = saved_phase;
        t = saved_t;
    }

    double supply_current_at(double volts) {
        circuit::Netlist n = make_netlist(volts);
        const circuit::OperatingPoint p = circuit::solve_operating_point(n, {}, &op.x);
        return p.supply_current_a;
    }

    void apply_supply() {
        limited = false;
        supply_eff_v = supply_set_v;
        if (supply_on && supply_set_v > 0 && supply_current_at(supply_set_v) > supply_limit_a) {
            // Constant-current mode: the terminal voltage where the board draws the limit.
            double lo = 0, hi = supply_set_v;
            for (int i = 0; i < 40; ++i) {
                const double mid = 0.5 * (lo + hi);
                (supply_current_at(mid) > supply_limit_a ? hi : lo) = mid;
            }
            supply_eff_v = lo;
            limited = true;
        }
    }
};

SimulatedBoard::SimulatedBoard(circuit::Design drawn, const BenchFile& bench) : impl_(std::make_unique<Impl>()) {
    Impl& p = *impl_;
    p.design = std::move(drawn);
    p.loading = circuit::bench_loading(bench);
    if (bench.meter.present) p.meter_ohms = bench.meter.input_ohms;
    p.rebuild();
}

SimulatedBoard::~SimulatedBoard() = default;

const circuit::Design& SimulatedBoard::design() const { return impl_->design; }

int SimulatedBoard::node_of(const std::string& node_name) const {
    const int n = impl_->nl.node_index(circuit::canonical_node(node_name));
    return n < 0 ? 0 : n;
}

int SimulatedBoard::node_of_probe(const std::string& probe) const {
    auto it = impl_->design.probes.find(probe);
    return it == impl_->design.probes.end() ? 0 : node_of(it->second);
}

void SimulatedBoard::set_supply(double t_s, bool on, double volts, double current_limit_a) {
    Impl& p = *impl_;
    p.advance_to(t_s);
    if (on == p.supply_on && volts == p.supply_set_v && current_limit_a == p.supply_limit_a) return;
    p.supply_on = on;
    p.supply_set_v = volts;
    p.supply_limit_a = current_limit_a;
    p.apply_supply();
    p.rebuild();
    // Power-up and supply changes are taken as settled at once (see DEVELOPERS.md).
    p.jump_to_steady_state();
    p.change_t = p.t;
}

void SimulatedBoard::set_generator(double t_s, double emf_peak_v, double freq_hz, double offset_v) {
    Impl& p = *impl_;
    p.advance_to(t_s);
    if (emf_peak_v == p.amp && freq_hz == p.freq && offset_v == p.offset) return;
    const bool offset_changed = offset_v != p.offset;
    p.amp = emf_peak_v;
    p.freq = freq_hz;
    p.offset = offset_v;
    if (offset_changed) p.x_dc = p.offset != 0 ? p.engine->dc_solution(p.offset, p.op.x) : p.op.x;
    p.change_t = p.t;
}

void SimulatedBoard::route_meter(double t_s, int node, double ohms) {
    Impl& p = *impl_;
    p.advance_to(t_s);
    if (node == p.meter_node && ohms == p.meter_ohms) return;
    p.meter_node = node;
    p.meter_ohms = ohms;
    p.rebuild();
    p.change_t = p.t;
}

double SimulatedBoard::dc_volts(double t_s, int node) {
    impl_->advance_to(t_s);
    return circuit::TransientEngine::node_voltage(impl_->x_dc, node);
}

double SimulatedBoard::supply_current_a(double t_s) {
    Impl& p = *impl_;
    p.advance_to(t_s);
    if (!p.supply_on) return 0.0;
    return -p.x_dc[static_cast<size_t>(p.nl.branch_unknown(p.nl.vsources[0].branch))];
}

double SimulatedBoard::supply_volts(double t_s) {
    impl_->advance_to(t_s);
    return impl_->supply_on ? impl_->supply_eff_v : 0.0;
}

bool SimulatedBoard::current_limited() const { return impl_->limited; }
double SimulatedBoard::time_s() const { return impl_->t; }
double SimulatedBoard::generator_freq_hz() const { return impl_->freq; }
long SimulatedBoard::integrated_steps() const { return impl_->steps; }

BoardRecord SimulatedBoard::capture(double t_s, const std::vector<int>& nodes, int trigger_node, double level_v,
                                    double length_s, double margin_s) {
    Impl& p = *impl_;
    p.advance_to(t_s);
    BoardRecord rec;
    const double period = 1.0 / p.freq;
    const int per = p.shooting.steps_per_period;
    const double h = period / per;
    rec.trigger_s = p.t;
    if (trigger_node > 0 && p.amp > 0) {
        circuit::TransientState probe = p.state;
        double prev = circuit::TransientEngine::node_voltage(probe.x, trigger_node);
        long k = 0;
        bool found = false;
        double when = 0;
        const double tau0 = p.phase / (kTwoPi * p.freq);
        const long max_steps = per * 3 / 2 + 2;
        // Scans ahead on a copy of the state; the board itself moves on below.
        struct Stop {};
        try {
            p.engine->integrate(probe, tau0, h, max_steps, p.stimulus(), nullptr, [&](double, const double* x) {
                const double v = x[trigger_node - 1];
                ++k;
                if (prev < level_v && v >= level_v) {
                    when = (static_cast<double>(k - 1) + (level_v - prev) / (v - prev)) * h;
                    found = true;
                    throw Stop{};
                }
                prev = v;
            });
        } catch (const Stop&) {
        }
        p.steps += k;
        rec.triggered = found;
        if (found) rec.trigger_s = p.t + when;
    }
    const double start = std::max(p.t, rec.trigger_s - margin_s);
    p.advance_to(start);
    const double span = rec.trigger_s + length_s + margin_s - p.t;
    const double h_rec = std::min(h, span / 256.0);
    const long n = std::max(2L, static_cast<long>(std::ceil(span / h_rec)));
    rec.t0_s = p.t;
    rec.h_s = span / static_cast<double>(n);
    rec.volts.assign(nodes.size(), {});
    for (auto& v : rec.volts) v.reserve(static_cast<size_t>(n + 1));
    auto record = [&](const double* x) {
        for (size_t i = 0; i < nodes.size(); ++i)
            rec.volts[i].push_back(nodes[i] > 0 ? x[nodes[i] - 1] : 0.0);
    };
    record(p.state.x.data());
    p.engine->integrate(p.state, p.phase / (kTwoPi * p.freq), rec.h_s, n, p.stimulus(), nullptr,
                        [&](double, const double* x) { record(x); });
    p.steps += n;
    p.t += span;
    p.phase = std::fmod(p.phase + kTwoPi * p.freq * span, kTwoPi);
    return rec;
}

}  // namespace ampbench::sim
