// `ampbench fit (SESSION | --csv FILE) [--model auto|rational:L,H] [--json]`: fits a transfer
// function to measured gain points and reports midband gain and corners with 95 % intervals.
#include <cmath>
#include <optional>
#include <ostream>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/errors.h"
#include "fit/response/gain_points.h"
#include "fit/response/response_fit.h"
#include "store/archive.h"

namespace ampbench::cli {
namespace {

using nlohmann::ordered_json;

struct FitArgs {
    std::optional<std::int64_t> session;
    std::string csv;
    std::string model = "auto";
    bool json = false;
};

ordered_json value_or_null(const fit::DerivedValue& v) { return v.present ? ordered_json(v.value) : ordered_json(nullptr); }
ordered_json ci_or_null(const fit::DerivedValue& v) {
    return v.present ? ordered_json::array({v.ci_low, v.ci_high}) : ordered_json(nullptr);
}
// JSON has no infinities or NaN; an undetermined number is null.
ordered_json finite_or_null(double v) { return std::isfinite(v) ? ordered_json(v) : ordered_json(nullptr); }

ordered_json to_json(const fit::ResponseFit& f) {
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
    out["beta_eff"] = nullptr;
    out["beta_eff_ci"] = nullptr;
    out["beta_eff_bf"] = nullptr;
    out["beta_verdict"] = "not requested";
    out["chi2_reduced"] = finite_or_null(f.report.chi2_reduced);
    out["brief"] = f.brief();
    out["notes"] = f.notes;
    ordered_json params = ordered_json::array();
    for (const fit::FitParameter& p : f.report.params)
        params.push_back({{"name", p.name}, {"value", finite_or_null(p.value)}, {"sd", finite_or_null(p.sd)},
                          {"ci", {finite_or_null(p.ci_low), finite_or_null(p.ci_high)}}});
    out["params"] = params;
    ordered_json candidates = ordered_json::array();
    for (const auto& [name, bic] : f.candidates) candidates.push_back({{"model", name}, {"bic", finite_or_null(bic)}});
    out["candidates"] = candidates;
    return out;
}

fit::GainData session_points(store::Archive& archive, std::int64_t id, const std::string& where) {
    if (!archive.session(id)) throw InputError(where, "session", fmt::format("no session {} in the archive", id));
    fit::GainData d;
    d.origin = fmt::format("session {}", id);
    d.has_phase = true;
    d.has_sd = true;
    for (const store::Point& p : archive.current_points(id)) {
        fit::GainPoint g;
        g.freq_hz = p.freq_hz;
        g.gain_db = p.gain_db;
        g.phase_deg = p.phase_deg.value_or(0.0);
        g.gain_db_sd = p.gain_db_sd.value_or(0.0);
        g.phase_deg_sd = p.phase_deg_sd.value_or(0.0);
        d.has_phase = d.has_phase && p.phase_deg.has_value();
        d.has_sd = d.has_sd && p.gain_db_sd.has_value() && (!p.phase_deg || p.phase_deg_sd.has_value());
        d.points.push_back(g);
    }
    return d;
}

void print_human(std::ostream& out, const fit::ResponseFit& f) {
    out << f.brief() << "\n";
    if (f.midband_freq_hz.present) out << fmt::format("  midband frequency {:.4g} Hz, peaking {:.3f} dB\n", f.midband_freq_hz.value, f.peaking_db.value);
    for (const std::string& n : f.notes) out << "  note: " << n << "\n";
    for (const fit::FitParameter& p : f.report.params)
        out << fmt::format("  {:<16} {:>12.6g}  [{:.6g}, {:.6g}]\n", p.name, p.value, p.ci_low, p.ci_high);
}

int run_fit(Context& ctx, const FitArgs& args) {
    if (args.session.has_value() == !args.csv.empty())
        throw UsageError("fit: give either a session number or --csv FILE");
    fit::ResponseFitOptions options;
    options.model = args.model;
    std::unique_ptr<store::Archive> archive;
    fit::GainData data;
    if (!args.csv.empty()) {
        data = fit::read_gain_csv(args.csv);
    } else {
        archive = store::open_archive(ctx.db_path());
        data = session_points(*archive, *args.session, ctx.db_path());
    }
    const fit::ResponseFit result = fit::fit_response(data, options);
    const ordered_json json = to_json(result);
    if (archive) {
        store::FitRecord rec;
        rec.session_id = *args.session;
        rec.kind = "response";
        rec.model = result.model_name();
        rec.params_json = json.at("params").dump();
        rec.report_json = json.dump();
        if (result.usable()) {
            rec.midband_gain_db = result.midband_gain_db.value;
            if (result.f_low_hz.present) rec.f_low_hz = result.f_low_hz.value;
            if (result.f_high_hz.present) rec.f_high_hz = result.f_high_hz.value;
        }
        archive->add_fit(rec);
    }
    if (args.json)
        ctx.out << json.dump(2) << "\n";
    else
        print_human(ctx.out, result);
    return 0;
}

}  // namespace

void add_fit_command(CLI::App& app, Context& ctx) {
    auto args = std::make_shared<FitArgs>();
    CLI::App* cmd = app.add_subcommand("fit", "Fit a transfer function to measured gain points: midband gain, "
                                              "-3 dB corners and their 95 % intervals");
    cmd->add_option("session", args->session, "Session number in the archive (the fit is stored with it)");
    cmd->add_option("--csv", args->csv, "Measurement CSV (freq_hz,gain_db,phase_deg[,gain_db_sd,phase_deg_sd] "
                                        "or freq_hz,vin_vpp,vout_vpp[,phase_deg])");
    cmd->add_option("--model", args->model, "auto (chosen by BIC) or rational:L,H (also L/Z for finite low "
                                            "zeros, +Pc for complex pairs)");
    cmd->add_flag("--json", args->json, "Print JSON instead of text");
    cmd->callback([&ctx, args] { ctx.action = [&ctx, args] { return run_fit(ctx, *args); }; });
}

}  // namespace ampbench::cli
