// `ampbench sweep --bench B --design D --board SERIAL [...]`: measures a board's response,
// stores every reading, fits it and prints the gap table against the design's prediction.
#include <iostream>
#include <optional>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "cli/procedures/sweep.h"
#include "cli/report/terminal.h"
#include "core/errors.h"
#include "core/interrupt.h"
#include "core/value.h"
#include "store/archive.h"

namespace ampbench::cli {
namespace {

struct SweepArgs {
    procedures::SweepOptions options;
    std::string level = "auto";
    std::optional<double> from_hz, to_hz;
    bool json = false;
    bool fail_on_out_of_band = false;
};

nlohmann::ordered_json outcome_json(const procedures::SweepOutcome& r) {
    nlohmann::ordered_json j;
    j["session"] = r.session_id;
    j["board"] = r.board;
    j["points"] = r.points;
    j["virtual_s"] = r.virtual_s ? nlohmann::ordered_json(*r.virtual_s) : nlohmann::ordered_json(nullptr);
    nlohmann::ordered_json dc = nlohmann::ordered_json::object();
    for (const auto& d : r.dc) dc[d.node + "_v"] = d.volts;
    dc["supply_current_a"] = r.quiescent_a;
    j["dc"] = dc;
    j["fit"] = report::fit_json(r.fit);
    j["gap"] = report::gap_json(r.gap);
    j["diagnosis"] = report::diagnosis_json(r.diagnosis);
    const nlohmann::ordered_json readings = report::readings_json(r.analysis);
    j["method"] = readings.at("method");
    j["match"] = readings.at("match");
    return j;
}

int run_sweep_command(Context& ctx, SweepArgs& a) {
    procedures::SweepOptions o = a.options;
    o.plan.from_hz = a.from_hz;
    o.plan.to_hz = a.to_hz;
    if (a.level != "auto") o.level_vpp = parse_value(a.level, "--level");
    install_interrupt_handler();
    auto archive = store::open_archive(ctx.db_path());
    // With --json the notice goes to stderr so stdout stays one JSON document.
    const procedures::SweepOutcome r = procedures::run_sweep(o, *archive, a.json ? ctx.err : ctx.out, ctx.err, std::cin);
    if (a.json) {
        ctx.out << outcome_json(r).dump(2) << "\n";
    } else {
        ctx.out << fmt::format("\nsession {} · board {} · {} points", r.session_id, r.board, r.points);
        if (r.virtual_s) ctx.out << fmt::format(" · {:.1f} s of virtual time", *r.virtual_s);
        ctx.out << "\n" << report::readings_text(r.analysis) << r.fit.brief() << "\n\n" << report::gap_table(r.gap);
        if (!r.diagnosis.empty()) ctx.out << "\n" << report::diagnosis_text(r.diagnosis);
    }
    if (a.fail_on_out_of_band && r.out_of_band()) return static_cast<int>(ExitCode::out_of_band);
    return 0;
}

}  // namespace

void add_sweep_command(CLI::App& app, Context& ctx) {
    auto args = std::make_shared<SweepArgs>();
    CLI::App* c = app.add_subcommand("sweep", "Measure a board's frequency response and compare it with its design");
    c->add_option("--bench", args->options.bench_path, "Bench file")->required();
    c->add_option("--design", args->options.design_path, "Design file");
    c->add_option("--board", args->options.board_serial, "Board serial number");
    c->add_option("--from", args->from_hz, "Lowest frequency, Hz (default a decade below the predicted f_low)");
    c->add_option("--to", args->to_hz, "Highest frequency, Hz (default a decade above the predicted f_high)");
    c->add_option("--per-decade", args->options.plan.per_decade, "Points per decade (default 8)");
    c->add_option("--level", args->level, "Generator level: auto or a Vpp setting");
    c->add_option("--captures", args->options.captures, "Captures per point (default 1)");
    c->add_option("--method", args->options.method, "capture or amplitude");
    c->add_option("--resume", args->options.resume_session, "Continue an interrupted session");
    c->add_option("--tolerance-runs", args->options.tolerance_runs, "Monte Carlo draws for the tolerance band (default 2000)")
        ->check(CLI::Range(100, 100000));
    c->add_option("--operator", args->options.operator_name, "Who is measuring");
    c->add_flag("--yes", args->options.assume_yes, "Do not ask before powering the board");
    c->add_flag("--json", args->json, "Print the result as JSON");
    c->add_flag("--no-progress", [args](std::int64_t) { args->options.progress = false; }, "No progress bar");
    c->add_flag("--fail-on-out-of-band", args->fail_on_out_of_band, "Exit 7 when a quantity is out of band");
    c->callback([&ctx, args] { ctx.action = [&ctx, args] { return run_sweep_command(ctx, *args); }; });
}

}  // namespace ampbench::cli
