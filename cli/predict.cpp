// `ampbench predict DESIGN [--bench B] [--json] [--monte-carlo N] [--seed S]`: what a correct
// board measures on the given bench, and the band its part tolerances allow.
#include <cmath>
#include <cstdint>
#include <optional>
#include <sstream>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/bench_file.h"
#include "core/errors.h"
#include "core/value.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/predict.h"
#include "fit/circuit/tolerance.h"

namespace ampbench::cli {
namespace {

using circuit::Design;
using nlohmann::ordered_json;

struct PredictArgs {
    std::string design;
    std::string bench;
    bool json = false;
    std::optional<int> runs;
    std::uint64_t seed = 1;
};

ordered_json number_or_null(const std::optional<double>& v) {
    return v ? ordered_json(*v) : ordered_json(nullptr);
}

// Board nodes only: the engine's internal base nodes ("Q1#b") are not terminals.
bool is_board_node(const std::string& name) {
    return name != "0" && name.find('#') == std::string::npos;
}

ordered_json to_json(const Design& d, const circuit::Netlist& nl, const circuit::Prediction& p,
                     const circuit::ToleranceBand* band) {
    ordered_json out;
    out["design"] = d.name;
    ordered_json nodes = ordered_json::object();
    for (int i = 1; i < nl.node_count(); ++i)
        if (is_board_node(nl.node_names[i])) nodes[nl.node_names[i]] = p.op.node_volts[i];
    ordered_json devices = ordered_json::object();
    for (const auto& t : p.op.transistors)
        devices[t.ref] = {{"ic_a", t.ic_a},     {"ib_a", t.ib_a},     {"vbe_v", t.vbe_v},
                          {"vce_v", t.vce_v},   {"region", t.region}, {"hfe", t.hfe},
                          {"beta0", t.beta0}};
    out["operating_point"] = {{"nodes", nodes},
                              {"devices", devices},
                              {"supply_current_a", p.op.supply_current_a}};
    const circuit::Response& r = p.response;
    out["response"] = {{"midband_gain", r.midband_gain},
                       {"midband_gain_db", r.midband_gain_db},
                       {"midband_phase_deg", r.midband_phase_deg},
                       {"inverting", r.inverting},
                       {"midband_freq_hz", r.midband_freq_hz},
                       {"peaking_db", r.peaking_db},
                       {"f_low_hz", number_or_null(r.f_low_hz)},
                       {"f_high_hz", number_or_null(r.f_high_hz)},
                       {"input_impedance_ohm", r.input_impedance_ohm},
                       {"output_impedance_ohm", r.output_impedance_ohm},
                       {"max_output_vpp", r.max_output_vpp},
                       {"swing_limit", r.swing_limit}};
    if (band) {
        ordered_json quantities = ordered_json::object();
        for (const auto& q : band->quantities) {
            if (q.samples == 0) {
                quantities[q.name] = nullptr;
                continue;
            }
            quantities[q.name] = {{"low", q.low}, {"median", q.median}, {"high", q.high},
                                  {"nominal", std::isfinite(q.nominal) ? ordered_json(q.nominal)
                                                                       : ordered_json(nullptr)},
                                  {"samples", q.samples}};
        }
        ordered_json sens = ordered_json::array();
        for (const auto& s : band->sensitivity)
            sens.push_back({{"quantity", s.quantity}, {"ref", s.ref}, {"share", s.share}});
        out["tolerance"] = {{"runs", band->runs},     {"failed_runs", band->failed_runs},
                            {"seed", band->seed},     {"coverage", band->coverage},
                            {"quantities", quantities}, {"sensitivity", sens}};
    }
    return out;
}

std::string eng(const std::optional<double>& v, std::string_view unit) {
    return v ? format_eng(*v, unit) : std::string("not reached");
}

std::string to_table(const Design& d, const circuit::Netlist& nl, const circuit::Prediction& p,
                     const circuit::ToleranceBand* band, const std::string& bench) {
    std::ostringstream o;
    o << (d.name.empty() ? d.path : d.name) << "\n";
    o << "bench: " << (bench.empty() ? std::string("none (generator 50 Ω, no probe loading)") : bench)
      << "\n\nOperating point\n";
    for (int i = 1; i < nl.node_count(); ++i)
        if (is_board_node(nl.node_names[i]))
            o << fmt::format("  V({:<8}) {:>12}\n", nl.node_names[i],
                             format_eng(p.op.node_volts[i], "V"));
    o << fmt::format("  supply current {:>10}\n", format_eng(p.op.supply_current_a, "A"));
    if (!p.op.transistors.empty()) {
        o << fmt::format("\n  {:<5} {:>10} {:>10} {:>9} {:>9} {:>7} {:>7}  {}\n", "part", "I_C",
                         "I_B", "V_BE", "V_CE", "hFE", "β0", "region");
        for (const auto& t : p.op.transistors)
            o << fmt::format("  {:<5} {:>10} {:>10} {:>9} {:>9} {:>7.1f} {:>7.1f}  {}\n", t.ref,
                             format_eng(t.ic_a, "A"), format_eng(t.ib_a, "A"),
                             format_eng(t.vbe_v, "V"), format_eng(t.vce_v, "V"), t.hfe, t.beta0,
                             t.region);
    }
    const circuit::Response& r = p.response;
    o << "\nResponse (gain = V(out) / V(in))\n";
    o << fmt::format("  midband gain      {} ({:.2f} dB), phase {:.1f}°{}\n",
                     format_eng(r.midband_gain), r.midband_gain_db, r.midband_phase_deg,
                     r.inverting ? ", inverting" : "");
    o << fmt::format("  midband frequency {}\n", format_eng(r.midband_freq_hz, "Hz"));
    o << fmt::format("  −3 dB corners     {} … {}\n", eng(r.f_low_hz, "Hz"), eng(r.f_high_hz, "Hz"));
    o << fmt::format("  peaking           {:.3f} dB\n", r.peaking_db);
    o << fmt::format("  input impedance   {}\n", format_eng(r.input_impedance_ohm, "Ω"));
    o << fmt::format("  output impedance  {}\n", format_eng(r.output_impedance_ohm, "Ω"));
    o << fmt::format("  max output swing  {} peak to peak ({})\n", format_eng(r.max_output_vpp, "V"),
                     r.swing_limit.empty() ? "no transistor" : r.swing_limit);
    if (band) {
        o << fmt::format("\nTolerance band ({} runs, seed {}, p{:.1f} … p{:.1f}{})\n", band->runs,
                         band->seed, 50 * (1 - band->coverage), 100 - 50 * (1 - band->coverage),
                         band->failed_runs ? fmt::format(", {} runs did not converge",
                                                         band->failed_runs)
                                           : std::string());
        o << fmt::format("  {:<22} {:>11} {:>11} {:>11}   moved most by\n", "quantity", "low",
                         "median", "high");
        for (const auto& q : band->quantities) {
            if (q.samples == 0) continue;
            std::string movers;
            int shown = 0;
            for (const auto& s : band->sensitivity)
                if (s.quantity == q.name && shown < 3) {
                    movers += fmt::format("{}{} {:.0f}%", shown ? ", " : "", s.ref, 100 * s.share);
                    ++shown;
                }
            o << fmt::format("  {:<22} {:>11} {:>11} {:>11}   {}\n", q.name, format_eng(q.low),
                             format_eng(q.median), format_eng(q.high), movers);
        }
    }
    return o.str();
}

int run_predict(Context& ctx, const PredictArgs& args) {
    const Design design = circuit::load_design(args.design);
    circuit::BenchLoading loading;
    if (!args.bench.empty()) {
        try {
            loading = circuit::bench_loading(load_bench_file(args.bench));
        } catch (const InputError& e) {
            if (!e.file().empty()) throw;
            throw e.in_file(args.bench);
        }
    }
    const circuit::Netlist netlist = circuit::build_netlist(design, loading);
    const circuit::Prediction prediction = circuit::predict(netlist);
    std::optional<circuit::ToleranceBand> band;
    if (args.runs) {
        circuit::ToleranceOptions opt;
        opt.runs = *args.runs;
        opt.seed = args.seed;
        band = circuit::tolerance_band(design, loading, opt);
    }
    const circuit::ToleranceBand* band_ptr = band ? &*band : nullptr;
    // Compose everything first so an error leaves no partial output.
    const std::string text = args.json ? to_json(design, netlist, prediction, band_ptr).dump(2) + "\n"
                                       : to_table(design, netlist, prediction, band_ptr, args.bench);
    ctx.out << text;
    return 0;
}

}  // namespace

void add_predict_command(CLI::App& app, Context& ctx) {
    auto args = std::make_shared<PredictArgs>();
    CLI::App* cmd = app.add_subcommand(
        "predict", "Predict what a correct board measures (operating point, gain, corners, "
                   "impedances, swing) and, with --monte-carlo, the band its tolerances allow");
    cmd->add_option("design", args->design, "Board design file (*.design.json)")->required();
    cmd->add_option("--bench", args->bench,
                    "Bench file: adds the generator's output resistance and the probe loading");
    cmd->add_flag("--json", args->json, "Print JSON instead of a table");
    cmd->add_option("--monte-carlo", args->runs, "Tolerance band from N Monte Carlo runs (e.g. 2000)")
        ->check(CLI::Range(2, 10000000));
    cmd->add_option("--seed", args->seed, "Seed of the Monte Carlo draws (default 1)");
    cmd->callback([&ctx, args] { ctx.action = [&ctx, args] { return run_predict(ctx, *args); }; });
}

}  // namespace ampbench::cli
