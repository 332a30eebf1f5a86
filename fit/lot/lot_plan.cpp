// Reads and checks lot plans; every complaint names the plan file and the key.
#include "fit/lot/lot_plan.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <filesystem>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "core/errors.h"
#include "core/json_read.h"

namespace ampbench::lot {
namespace {

const std::vector<std::string_view> kSpecQuantities = {"hfe", "vbe_v", "ic_a", "ib_a", "vce_v"};

long read_count(const JsonView& parent, std::string_view key) {
    const double v = parent.number(key);
    if (!(std::fabs(v) < 1e12) || v != std::floor(v))
        parent.fail(key, fmt::format("expected a whole number, found {}", v));
    return static_cast<long>(v);
}

bool is_date(const std::string& s) {
    if (s.size() != 10 || s[4] != '-' || s[7] != '-') return false;
    for (size_t i : {0, 1, 2, 3, 5, 6, 8, 9})
        if (!std::isdigit(static_cast<unsigned char>(s[i]))) return false;
    const int month = std::stoi(s.substr(5, 2)), day = std::stoi(s.substr(8, 2));
    return month >= 1 && month <= 12 && day >= 1 && day <= 31;
}

Limits read_limits(const JsonView& v) {
    if (!v.is_object()) v.fail_here("expected {\"min\": .., \"max\": ..}");
    v.reject_unknown_keys({"min", "max"});
    Limits l;
    l.min = v.optional_number("min");
    l.max = v.optional_number("max");
    if (!l.min && !l.max) v.fail_here("give a min, a max or both");
    if (l.min && l.max && *l.min > *l.max)
        v.fail("min", fmt::format("min {:g} is above max {:g}", *l.min, *l.max));
    return l;
}

double read_rel_u(const JsonView& parent, std::string_view key, double fallback) {
    const double u = parent.tolerance_or(key, fallback);
    if (!(u > 0.0)) parent.fail(key, "an uncertainty must be positive");
    return u;
}

LotPlan read(const JsonView& root) {
    root.require_format("ampbench-lot-plan/1");
    root.reject_unknown_keys(
        {"format", "part", "jig", "dut", "readings", "jig_measured", "spec", "sampling"});
    LotPlan plan;
    plan.path = root.file();
    plan.part = root.string_or("part", "");
    const std::string jig = root.string("jig");
    if (jig.empty()) root.fail("jig", "names no design file");
    const std::filesystem::path jig_path(jig);
    plan.jig_path = jig_path.is_absolute()
                        ? jig
                        : (std::filesystem::path(plan.path).parent_path() / jig_path).string();
    plan.dut = root.string("dut");
    if (plan.dut.empty()) root.fail("dut", "names no transistor");

    const JsonView readings = root.at("readings");
    const auto nodes = readings.elements();
    if (nodes.empty()) readings.fail_here("lists no node to read");
    for (const JsonView& n : nodes) {
        const std::string node = canonical_node(n.as_string());
        if (node.empty()) n.fail_here("empty node name");
        if (node == "0") n.fail_here("ground is the meter's reference and is not read");
        if (std::find(plan.readings.begin(), plan.readings.end(), node) != plan.readings.end())
            n.fail_here(fmt::format("node '{}' is listed twice", node));
        plan.readings.push_back(node);
    }

    if (auto measured = root.find("jig_measured")) {
        if (!measured->is_object()) measured->fail_here("expected an object of ref: value");
        const double default_u = read_rel_u(*measured, "uncertainty", kDefaultMeasuredRelU);
        plan.measured_on = measured->string_or("measured_on", "");
        for (const auto& key : measured->keys()) {
            if (key == "measured_on" || key == "uncertainty") continue;
            const JsonView value = measured->at(key);
            MeasuredValue m;
            m.ref = key;
            if (value.is_object()) {
                value.reject_unknown_keys({"value", "uncertainty"});
                m.ohms = value.number("value");
                m.rel_u = read_rel_u(value, "uncertainty", default_u);
            } else {
                m.ohms = value.as_number();
                m.rel_u = default_u;
            }
            if (!(m.ohms > 0.0)) measured->fail(key, "a measured resistance must be positive");
            plan.jig_measured.push_back(std::move(m));
        }
        if (!plan.jig_measured.empty() && plan.measured_on.empty())
            measured->fail("measured_on", "missing: date the measured values (YYYY-MM-DD)");
        if (!plan.measured_on.empty() && !is_date(plan.measured_on))
            measured->fail("measured_on",
                           fmt::format("'{}' is not a date (YYYY-MM-DD)", plan.measured_on));
    }

    const JsonView spec = root.at("spec");
    if (!spec.is_object()) spec.fail_here("expected an object");
    for (const auto& key : spec.keys()) {
        if (key == "conditions") continue;
        if (std::find(kSpecQuantities.begin(), kSpecQuantities.end(), key) == kSpecQuantities.end())
            spec.fail(key, "unknown quantity (hfe, vbe_v, ic_a, ib_a, vce_v)");
        plan.spec[key] = read_limits(spec.at(key));
    }
    if (plan.spec.empty()) spec.fail_here("states no limits");
    if (auto conditions = spec.find("conditions")) {
        conditions->reject_unknown_keys({"ic_a", "vce_v"});
        plan.condition_ic_a = conditions->optional_number("ic_a");
        plan.condition_vce_v = conditions->optional_number("vce_v");
        if (plan.condition_ic_a && !(*plan.condition_ic_a > 0.0))
            conditions->fail("ic_a", "a test current must be positive");
        if (plan.condition_vce_v && !(*plan.condition_vce_v > 0.0))
            conditions->fail("vce_v", "a test voltage must be positive");
    }

    const JsonView sampling = root.at("sampling");
    sampling.reject_unknown_keys({"n", "c"});
    plan.sampling.n = read_count(sampling, "n");
    plan.sampling.c = read_count(sampling, "c");
    if (plan.sampling.n < 1) sampling.fail("n", fmt::format("sample size {} must be at least 1", plan.sampling.n));
    if (plan.sampling.c < 0)
        sampling.fail("c", fmt::format("acceptance number {} must not be negative", plan.sampling.c));
    if (plan.sampling.c >= plan.sampling.n)
        sampling.fail("c", fmt::format("acceptance number {} must be below the sample size n = {} "
                                       "(the plan would accept every lot)",
                                       plan.sampling.c, plan.sampling.n));
    return plan;
}

}  // namespace

bool Limits::contains(double value) const {
    return (!min || value >= *min) && (!max || value <= *max);
}

LotPlan load_lot_plan(const std::string& path) {
    const JsonDocument doc = JsonDocument::load(path);
    return read(JsonView(doc));
}

LotPlan parse_lot_plan(const std::string& text, const std::string& origin) {
    const JsonDocument doc = JsonDocument::parse(text, origin);
    return read(JsonView(doc));
}

void validate_plan_quantity(const LotPlan& plan, long quantity) {
    if (quantity < 1)
        throw InputError(plan.path, "", fmt::format("lot quantity {} must be at least 1", quantity));
    if (plan.sampling.n > quantity)
        throw InputError(plan.path, "sampling.n",
                         fmt::format("sample size {} exceeds the lot quantity {}", plan.sampling.n,
                                     quantity));
}

void validate_plan_against_jig(const LotPlan& plan, const JigDesign& jig) {
    if (std::find(jig.transistors.begin(), jig.transistors.end(), plan.dut) == jig.transistors.end())
        throw InputError(plan.path, "dut",
                         fmt::format("'{}' is not a transistor in {}", plan.dut, jig.path));
    for (size_t i = 0; i < plan.readings.size(); ++i)
        if (!jig.has_node(plan.readings[i]))
            throw InputError(plan.path, fmt::format("readings[{}]", i),
                             fmt::format("node '{}' is not in {}", plan.readings[i], jig.path));
    for (const auto& m : plan.jig_measured) {
        if (jig.resistor(m.ref)) continue;
        const bool exists =
            std::find(jig.part_refs.begin(), jig.part_refs.end(), m.ref) != jig.part_refs.end();
        throw InputError(plan.path, "jig_measured." + m.ref,
                         exists ? fmt::format("'{}' is not a resistor in {}", m.ref, jig.path)
                                : fmt::format("no part '{}' in {}", m.ref, jig.path));
    }
}

JigDesign load_plan_jig(const LotPlan& plan) {
    JigDesign jig;
    try {
        jig = load_jig_design(plan.jig_path, plan.dut);
    } catch (const InputError& e) {
        if (e.file() == plan.jig_path && e.field().empty() && e.text() == "cannot open file")
            throw InputError(plan.path, "jig", fmt::format("cannot open '{}'", plan.jig_path));
        // A dut the jig lacks is the plan's mistake; say so in the plan's terms.
        if (e.file() == plan.jig_path && e.field() == "parts" &&
            e.text().rfind("no transistor", 0) == 0)
        {
            const auto list = e.text().find("transistors here: ");
            throw InputError(plan.path, "dut",
                             fmt::format("'{}' is not a transistor in {} (transistors there: {})",
                                         plan.dut, plan.jig_path,
                                         list == std::string::npos ? "?" : e.text().substr(list + 18)));
        }
        throw;
    }
    validate_plan_against_jig(plan, jig);
    for (const auto& m : plan.jig_measured) {
        JigResistor* r = jig.resistor(m.ref);
        r->ohms = m.ohms;
        r->measured_rel_u = m.rel_u;
        r->measured_on = plan.measured_on;
    }
    return jig;
}

}  // namespace ampbench::lot
