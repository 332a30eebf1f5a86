// `ampbench fit (SESSION | --csv FILE) [--design D] [--bench B] [--model auto|rational:L,H|circuit]
// [--free LIST] [--json]`: fits a transfer function (or the design's circuit model) to measured
// gain points and reports midband gain, corners and, for the circuit model, the effective beta,
// each with its 95 % interval. A session's DC readings of the bias nodes enter the circuit fit.
#include <cmath>
#include <optional>
#include <ostream>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/bench_file.h"
#include "core/errors.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/extract/beta.h"
#include "fit/response/circuit_fit.h"
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
    std::string design, bench, free;
    bool json = false;
};

ordered_json value_or_null(const fit::DerivedValue& v) { return v.present ? ordered_json(v.value) : ordered_json(nullptr); }
ordered_json ci_or_null(const fit::DerivedValue& v) {
    return v.present ? ordered_json::array({v.ci_low, v.ci_high}) : ordered_json(nullptr);
}
// JSON has no infinities or NaN; an undetermined number is null.
ordered_json finite_or_null(double v) { return std::isfinite(v) ? ordered_json(v) : ordered_json(nullptr); }

// The fields every fit reports, in the order of the JSON.
template <class Fit>
ordered_json common_json(const Fit& f) {
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
    return out;
}

ordered_json to_json(const fit::ResponseFit& f) {
    ordered_json out = common_json(f);
    ordered_json candidates = ordered_json::array();
    for (const auto& [name, bic] : f.candidates) candidates.push_back({{"model", name}, {"bic", finite_or_null(bic)}});
    out["candidates"] = candidates;
    return out;
}

ordered_json to_json(const fit::CircuitFit& f, const extract::EffectiveBeta& b) {
    ordered_json out = common_json(f);
    out["beta_eff"] = finite_or_null(b.beta0);
    out["beta_eff_ci"] = {finite_or_null(b.ci_low), finite_or_null(b.ci_high)};
    out["beta_eff_bf"] = finite_or_null(b.bf);
    out["beta_verdict"] = b.verdict;
    out["beta"] = {{"transistor", b.transistor},
                   {"beta0", finite_or_null(b.beta0)},
                   {"beta0_ci", {finite_or_null(b.ci_low), finite_or_null(b.ci_high)}},
                   {"bf", finite_or_null(b.bf)},
                   {"bf_ci", {finite_or_null(b.bf_ci_low), finite_or_null(b.bf_ci_high)}},
                   {"hfe", finite_or_null(b.hfe)},
                   {"hfe_ci", {finite_or_null(b.hfe_ci_low), finite_or_null(b.hfe_ci_high)}},
                   {"ic_a", finite_or_null(b.ic_a)},
                   {"vce_v", finite_or_null(b.vce_v)},
                   {"correlated_with", b.correlated_with},
                   {"correlation", finite_or_null(b.correlation)},
                   {"reason", b.reason},
                   {"advice", b.advice}};
    ordered_json priors = ordered_json::array();
    for (const fit::CircuitParameter& p : f.parameters)
        priors.push_back({{"name", p.name}, {"nominal", p.nominal}, {"free", p.free},
                          {"prior_sd_ln", p.free ? ordered_json(nullptr) : ordered_json(p.prior_sd_ln)}});
    out["parameters"] = priors;
    ordered_json dc = ordered_json::array();
    for (std::size_t k = 0; k < f.dc_readings.size(); ++k)
        dc.push_back({{"node", f.dc_readings[k].node}, {"volts", f.dc_readings[k].volts},
                      {"u_v", f.dc_readings[k].sd_volts},
                      {"model_volts", k < f.dc_model_volts.size() ? finite_or_null(f.dc_model_volts[k]) : ordered_json(nullptr)}});
    out["dc_readings"] = dc;
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

// What the session's sweep recorded at power-up (its latest "setup" record: a resumed session
// has one per run): the meter's DC readings of the bias nodes and the bench file it ran on.
struct SessionSetup {
    std::vector<fit::DcReading> dc;
    std::optional<BenchFile> bench;
};

SessionSetup session_setup(store::Archive& archive, std::int64_t id) {
    SessionSetup out;
    const store::SessionDetail detail = archive.session_detail(id);
    const std::string where = fmt::format("session {} set-up", id);
    for (const store::FitRecord& f : detail.fits) {
        if (f.kind != "setup") continue;
        const auto j = nlohmann::json::parse(f.params_json, nullptr, false);
        if (!j.is_object()) throw InputError(where, "params", "the stored set-up record is not JSON");
        out.dc.clear();
        if (j.contains("dc") && j.at("dc").is_array())
            for (const auto& d : j.at("dc")) {
                if (!d.contains("node") || !d.contains("volts") || !d.contains("u_v") || !d.at("volts").is_number() ||
                    !d.at("u_v").is_number())
                    throw InputError(where, "dc", "a DC reading lacks its node, volts or u_v");
                out.dc.push_back({circuit::canonical_node(d.at("node").get<std::string>()), d.at("volts").get<double>(),
                                  d.at("u_v").get<double>()});
            }
        if (j.contains("bench_text") && j.at("bench_text").is_string())
            out.bench = parse_bench_file(j.at("bench_text").get<std::string>(), where);
    }
    return out;
}

template <class Fit>
void print_human(std::ostream& out, const Fit& f) {
    out << f.brief() << "\n";
    if (f.midband_freq_hz.present) out << fmt::format("  midband frequency {:.4g} Hz, peaking {:.3f} dB\n", f.midband_freq_hz.value, f.peaking_db.value);
    for (const std::string& n : f.notes) out << "  note: " << n << "\n";
    for (const fit::FitParameter& p : f.report.params)
        out << fmt::format("  {:<16} {:>12.6g}  [{:.6g}, {:.6g}]\n", p.name, p.value, p.ci_low, p.ci_high);
}

void store_fit(store::Archive& archive, std::int64_t session, const std::string& kind, const std::string& model,
               const ordered_json& json, bool usable, const fit::DerivedValue& gain, const fit::DerivedValue& f_low,
               const fit::DerivedValue& f_high) {
    store::FitRecord rec;
    rec.session_id = session;
    rec.kind = kind;
    rec.model = model;
    rec.params_json = json.at("params").dump();
    rec.report_json = json.dump();
    if (usable) {
        rec.midband_gain_db = gain.value;
        if (f_low.present) rec.f_low_hz = f_low.value;
        if (f_high.present) rec.f_high_hz = f_high.value;
    }
    archive.add_fit(rec);
}

int run_fit(Context& ctx, const FitArgs& args) {
    if (args.session.has_value() == !args.csv.empty())
        throw UsageError("fit: give either a session number or --csv FILE");
    // The circuit model when asked for, or when a design is given without a rational model.
    const bool circuit_model = args.model == "circuit" || (args.model == "auto" && !args.design.empty());
    if (circuit_model && args.design.empty()) throw UsageError("fit: --model circuit needs --design FILE");
    if (!circuit_model && !args.free.empty()) throw UsageError("fit: --free applies to --model circuit only");
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
    if (circuit_model) {
        const circuit::Design design = circuit::load_design(args.design);
        // A session brings its sweep's DC readings (residual rows against the model's operating
        // point) and, unless --bench says otherwise, the bench it was measured on.
        SessionSetup setup;
        if (archive) setup = session_setup(*archive, *args.session);
        circuit::BenchLoading loading;
        if (!args.bench.empty())
            loading = circuit::bench_loading(load_bench_file(args.bench));
        else if (setup.bench)
            loading = circuit::bench_loading(*setup.bench);
        fit::CircuitFitOptions copt;
        copt.free = fit::parse_free_list(args.free);
        copt.dc_readings = setup.dc;
        fit::CircuitFit result = fit::fit_circuit(design, loading, data, copt);
        if (args.bench.empty() && !setup.bench)
            result.notes.push_back("no --bench: a 50 Ω generator and unloaded probes assumed");
        else if (args.bench.empty())
            result.notes.push_back("bench loading from the session's set-up record");
        const extract::EffectiveBeta beta = extract::effective_beta(result, design, loading);
        const ordered_json json = to_json(result, beta);
        if (archive)
            store_fit(*archive, *args.session, "circuit", result.model_name(), json, result.usable(),
                      result.midband_gain_db, result.f_low_hz, result.f_high_hz);
        if (args.json) {
            ctx.out << json.dump(2) << "\n";
        } else {
            print_human(ctx.out, result);
            ctx.out << beta.brief() << "\n";
            if (!beta.advice.empty()) ctx.out << "  " << beta.advice << "\n";
        }
        return 0;
    }
    const fit::ResponseFit result = fit::fit_response(data, options);
    const ordered_json json = to_json(result);
    if (!args.design.empty() || !args.bench.empty())
        ctx.err << "fit: the effective beta needs the circuit model (--model circuit); not computed for "
                << result.model_name() << "\n";
    if (archive)
        store_fit(*archive, *args.session, "response", result.model_name(), json, result.usable(),
                  result.midband_gain_db, result.f_low_hz, result.f_high_hz);
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
    cmd->add_option("--model", args->model, "auto (chosen by BIC; the circuit model when --design is given), "
                                            "rational:L,H (also L/Z for finite low zeros, +Pc for complex pairs) or "
                                            "circuit (the design's small-signal model)");
    cmd->add_option("--design", args->design, "Design file (*.design.json) for the circuit model and the effective beta");
    cmd->add_option("--bench", args->bench, "Bench file: generator output resistance and probe loading");
    cmd->add_option("--free", args->free, "Circuit parameters to fit, e.g. Q1.beta,C3 (default: the first "
                                          "transistor's beta); other parts' tolerances enter as priors");
    cmd->add_flag("--json", args->json, "Print JSON instead of text");
    cmd->callback([&ctx, args] { ctx.action = [&ctx, args] { return run_fit(ctx, *args); }; });
}

}  // namespace ampbench::cli
