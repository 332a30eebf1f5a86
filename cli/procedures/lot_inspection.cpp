// The lot measurement loop: ask for a device with the jig off, power in order, read, power
// down, judge, commit; skips are replaced at the same sample position; a stop resumes later.
#include "cli/procedures/lot_inspection.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <istream>
#include <ostream>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/procedures/power.h"
#include "core/errors.h"
#include "core/interrupt.h"
#include "core/value.h"

namespace ampbench::procedures {
namespace {

std::string trim(std::string s) {
    while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.pop_back();
    size_t i = 0;
    while (i < s.size() && std::isspace(static_cast<unsigned char>(s[i]))) ++i;
    return s.substr(i);
}

std::optional<double> quantity(const lot::DutOperatingPoint& op, const std::string& name) {
    if (name == "hfe") return op.hfe.value;
    if (name == "vbe_v") return op.vbe_v.value;
    if (name == "ic_a") return op.ic_a.value;
    if (name == "ib_a") return op.ib_a.value;
    if (name == "vce_v") return op.vce_v.value;
    return std::nullopt;
}

std::string joined(const std::vector<std::string>& parts) {
    std::string s;
    for (const auto& p : parts) s += (s.empty() ? "" : "; ") + p;
    return s;
}

// Switches the supply off and checks that it reads back off: the operator may touch the jig.
void make_safe_to_touch(drivers::Supply* supply) {
    if (!supply) return;
    supply->output_off();
    if (supply->output_is_on())
        throw SafetyStop("supply: the output still reads on after switching it off; the device was not changed");
}

}  // namespace

// ---- operators --------------------------------------------------------------------------

std::string StreamOperator::line() {
    std::string s;
    if (!std::getline(in_, s)) return "q";  // end of input: stop, the lot resumes later
    return trim(s);
}

OperatorReply StreamOperator::insert_device(long position, long n, bool replacing) {
    out_ << fmt::format(
        "\nJig unpowered. Insert device {} of {}{} (ESD: wear the wrist strap, hold the part by its body).\n"
        "Next device: Enter to measure, s to skip (s REASON), q to stop: ",
        position, n, replacing ? " (a replacement for a skipped device)" : "");
    out_.flush();
    const std::string s = line();
    if (s == "q" || s == "Q") return {OperatorAnswer::stop, {}};
    if (s == "s" || s == "S" || s.rfind("s ", 0) == 0 || s.rfind("S ", 0) == 0) {
        std::string reason = trim(s.size() > 1 ? s.substr(2) : std::string());
        if (reason.empty()) {
            out_ << "Reason for skipping: ";
            out_.flush();
            std::string r;
            if (std::getline(in_, r)) reason = trim(r);
        }
        if (reason.empty()) reason = "skipped by the operator";
        return {OperatorAnswer::skip, reason};
    }
    return {OperatorAnswer::measure, {}};
}

void StreamOperator::move_probe(const std::string& node) {
    out_ << fmt::format("Move the meter probe to node {} and press Enter: ", node);
    out_.flush();
    std::string s;
    std::getline(in_, s);
}

double StreamOperator::type_reading(const std::string& node) {
    out_ << fmt::format("Reading at node {} (volts): ", node);
    out_.flush();
    std::string s;
    if (!std::getline(in_, s)) throw InputError("", "reading " + node, "no reading typed (end of input)");
    return parse_value(trim(s), "reading " + node);
}

double AutomaticOperator::type_reading(const std::string& node) {
    throw UsageError(fmt::format("lot measure: --auto cannot type the reading at node {}; use a meter or drop --auto", node));
}

// ---- plan, judgement, sample state ----------------------------------------------------------

lot::LotPlan stored_plan(const store::Lot& lot) {
    nlohmann::json j;
    try {
        j = nlohmann::json::parse(lot.plan_json);
    } catch (const nlohmann::json::exception&) {
        throw StoreError(fmt::format("lot {}: the stored plan is not JSON", lot.lot_code));
    }
    if (!j.is_object() || !j.contains("plan") || !j.contains("file") || !j["file"].is_string())
        throw StoreError(fmt::format("lot {}: the stored plan lacks its file or text", lot.lot_code));
    return lot::parse_lot_plan(j["plan"].dump(), j["file"].get<std::string>());
}

DeviceResult judge_device(const lot::LotPlan& plan, const lot::JigMeasurement& jig,
                          const std::map<std::string, double>& volts) {
    DeviceResult r;
    r.op = jig.evaluate(volts);
    if (!r.op.problem.empty()) r.failures.push_back(r.op.problem);
    for (const auto& [name, limits] : plan.spec) {
        const std::optional<double> v = quantity(r.op, name);
        if (!v) continue;
        if (!std::isfinite(*v)) {
            r.failures.push_back(fmt::format("{} not finite", name));
        } else if (limits.min && *v < *limits.min) {
            r.failures.push_back(fmt::format("{} {:.4g} below min {:g}", name, *v, *limits.min));
        } else if (limits.max && *v > *limits.max) {
            r.failures.push_back(fmt::format("{} {:.4g} above max {:g}", name, *v, *limits.max));
        }
    }
    r.passed = r.failures.empty();
    return r;
}

SampleState sample_state(const std::vector<store::Device>& devices) {
    SampleState s;
    s.draws = static_cast<std::int64_t>(devices.size());
    std::map<std::int64_t, const store::Device*> latest;  // position -> its newest device
    for (const auto& d : devices) {
        auto& slot = latest[d.index];
        if (!slot || d.id > slot->id) slot = &d;
    }
    std::int64_t highest = 0;
    for (const auto& [position, d] : latest) {
        highest = std::max(highest, position);
        if (d->skipped_reason.empty()) {
            ++s.measured;
            if (d->passed && !*d->passed) ++s.defectives;
        } else if (!s.replaces) {
            s.replaces = d->id;
            s.next_position = position;
        }
    }
    if (!s.replaces) s.next_position = highest + 1;
    return s;
}

// ---- the loop -----------------------------------------------------------------------------

namespace {

class LotRun {
public:
    LotRun(store::Archive& archive, store::Lot lot, LotStation& station, LotOperator& op, std::ostream& out)
        : archive_(archive), lot_(std::move(lot)), st_(station), op_(op), out_(out), plan_(stored_plan(lot_)),
          jig_(lot::load_plan_jig(plan_)), measurement_(jig_, plan_.readings, station.meter_model) {
        if (!jig_.supply_current_limit_a)
            throw InputError(jig_.path, "supply.current_limit",
                             "a jig must state its supply current limit (it is set and read back before power is applied)");
        if (!st_.meter) return;
        for (const auto& node : plan_.readings)
            if (!st_.channel_of_node.empty() && !st_.channel_of_node.count(lot::canonical_node(node)))
                throw InputError(st_.bench_file, "meter.channels",
                                 fmt::format("no meter channel is wired to jig node '{}' (plan readings)", node));
    }

    LotMeasureOutcome run() {
        LotMeasureOutcome o;
        o.n = plan_.sampling.n;
        SampleState s = sample_state(archive_.devices(lot_.id));
        if (s.measured >= plan_.sampling.n)
            throw InputError(lot_.lot_code, "sampling.n",
                             fmt::format("all {} devices of the plan are measured; the lot takes no more devices "
                                         "(see 'ampbench lot verdict {}')",
                                         plan_.sampling.n, lot_.lot_code));
        begin_session();
        try {
            out_ << safety_notice(*jig_.supply_current_limit_a);
            if (st_.meter) {
                st_.meter->select_dc_volts();
                st_.meter->set_range(std::nullopt);
            }
            make_safe_to_touch(st_.supply);
            while (s.measured < plan_.sampling.n) {
                throw_if_interrupted();
                make_safe_to_touch(st_.supply);
                const OperatorReply reply = op_.insert_device(s.next_position, plan_.sampling.n, s.replaces.has_value());
                if (reply.answer == OperatorAnswer::stop) {
                    o.stopped = true;
                    break;
                }
                store::Device d;
                d.lot_id = lot_.id;
                d.index = s.next_position;
                d.replacement_of = s.replaces;
                if (reply.answer == OperatorAnswer::skip) {
                    d.skipped_reason = reply.reason;
                    d.readings_json = nlohmann::json{{"session", session_uuid_}}.dump();
                    archive_.add_device(d);
                    ++o.skipped_now;
                    out_ << fmt::format("Device {}: skipped ({}); another device takes its place.\n", d.index, reply.reason);
                } else {
                    if (st_.device_inserted) st_.device_inserted(s.draws + 1);
                    measure_device(d, s.draws + 1);
                    ++o.measured_now;
                }
                archive_.heartbeat(session_id_);
                s = sample_state(archive_.devices(lot_.id));
            }
        } catch (const Interrupted&) {
            finish(store::SessionStatus::interrupted);
            throw;
        } catch (...) {
            finish(store::SessionStatus::aborted);
            throw;
        }
        finish(s.measured >= plan_.sampling.n ? store::SessionStatus::complete : store::SessionStatus::interrupted);
        o.measured = s.measured;
        o.defectives = s.defectives;
        return o;
    }

private:
    void begin_session() {
        store::NewSession ns;
        ns.board_serial = lot_.lot_code;
        ns.kind = store::SessionKind::lot;
        ns.bench_file = st_.bench_file;
        ns.notes = fmt::format("lot measure: plan {}", plan_.path);
        ns.instruments = st_.instruments;
        const store::Session session = archive_.begin_session(ns);
        session_id_ = session.id;
        session_uuid_ = session.uuid;
    }

    void finish(store::SessionStatus status) noexcept {
        try {
            if (session_id_) archive_.finish_session(session_id_, status);
        } catch (...) {
        }
        session_id_ = 0;
    }

    double read_node(const std::string& node) {
        if (!st_.meter) return op_.type_reading(node);
        auto it = st_.channel_of_node.find(lot::canonical_node(node));
        if (it != st_.channel_of_node.end()) return st_.meter->measure_dc_volts(it->second);
        op_.move_probe(node);
        return st_.meter->read_dc_volts();
    }

    void measure_device(store::Device& d, std::int64_t draw) {
        std::map<std::string, double> volts;
        nlohmann::json readings = nlohmann::json::object();
        std::string overload;
        double quiescent_a = 0, limit_a = 0;
        {
            PowerPlan pp;
            pp.supply_volts = jig_.supply_v;
            pp.current_limit_a = *jig_.supply_current_limit_a;
            // The supply current depends on the device's hFE, which is what is being measured:
            // no quiescent window, the current limit protects the jig.
            pp.predicted_quiescent_a = 0.0;
            pp.settle_s = st_.settle_s;
            PowerSequence power(nullptr, st_.supply, *st_.clock, pp);
            if (st_.supply) {
                power.power_up();
                quiescent_a = power.quiescent_a();
                limit_a = power.limit_read_back_a();
            } else {
                out_ << "Power the jig now (no supply on this bench).\n";
            }
            try {
                for (const auto& node : plan_.readings) {
                    const double v = read_node(node);
                    if (!std::isfinite(v) || std::fabs(v) > 1e3) {
                        overload = node;
                        readings[node] = nullptr;
                        break;
                    }
                    volts[node] = v;
                    readings[node] = v;
                }
            } catch (const std::exception& e) {
                power.power_down();
                // The readings taken so far stay in the archive; the device will be replaced.
                d.skipped_reason = fmt::format("measurement failed: {}", e.what());
                d.readings_json = nlohmann::json{{"session", session_uuid_}, {"draw", draw}, {"volts", readings}}.dump();
                try {
                    archive_.add_device(d);
                } catch (...) {
                }
                throw;
            }
            power.power_down();
            if (!st_.supply) out_ << "Switch the jig's supply off now.\n";
        }
        nlohmann::json doc = {{"session", session_uuid_}, {"draw", draw}, {"volts", readings}};
        if (st_.supply) {
            doc["supply_current_a"] = quiescent_a;
            doc["current_limit_a"] = limit_a;
        }
        if (!overload.empty()) {
            // Kept, as every reading is; marked skipped so the next run replaces the device.
            d.skipped_reason = fmt::format("reading at node {} out of the meter's range", overload);
            d.readings_json = doc.dump();
            archive_.add_device(d);
            throw InstrumentError("meter", "READ?",
                                  fmt::format("reading at jig node '{}' (device {} of lot {}) is out of the meter's "
                                              "range; the jig is powered down and the device will be replaced",
                                              overload, d.index, lot_.lot_code));
        }
        const DeviceResult r = judge_device(plan_, measurement_, volts);
        doc["ib_a"] = r.op.ib_a.value;
        doc["ib_sd_a"] = r.op.ib_a.u;
        doc["ie_a"] = r.op.ie_a.value;
        doc["failures"] = r.failures;
        nlohmann::json budget = nlohmann::json::array();
        for (size_t i = 0; i < std::min<size_t>(3, r.op.hfe_budget.size()); ++i)
            budget.push_back({{"input", r.op.hfe_budget[i].name}, {"contribution", r.op.hfe_budget[i].contribution}});
        doc["hfe_budget"] = budget;
        d.readings_json = doc.dump();
        d.hfe = r.op.hfe.value;
        d.hfe_sd = r.op.hfe.u;
        d.vbe_v = r.op.vbe_v.value;
        d.vbe_sd_v = r.op.vbe_v.u;
        d.ic_a = r.op.ic_a.value;
        d.ic_sd_a = r.op.ic_a.u;
        d.vce_v = r.op.vce_v.value;
        d.vce_sd_v = r.op.vce_v.u;
        d.passed = r.passed;
        archive_.add_device(d);
        out_ << fmt::format("Device {}: hFE {:.1f} ± {:.1f}, V_BE {:.4f} V, I_C {}, V_CE {:.3f} V: {}\n", d.index,
                            r.op.hfe.value, r.op.hfe.u, r.op.vbe_v.value, format_eng(r.op.ic_a.value, "A"),
                            r.op.vce_v.value, r.passed ? std::string("pass") : "FAIL (" + joined(r.failures) + ")");
    }

    store::Archive& archive_;
    store::Lot lot_;
    LotStation& st_;
    LotOperator& op_;
    std::ostream& out_;
    lot::LotPlan plan_;
    lot::JigDesign jig_;
    lot::JigMeasurement measurement_;
    std::int64_t session_id_ = 0;
    std::string session_uuid_;
};

}  // namespace

LotMeasureOutcome measure_lot(store::Archive& archive, const std::string& lot_code, LotStation& station,
                              LotOperator& op, std::ostream& out) {
    const std::optional<store::Lot> lot = archive.lot(lot_code);
    if (!lot) throw InputError(archive.location(), "lot", fmt::format("no lot '{}' in the archive (start it with 'ampbench lot start')", lot_code));
    if (!station.clock) throw UsageError("lot measure: no clock");
    LotRun run(archive, *lot, station, op, out);
    return run.run();
}

}  // namespace ampbench::procedures
