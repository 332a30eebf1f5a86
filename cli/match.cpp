// `ampbench match --bench B [--from HZ --to HZ --per-decade N]`: channel matching. Both probes
// on one node; the two channels' gain and phase mismatch over frequency is stored as a dated
// match session of the scope, and later sweeps on that scope divide it out.
#include <iostream>
#include <optional>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "cli/procedures/sweep.h"
#include "cli/report/terminal.h"
#include "core/interrupt.h"
#include "core/value.h"
#include "store/archive.h"

namespace ampbench::cli {
namespace {

struct MatchArgs {
    procedures::MatchOptions options;
    std::optional<double> from_hz, to_hz;
    std::string level;
    bool json = false;
};

int run_match_command(Context& ctx, MatchArgs& a) {
    procedures::MatchOptions o = a.options;
    o.plan.from_hz = a.from_hz;
    o.plan.to_hz = a.to_hz;
    if (!a.level.empty()) o.level_vpp = parse_value(a.level, "--level");
    install_interrupt_handler();
    auto archive = store::open_archive(ctx.db_path());
    const procedures::MatchOutcome r = procedures::run_match(o, *archive, a.json ? ctx.err : ctx.out, ctx.err, std::cin);
    if (a.json) {
        nlohmann::ordered_json j;
        j["session"] = r.session_id;
        j["scope"] = r.scope_serial;
        j["points"] = r.rows.size();
        j["virtual_s"] = r.virtual_s ? nlohmann::ordered_json(*r.virtual_s) : nlohmann::ordered_json(nullptr);
        nlohmann::ordered_json rows = nlohmann::ordered_json::array();
        for (const auto& row : r.rows)
            rows.push_back({{"freq_hz", row.freq_hz}, {"gain_db", row.gain_db}, {"gain_db_sd", row.gain_db_sd},
                            {"phase_deg", row.phase_deg}, {"phase_deg_sd", row.phase_deg_sd}});
        j["mismatch"] = rows;
        ctx.out << j.dump(2) << "\n";
        return 0;
    }
    ctx.out << fmt::format("\nmatch session {} · {} · {} points\n", r.session_id, r.scope_serial, r.rows.size());
    ctx.out << report::match_table(r.rows) << "sweeps on this scope now divide it out\n";
    return 0;
}

}  // namespace

void add_match_command(CLI::App& app, Context& ctx) {
    auto args = std::make_shared<MatchArgs>();
    CLI::App* c = app.add_subcommand("match", "Measure the mismatch of the scope's two channels with both probes on one node");
    c->add_option("--bench", args->options.bench_path, "Bench file")->required();
    c->add_option("--from", args->from_hz, "Lowest frequency, Hz (default 1 Hz)");
    c->add_option("--to", args->to_hz, "Highest frequency, Hz (default 20 MHz)");
    c->add_option("--per-decade", args->options.plan.per_decade, "Points per decade (default 4)");
    c->add_option("--level", args->level, "Generator setting, Vpp (default 1 Vpp within the bench's limit)");
    c->add_option("--captures", args->options.captures, "Captures per point (default 1)");
    c->add_option("--operator", args->options.operator_name, "Who is measuring");
    c->add_flag("--yes", args->options.assume_yes, "Do not ask before switching the generator on");
    c->add_flag("--json", args->json, "Print the result as JSON");
    c->add_flag("--no-progress", [args](std::int64_t) { args->options.progress = false; }, "No progress bar");
    args->options.plan.per_decade = 4;
    c->callback([&ctx, args] { ctx.action = [&ctx, args] { return run_match_command(ctx, *args); }; });
}

}  // namespace ampbench::cli
