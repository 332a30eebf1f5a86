// Gap table, diagnosis and fit as text and JSON.
#include "cli/report/terminal.h"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "core/value.h"

namespace ampbench::report {

using nlohmann::ordered_json;

namespace {
ordered_json finite_or_null(double v) { return std::isfinite(v) ? ordered_json(v) : ordered_json(nullptr); }
ordered_json value_or_null(const fit::DerivedValue& v) { return v.present ? finite_or_null(v.value) : ordered_json(nullptr); }
ordered_json ci_or_null(const fit::DerivedValue& v) {
    return v.present ? ordered_json::array({v.ci_low, v.ci_high}) : ordered_json(nullptr);
}
}  // namespace

std::string quantity_text(double v, const std::string& unit) {
    if (unit == "dB") return fmt::format("{:.2f} dB", v);
    return format_eng(v, unit, 4);
}

std::string gap_table(const std::vector<extract::GapRow>& rows) {
    std::string o = fmt::format("{:<18} {:>12}  {:<25} {:<24} {:>12}  {}\n", "quantity", "predicted", "tolerance band",
                                "measured ± U", "gap", "verdict");
    for (const auto& r : rows) {
        const std::string band = (r.band_low && r.band_high)
                                     ? quantity_text(*r.band_low, r.unit) + " … " + quantity_text(*r.band_high, r.unit)
                                     : std::string("—");
        const std::string measured =
            r.measured ? quantity_text(*r.measured, r.unit) + " ± " + quantity_text(r.coverage_k * r.u, r.unit) : std::string("—");
        const std::string gap = r.measured ? quantity_text(r.gap, r.unit) : std::string("—");
        o += fmt::format("{:<18} {:>12}  {:<25} {:<24} {:>12}  {}\n", r.quantity, quantity_text(r.predicted, r.unit), band,
                         measured, gap, r.verdict);
    }
    o += "(prediction includes the bench: generator output resistance and each probe's loading; U = 2u, 95 %)\n";
    return o;
}

std::string diagnosis_text(const std::vector<extract::FaultCandidate>& c) {
    if (c.empty()) return {};
    std::string o = "Diagnosis (single change that best explains the measured response)\n";
    for (size_t i = 0; i < c.size(); ++i)
        o += fmt::format("  {}. {:<36} fit quality (reduced χ²) {:.3g}\n", i + 1, c[i].change, c[i].score);
    return o;
}

ordered_json fit_json(const fit::ResponseFit& f) {
    ordered_json out;
    out["status"] = std::string(fit::to_string(f.report.status));
    out["usable"] = f.usable();
    out["model"] = f.model_name();
    out["midband_gain_db"] = finite_or_null(f.midband_gain_db.value);
    out["midband_gain_db_ci"] = {f.midband_gain_db.ci_low, f.midband_gain_db.ci_high};
    out["midband_freq_hz"] = finite_or_null(f.midband_freq_hz.value);
    out["peaking_db"] = finite_or_null(f.peaking_db.value);
    out["inverting"] = f.inverting ? ordered_json(*f.inverting) : ordered_json(nullptr);
    out["f_low_hz"] = value_or_null(f.f_low_hz);
    out["f_low_hz_ci"] = ci_or_null(f.f_low_hz);
    out["f_high_hz"] = value_or_null(f.f_high_hz);
    out["f_high_hz_ci"] = ci_or_null(f.f_high_hz);
    out["chi2_reduced"] = finite_or_null(f.report.chi2_reduced);
    out["brief"] = f.brief();
    out["notes"] = f.notes;
    return out;
}

ordered_json gap_json(const std::vector<extract::GapRow>& rows) {
    ordered_json a = ordered_json::array();
    for (const auto& r : rows) {
        ordered_json j;
        j["quantity"] = r.quantity;
        j["predicted"] = finite_or_null(r.predicted);
        j["band"] = (r.band_low && r.band_high) ? ordered_json::array({*r.band_low, *r.band_high}) : ordered_json(nullptr);
        j["measured"] = r.measured ? finite_or_null(*r.measured) : ordered_json(nullptr);
        j["u"] = finite_or_null(r.u);
        j["gap"] = r.measured ? finite_or_null(r.gap) : ordered_json(nullptr);
        j["verdict"] = r.verdict;
        a.push_back(j);
    }
    return a;
}

ordered_json diagnosis_json(const std::vector<extract::FaultCandidate>& c) {
    ordered_json a = ordered_json::array();
    for (const auto& x : c) a.push_back({{"change", x.change}, {"ref", x.ref}, {"kind", x.kind}, {"score", finite_or_null(x.score)}});
    return a;
}

std::string readings_text(const procedures::SessionAnalysis& a) {
    std::string t;
    if (a.method == "amplitude")
        t += "readings: the scope's own peak-to-peak measurement (magnitude only, no phase; about 1 % of full screen "
             "per channel, a wider uncertainty than a waveform fit)\n";
    else
        t += "readings: captured waveforms of both channels, joint sine fit\n";
    if (a.match)
        t += fmt::format("channel match: session {}, taken {}, {:.1f} days before this sweep; divided out of {} point(s){}\n",
                         a.match->session_id, a.match->taken_utc, a.match->age_days, a.match->points_corrected,
                         a.match->points_outside ? fmt::format(", {} outside its range", a.match->points_outside) : std::string());
    else
        t += "channel match: none for this scope; the bench's systematic terms (scope gain accuracy, channel skew) stand\n";
    return t;
}

nlohmann::ordered_json readings_json(const procedures::SessionAnalysis& a) {
    nlohmann::ordered_json j;
    j["method"] = a.method;
    if (a.match)
        j["match"] = {{"session", a.match->session_id}, {"taken_utc", a.match->taken_utc}, {"age_days", a.match->age_days},
                      {"points_corrected", a.match->points_corrected}, {"points_outside", a.match->points_outside}};
    else
        j["match"] = nullptr;
    return j;
}

std::string match_table(const std::vector<procedures::MatchRow>& rows) {
    std::string t = fmt::format("{:>12}  {:>22}  {:>22}\n", "frequency", "gain out/in ± U", "phase out−in ± U");
    double worst_db = 0, worst_deg = 0;
    for (const auto& row : rows) {
        t += fmt::format("{:>12}  {:>+11.4f} ± {:<6.4f} dB  {:>+10.4f} ± {:<6.4f} °\n", format_eng(row.freq_hz, "Hz", 4), row.gain_db,
                         2 * row.gain_db_sd, row.phase_deg, 2 * row.phase_deg_sd);
        worst_db = std::max(worst_db, std::abs(row.gain_db));
        worst_deg = std::max(worst_deg, std::abs(row.phase_deg));
    }
    t += fmt::format("largest mismatch {:.4f} dB, {:.4f}° (U = 2u, 95 %)\n", worst_db, worst_deg);
    return t;
}

}  // namespace ampbench::report
