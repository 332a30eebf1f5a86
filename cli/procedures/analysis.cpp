// From a stored sweep session to its fit, prediction (bench included), gap table and diagnosis.
#include <cmath>
#include <numbers>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/procedures/sweep.h"
#include "core/bench_file.h"
#include "core/errors.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"

namespace ampbench::procedures {

SessionAnalysis analyse_session(store::Archive& archive, std::int64_t session_id, int tolerance_runs) {
    const store::SessionDetail detail = archive.session_detail(session_id);
    const std::string where = fmt::format("session {}", session_id);
    if (!detail.board || detail.board->design_address.empty())
        throw InputError(where, "design", "the session's board has no stored design");
    const auto dr = archive.design(detail.board->design_address);
    if (!dr) throw StoreError(fmt::format("{}: design {} is missing from the archive", where, detail.board->design_address));
    const circuit::Design design = circuit::parse_design(dr->canonical_json, where + " design");
    SessionAnalysis a;
    BenchFile bench = default_virtual_bench();
    for (const store::FitRecord& f : detail.fits) {
        if (f.kind != "setup") continue;
        const auto j = nlohmann::json::parse(f.params_json);
        bench = parse_bench_file(j.at("bench_text").get<std::string>(), detail.session.bench_file);
        a.quiescent_a = j.value("quiescent_a", 0.0);
        a.method = j.value("method", std::string("capture"));
        if (j.contains("match")) {
            const auto& m = j.at("match");
            a.match = MatchUse{m.at("session").get<std::int64_t>(), m.at("taken_utc").get<std::string>(),
                               m.at("age_days").get<double>(), 0, 0};
        } else {
            a.match.reset();
        }
        // A resumed session has one setup record per run; the latest DC readings stand.
        a.dc.clear();
        for (const auto& d : j.at("dc"))
            a.dc.push_back({d.at("channel").get<std::string>(), d.at("node").get<std::string>(), d.at("volts").get<double>(),
                            d.at("u_v").get<double>(), 0.0});
    }
    const circuit::BenchLoading loading = circuit::bench_loading(bench);
    a.predicted_design_json = dr->canonical_json;
    a.loading = loading;
    a.current_limit_a = design.supply_current_limit_a > 0 ? design.supply_current_limit_a : 0.05;
    const circuit::Netlist nl = circuit::build_netlist(design, loading);
    a.prediction = circuit::predict(nl);
    for (DcReading& d : a.dc) {
        const int idx = nl.node_index(circuit::canonical_node(d.node));
        if (idx >= 0) d.predicted_v = a.prediction.op.node_volts[static_cast<size_t>(idx)];
    }
    circuit::ToleranceOptions to;
    to.runs = tolerance_runs;
    a.band = circuit::tolerance_band(design, loading, to);

    fit::GainData data;
    data.origin = where;
    data.has_phase = true;
    data.has_sd = true;
    for (const store::Point& p : detail.points)
        if (!p.superseded_by && !p.phase_deg) data.has_phase = false;  // amplitude method: magnitude only
    std::vector<extract::ResponseSample> samples;
    double sys_db = 0;
    for (const store::Point& p : detail.points) {
        if (p.superseded_by) continue;
        data.points.push_back({p.freq_hz, p.gain_db, p.phase_deg.value_or(0.0), p.gain_db_sd.value_or(0.01), p.phase_deg_sd.value_or(0.1)});
        samples.push_back({p.freq_hz, p.gain_db, p.gain_db_sd.value_or(0.01), p.phase_deg.value_or(0.0), p.phase_deg_sd.value_or(0.1), p.phase_deg.has_value()});
        const auto s = nlohmann::json::parse(p.settings_json.empty() ? "{}" : p.settings_json);
        sys_db = std::max(sys_db, s.value("gain_db_sd_systematic", 0.0));
        if (a.match) ++(s.contains("match_session") ? a.match->points_corrected : a.match->points_outside);
    }
    a.fit = fit::fit_response(fit::prepare_gain_data(data));

    auto band_of = [&](const std::string& q) -> std::pair<std::optional<double>, std::optional<double>> {
        const circuit::QuantityBand* b = a.band.find(q);
        if (!b || b->samples == 0) return {std::nullopt, std::nullopt};
        return {b->low, b->high};
    };
    const circuit::Response& r = a.prediction.response;
    auto measured = [](const fit::DerivedValue& v) { return v.present ? std::optional<double>(v.value) : std::nullopt; };
    {
        const auto [lo, hi] = band_of("midband_gain_db");
        a.gap.push_back(extract::make_gap_row("midband_gain_db", "dB", r.midband_gain_db, lo, hi, measured(a.fit.midband_gain_db),
                                              std::hypot(a.fit.midband_gain_db.sd, sys_db)));
    }
    if (r.f_low_hz) {
        const auto [lo, hi] = band_of("f_low_hz");
        a.gap.push_back(extract::make_gap_row("f_low_hz", "Hz", *r.f_low_hz, lo, hi, measured(a.fit.f_low_hz), a.fit.f_low_hz.sd));
    }
    if (r.f_high_hz) {
        const auto [lo, hi] = band_of("f_high_hz");
        a.gap.push_back(extract::make_gap_row("f_high_hz", "Hz", *r.f_high_hz, lo, hi, measured(a.fit.f_high_hz), a.fit.f_high_hz.sd));
    }
    if (a.quiescent_a > 0) {
        const auto [lo, hi] = band_of("supply_current_a");
        // common practice: a bench supply's current read-back is good to about 1 % + 0.1 mA.
        a.gap.push_back(extract::make_gap_row("supply_current_a", "A", a.prediction.op.supply_current_a, lo, hi, a.quiescent_a,
                                              (0.01 * a.quiescent_a + 1e-4) / std::sqrt(3.0)));
    }
    for (const DcReading& d : a.dc) {
        const auto [lo, hi] = band_of("V(" + circuit::canonical_node(d.node) + ")");
        a.gap.push_back(extract::make_gap_row(fmt::format("V({})", d.node), "V", d.predicted_v, lo, hi, d.volts, d.u_v));
    }

    bool out = false;
    for (const auto& row : a.gap) out = out || row.verdict == extract::kOutOfBand;
    if (out && !samples.empty()) {
        // The bias readings let the diagnosis tell a silent output with a healthy bias (an open
        // coupling capacitor) from one with a starved or saturated transistor.
        extract::DcEvidence dc;
        for (const DcReading& d : a.dc) dc.nodes.push_back({d.node, d.volts, d.u_v});
        if (a.quiescent_a > 0) dc.supply_current_a = a.quiescent_a, dc.supply_current_u_a = (0.01 * a.quiescent_a + 1e-4) / std::sqrt(3.0);
        a.diagnosis = extract::diagnose(design, loading, samples, dc);
    }
    return a;
}

}  // namespace ampbench::procedures
