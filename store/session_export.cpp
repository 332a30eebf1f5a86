// Session export to JSON with nlohmann::json; stored JSON blobs are embedded as JSON.
#include "store/session_export.h"

#include <nlohmann/json.hpp>

namespace ampbench::store {

namespace {

using nlohmann::json;

json optional_number(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }
json optional_int(const std::optional<std::int64_t>& v) { return v ? json(*v) : json(nullptr); }
json text_or_null(const std::string& s) { return s.empty() ? json(nullptr) : json(s); }

// Stored blobs were written as JSON; one that no longer parses is shown as its text.
json embedded(const std::string& blob) {
    if (blob.empty()) return json::object();
    json parsed = json::parse(blob, nullptr, false);
    return parsed.is_discarded() ? json(blob) : parsed;
}

json channel(const std::optional<double>& amplitude_v, const std::optional<double>& amplitude_sd_v,
             const std::optional<double>& phase_deg, const std::optional<double>& phase_sd_deg) {
    return {{"amplitude_v", optional_number(amplitude_v)},
            {"amplitude_sd_v", optional_number(amplitude_sd_v)},
            {"phase_deg", optional_number(phase_deg)},
            {"phase_sd_deg", optional_number(phase_sd_deg)}};
}

}  // namespace

std::string session_json(const SessionDetail& d) {
    const Session& s = d.session;
    json doc;
    doc["format"] = "ampbench-session/1";
    doc["session"] = {{"id", s.id},
                      {"uuid", s.uuid},
                      {"board", s.board_serial},
                      {"kind", to_string(s.kind)},
                      {"status", to_string(s.status)},
                      {"started", s.started_utc},
                      {"finished", text_or_null(s.finished_utc)},
                      {"operator", s.operator_name},
                      {"host", s.host},
                      {"pid", s.pid},
                      {"heartbeat_unix_s", s.heartbeat_unix_s},
                      {"bench_file", s.bench_file},
                      {"software_version", s.software_version},
                      {"notes", s.notes}};
    if (d.board)
        doc["board"] = {{"serial", d.board->serial},
                        {"design", text_or_null(d.board->design_address)},
                        {"notes", d.board->notes}};
    else
        doc["board"] = nullptr;

    json instruments = json::array();
    for (const auto& i : d.instruments)
        instruments.push_back({{"role", i.role},
                               {"identity", i.identity},
                               {"asset", i.asset},
                               {"uri", i.uri},
                               {"cal_due", text_or_null(i.cal_due)},
                               {"certificate", text_or_null(i.certificate)},
                               {"settings", embedded(i.settings_json)}});
    doc["instruments"] = instruments;

    json probes = json::array();
    for (const auto& p : d.probes)
        probes.push_back({{"name", p.name},
                          {"channel", p.channel},
                          {"asset", p.asset},
                          {"ratio", p.ratio},
                          {"cal_due", text_or_null(p.cal_due)},
                          {"certificate", text_or_null(p.certificate)}});
    doc["probes"] = probes;

    json plan = json::array();
    for (const auto& p : d.plan)
        plan.push_back({{"index", p.index}, {"freq_hz", p.freq_hz}, {"adaptive", p.adaptive}});
    doc["plan"] = plan;

    json points = json::array();
    for (const auto& p : d.points)
        points.push_back(
            {{"id", p.id},
             {"uuid", p.uuid},
             {"sequence", p.sequence},
             {"plan_index", optional_int(p.plan_index)},
             {"freq_hz", p.freq_hz},
             {"in", channel(p.in_amplitude_v, p.in_amplitude_sd_v, p.in_phase_deg,
                            p.in_phase_sd_deg)},
             {"out", channel(p.out_amplitude_v, p.out_amplitude_sd_v, p.out_phase_deg,
                             p.out_phase_sd_deg)},
             {"gain_db", p.gain_db},
             {"gain_db_sd", optional_number(p.gain_db_sd)},
             {"phase_deg", optional_number(p.phase_deg)},
             {"phase_deg_sd", optional_number(p.phase_deg_sd)},
             {"thd_pct", optional_number(p.thd_pct)},
             {"flags", p.flags},
             {"settings", embedded(p.settings_json)},
             {"taken", p.taken_utc},
             {"superseded_by", optional_int(p.superseded_by)}});
    doc["points"] = points;

    json fits = json::array();
    for (const auto& f : d.fits)
        fits.push_back({{"id", f.id},
                        {"uuid", f.uuid},
                        {"kind", f.kind},
                        {"model", f.model},
                        {"params", embedded(f.params_json)},
                        {"report", embedded(f.report_json)},
                        {"midband_gain_db", optional_number(f.midband_gain_db)},
                        {"f_low_hz", optional_number(f.f_low_hz)},
                        {"f_high_hz", optional_number(f.f_high_hz)},
                        {"created", f.created_utc}});
    doc["fits"] = fits;
    // Bytes that are not UTF-8 (from a foreign archive) become U+FFFD rather than an exception.
    return doc.dump(2, ' ', false, json::error_handler_t::replace) + "\n";
}

}  // namespace ampbench::store
