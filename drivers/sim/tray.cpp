// The virtual tray: seeded transistors for the jig's socket and a virtual bench per inserted
// device, behind transports that always talk to the jig as it is now.
#include "drivers/sim/tray.h"

#include <cmath>
#include <fstream>
#include <functional>
#include <sstream>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "core/errors.h"
#include "core/random.h"
#include "core/value.h"
#include "drivers/sim/virtual_bench.h"
#include "drivers/transport/transport.h"
#include "drivers/uri.h"

namespace ampbench::sim {
namespace {

constexpr const char* kDummyNode = "sim_no_generator";

std::uint64_t whole_number(const std::string& value, const std::string& field, const char* key) {
    const double s = parse_value(value, field + ": " + key);
    if (s < 0 || s != std::floor(s) || s > 1.8e19)
        throw InputError("", field, fmt::format("{} must be a whole number, not '{}'", key, value));
    return static_cast<std::uint64_t>(s);
}

std::string read_file(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    if (!in) throw InputError(path, "", "cannot read the jig design");
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
}

}  // namespace

std::optional<TraySpec> parse_tray_spec(const std::string& sim_uri, const std::string& field) {
    const drivers::InstrumentUri uri = drivers::parse_uri(sim_uri, field);
    if (uri.scheme != "sim") throw InputError("", field, fmt::format("'{}' is not a sim:// address", sim_uri));
    TraySpec spec;
    bool tray = false, seed_given = false;
    for (const auto& [key, value] : uri.query) {
        if (key == "tray") {
            spec.tray_seed = whole_number(value, field, "tray");
            tray = true;
        } else if (key == "defective") {
            const double p = parse_value(value, field + ": defective");
            if (!(p >= 0.0 && p <= 1.0))
                throw InputError("", field, fmt::format("defective must be a share from 0 to 1, not '{}'", value));
            spec.defective_share = p;
        } else if (key == "seed") {
            spec.bench_seed = whole_number(value, field, "seed");
            seed_given = true;
        } else {
            throw InputError("", field,
                             fmt::format("unknown sim:// key '{}' for a tray (expected tray, defective, seed)", key));
        }
    }
    if (!tray) {
        for (const auto& [key, value] : uri.query)
            if (key == "defective")
                throw InputError("", field, "defective= needs tray=SEED (a virtual tray)");
        return std::nullopt;
    }
    if (!seed_given) spec.bench_seed = spec.tray_seed;
    return spec;
}

const char* to_string(TrayDefect defect) {
    switch (defect) {
        case TrayDefect::none: return "none";
        case TrayDefect::beta_low: return "beta far below range";
        case TrayDefect::beta_high: return "beta far above range";
        case TrayDefect::open_emitter: return "open emitter";
    }
    return "none";
}

TrayDevice draw_tray_device(const TraySpec& spec, const lot::JigTransistorModel& model, std::int64_t draw) {
    // One stream per draw, so device k does not depend on how many were drawn before it.
    Random rng(spec.tray_seed * 0x9E3779B97F4A7C15ULL + static_cast<std::uint64_t>(draw) * 0xBF58476D1CE4E5B9ULL);
    const double lo = model.beta_min.value_or(0.7 * model.beta);
    const double hi = model.beta_max.value_or(1.3 * model.beta);
    TrayDevice d;
    d.draw = draw;
    d.beta = rng.uniform(lo, hi);
    d.saturation_current_a = model.saturation_current * std::exp(0.25 * rng.normal());
    if (rng.bernoulli(spec.defective_share)) {
        const double kind = rng.uniform01();
        if (kind < 0.4) {
            d.defect = TrayDefect::beta_low;
            d.beta = lo / 4.0;
        } else if (kind < 0.8) {
            d.defect = TrayDefect::beta_high;
            d.beta = hi * 3.0;
        } else {
            d.defect = TrayDefect::open_emitter;
        }
    }
    return d;
}

circuit::Design jig_board(const lot::JigDesign& jig) {
    nlohmann::json j;
    try {
        j = nlohmann::json::parse(read_file(jig.path));
    } catch (const nlohmann::json::exception& e) {
        throw InputError(jig.path, "", fmt::format("not JSON: {}", e.what()));
    }
    // The circuit loader wants a generator terminal and probes; give it an isolated node.
    j["stimulus"] = {{"node", kDummyNode}};
    j["probes"] = {{"in", kDummyNode}, {"out", kDummyNode}};
    j["parts"].push_back({{"ref", "SIM_NO_GENERATOR"}, {"kind", "resistor"}, {"nodes", {kDummyNode, "0"}}, {"value", "1M"}});
    circuit::Design d = circuit::parse_design(j.dump(), jig.path);
    for (auto& p : d.parts) {
        if (const lot::JigResistor* r = jig.resistor(p.ref)) p.value = r->ohms;
        p.tolerance = 0.0;
    }
    for (auto& [name, m] : d.models) {
        m.beta_low.reset();
        m.beta_high.reset();
    }
    return d;
}

circuit::Design jig_with_device(const circuit::Design& board, const lot::JigDesign& jig, const TrayDevice& device) {
    circuit::Design d = board;
    bool found = false;
    for (auto& p : d.parts) {
        if (p.ref != jig.dut) continue;
        found = true;
        circuit::TransistorModel m = d.model_of(p);
        m.name = fmt::format("tray#{}", device.draw);
        m.beta = device.beta;
        m.saturation_current_a = device.saturation_current_a;
        m.beta_low.reset();
        m.beta_high.reset();
        d.models[m.name] = m;
        p.model = m.name;
        if (device.defect == TrayDefect::open_emitter) {
            // The emitter lead ends in a floating pad: 1 GΩ to ground keeps the DC solve defined.
            p.nodes[2] = "sim_open_emitter";
            circuit::Part pad;
            pad.ref = "SIM_OPEN_EMITTER";
            pad.kind = circuit::PartKind::resistor;
            pad.nodes = {"sim_open_emitter", "0"};
            pad.value = 1e9;
            d.parts.push_back(pad);
            break;
        }
    }
    if (!found) throw InputError(jig.path, "parts", fmt::format("the jig has no socket transistor '{}'", jig.dut));
    return d;
}

struct VirtualTray::Impl {
    lot::JigDesign jig;
    BenchFile bench;
    TraySpec spec;
    Clock& clock;
    circuit::Design board, empty;
    std::optional<TrayDevice> device;
    std::unique_ptr<VirtualBench> vbench;

    Impl(lot::JigDesign j, const BenchFile& b, TraySpec s, Clock& c)
        : jig(std::move(j)), bench(b), spec(s), clock(c), board(jig_board(jig)), empty(board) {
        std::erase_if(empty.parts, [&](const circuit::Part& p) { return p.ref == jig.dut; });
        make_bench(empty);
    }

    void make_bench(const circuit::Design& d) {
        BoardSpec bs;
        bs.seed = spec.bench_seed;
        vbench.reset();
        vbench = std::make_unique<VirtualBench>(d, bench, bs, clock);
    }
};


VirtualTray::VirtualTray(lot::JigDesign jig, const BenchFile& bench, TraySpec spec, Clock& clock)
    : impl_(std::make_unique<Impl>(std::move(jig), bench, spec, clock)) {}
VirtualTray::~VirtualTray() = default;

const TrayDevice& VirtualTray::insert(std::int64_t draw) {
    Impl& p = *impl_;
    // A device changed under power would be a wrong procedure: the tray refuses it.
    const Outcome state = p.vbench->execute("supply", "OUTPut:STATe?");
    if (state.has_reply && state.reply == "1")
        throw SafetyStop("virtual tray: a device was changed while the jig's supply was on");
    p.device = draw_tray_device(p.spec, p.jig.model, draw);
    p.make_bench(jig_with_device(p.board, p.jig, *p.device));
    return *p.device;
}

const std::optional<TrayDevice>& VirtualTray::current() const { return impl_->device; }
const TraySpec& VirtualTray::spec() const { return impl_->spec; }

drivers::VirtualTransportFactory VirtualTray::transport_factory() {
    return [this](const std::string& role, const drivers::InstrumentUri&) -> std::unique_ptr<drivers::Transport> {
        // The tray is asked for its bench at every line, so a device change needs no reconnection.
        return make_in_process_transport([this]() -> VirtualBench& { return *impl_->vbench; }, role, "sim://tray/" + role);
    };
}

}  // namespace ampbench::sim
