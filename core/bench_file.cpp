// Parsing and validation of `ampbench-bench/1` through JsonView, so errors name file and key.
#include "core/bench_file.h"

#include <fmt/format.h>

#include "core/errors.h"
#include "core/json_read.h"

namespace ampbench {
namespace {

bool is_sim_uri(const std::string& uri) { return uri.rfind("sim://", 0) == 0; }

bool valid_date(const std::string& s) {
    if (s.size() != 10 || s[4] != '-' || s[7] != '-') return false;
    for (size_t i : {0u, 1u, 2u, 3u, 5u, 6u, 8u, 9u})
        if (s[i] < '0' || s[i] > '9') return false;
    const int month = std::stoi(s.substr(5, 2));
    const int day = std::stoi(s.substr(8, 2));
    return month >= 1 && month <= 12 && day >= 1 && day <= 31;
}

std::string read_date(const JsonView& v, std::string_view key) {
    std::string d = v.string_or(key, "");
    if (!d.empty() && !valid_date(d)) v.fail(key, fmt::format("'{}' is not a date (YYYY-MM-DD)", d));
    return d;
}

void read_common(const JsonView& v, const std::string& role, InstrumentSpec& spec) {
    spec.present = true;
    spec.role = role;
    spec.uri = v.string("uri");
    if (spec.uri.empty()) v.fail("uri", "empty");
    spec.profile = v.string_or("profile", "scpi-generic");
    spec.asset = v.string_or("asset", "");
    spec.cal_due = read_date(v, "cal_due");
    spec.certificate = v.string_or("certificate", "");
}

double positive(const JsonView& v, std::string_view key, double fallback) {
    const double x = v.number_or(key, fallback);
    if (!(x > 0)) v.fail(key, fmt::format("must be positive (got {})", x));
    return x;
}

}  // namespace

const ScopeChannelSpec* ScopeSpec::channel_for_probe(const std::string& probe) const {
    for (const auto& c : channels)
        if (c.probe == probe) return &c;
    return nullptr;
}

bool BenchFile::is_virtual() const {
    bool any = false;
    for (const auto* i : instruments()) {
        if (!is_sim_uri(i->uri)) return false;
        any = true;
    }
    return any;
}

std::vector<const InstrumentSpec*> BenchFile::instruments() const {
    std::vector<const InstrumentSpec*> out;
    for (const InstrumentSpec* i : {static_cast<const InstrumentSpec*>(&generator),
                                    static_cast<const InstrumentSpec*>(&scope),
                                    static_cast<const InstrumentSpec*>(&meter),
                                    static_cast<const InstrumentSpec*>(&supply)})
        if (i->present) out.push_back(i);
    return out;
}

namespace {
BenchFile read_bench(const JsonView& root, const std::string& origin) {
    root.require_format("ampbench-bench/1");
    root.reject_unknown_keys({"format", "name", "notes", "mains_hz", "generator", "scope",
                              "meter", "supply", "limits"});
    BenchFile bench;
    bench.path = origin;
    bench.mains_hz = positive(root, "mains_hz", 50.0);

    if (auto g = root.find("generator")) {
        g->reject_unknown_keys({"uri", "profile", "asset", "cal_due", "certificate",
                                "output_ohms", "load_setting"});
        read_common(*g, "generator", bench.generator);
        bench.generator.output_ohms = positive(*g, "output_ohms", 50.0);
        bench.generator.load_setting = g->string_or("load_setting", "high-z");
        if (bench.generator.load_setting != "high-z" && bench.generator.load_setting != "50")
            g->fail("load_setting", fmt::format("'{}' is neither \"high-z\" nor \"50\"",
                                                bench.generator.load_setting));
    }
    if (auto s = root.find("scope")) {
        s->reject_unknown_keys(
            {"uri", "profile", "asset", "cal_due", "certificate", "gain_accuracy", "channels"});
        read_common(*s, "scope", bench.scope);
        bench.scope.gain_accuracy = s->tolerance_or("gain_accuracy", 0.02);
        if (auto chans = s->find("channels")) {
            if (!chans->is_object()) chans->fail_here("expected an object of channels");
            for (const auto& name : chans->keys()) {
                const JsonView c = chans->at(name);
                c.reject_unknown_keys({"probe", "ratio", "ohms", "farads", "coupling",
                                       "bandwidth_hz", "asset", "cal_due", "certificate"});
                ScopeChannelSpec ch;
                ch.name = name;
                ch.probe = c.string("probe");
                ch.ratio = positive(c, "ratio", 10.0);
                ch.ohms = positive(c, "ohms", 10e6);
                ch.farads = c.number_or("farads", 12e-12);
                if (ch.farads < 0) c.fail("farads", "must not be negative");
                ch.coupling = c.string_or("coupling", "dc");
                if (ch.coupling != "dc" && ch.coupling != "ac")
                    c.fail("coupling", fmt::format("'{}' is neither \"dc\" nor \"ac\"", ch.coupling));
                ch.bandwidth_hz = c.number_or("bandwidth_hz", 0.0);
                if (ch.bandwidth_hz < 0) c.fail("bandwidth_hz", "must not be negative");
                ch.asset = c.string_or("asset", "");
                ch.cal_due = read_date(c, "cal_due");
                ch.certificate = c.string_or("certificate", "");
                for (const auto& other : bench.scope.channels)
                    if (other.probe == ch.probe)
                        c.fail("probe", fmt::format("probe '{}' is already on channel {}",
                                                    ch.probe, other.name));
                bench.scope.channels.push_back(ch);
            }
        }
    }
    if (auto m = root.find("meter")) {
        m->reject_unknown_keys({"uri", "profile", "asset", "cal_due", "certificate",
                                "input_ohms", "accuracy", "channels"});
        read_common(*m, "meter", bench.meter);
        bench.meter.input_ohms = positive(*m, "input_ohms", 10e6);
        bench.meter.accuracy = m->tolerance_or("accuracy", 0.0005);
        if (auto chans = m->find("channels")) {
            if (!chans->is_object()) chans->fail_here("expected an object: channel -> node");
            for (const auto& name : chans->keys())
                bench.meter.channels.emplace_back(name, chans->string(name));
        }
    }
    if (auto p = root.find("supply")) {
        p->reject_unknown_keys({"uri", "profile", "asset", "cal_due", "certificate"});
        read_common(*p, "supply", bench.supply);
    }
    if (auto l = root.find("limits")) {
        l->reject_unknown_keys({"max_generator_vpp", "calibration"});
        if (auto vpp = l->optional_number("max_generator_vpp")) {
            if (!(*vpp > 0)) l->fail("max_generator_vpp", "must be positive");
            bench.limits.max_generator_vpp = vpp;
        }
        bench.limits.calibration = l->string_or("calibration", "warn");
        if (bench.limits.calibration != "warn" && bench.limits.calibration != "refuse")
            l->fail("calibration", fmt::format("'{}' is neither \"warn\" nor \"refuse\"",
                                               bench.limits.calibration));
    }

    const auto present = bench.instruments();
    if (present.empty()) root.fail_here("names no instrument (generator, scope, meter, supply)");
    size_t sims = 0;
    for (const auto* i : present) sims += is_sim_uri(i->uri);
    if (sims != 0 && sims != present.size())
        root.fail_here("mixes sim:// and real instruments; a bench is all virtual or all real");
    if (sims != 0) {
        for (const auto* i : present)
            if (i->uri != present.front()->uri)
                root.fail(i->role + ".uri",
                          fmt::format("'{}' differs from '{}': every instrument of a virtual "
                                      "bench must use the same sim:// query",
                                      i->uri, present.front()->uri));
    }
    return bench;
}
}  // namespace

BenchFile parse_bench_file(const std::string& text, const std::string& origin) {
    const JsonDocument doc = JsonDocument::parse(text, origin);
    return read_bench(JsonView(doc), origin);
}

BenchFile load_bench_file(const std::string& path) {
    const JsonDocument doc = JsonDocument::load(path);
    return read_bench(JsonView(doc), path);
}

BenchFile default_virtual_bench(const std::string& sim_query) {
    BenchFile b;
    b.path = "(default virtual bench)";
    auto set = [&](InstrumentSpec& s, const char* role) {
        s.present = true;
        s.role = role;
        s.uri = sim_query;
    };
    set(b.generator, "generator");
    set(b.scope, "scope");
    set(b.meter, "meter");
    set(b.supply, "supply");
    ScopeChannelSpec in, out;
    in.name = "1";
    in.probe = "in";
    out.name = "2";
    out.probe = "out";
    b.scope.channels = {in, out};
    return b;
}

}  // namespace ampbench
