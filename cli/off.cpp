// `ampbench off BENCH`: switches the generator output off, then the supply output off, whatever
// state they are in — what a user runs after a crash (DESIGN.md §6).
#include <CLI/CLI.hpp>
#include <fmt/format.h>

#include "cli/commands.h"
#include "core/bench_file.h"
#include "core/errors.h"
#include "drivers/bench_instruments.h"

namespace ampbench::cli {
namespace {

int run_off(const std::string& bench_path, Context& ctx) {
    const BenchFile bench = load_bench_file(bench_path);
    drivers::OpenOptions options;
    if (!ctx.global.trace.empty()) options.trace = std::make_shared<drivers::TraceLog>(ctx.global.trace);
    const auto problems = drivers::switch_outputs_off(bench, options);
    const auto failed = [&](const std::string& role) {
        for (const auto& p : problems)
            if (p.rfind(role, 0) == 0) return true;
        return false;
    };
    for (const char* role : {"generator", "supply"}) {
        const bool present = std::string(role) == "generator" ? bench.generator.present : bench.supply.present;
        if (!present) continue;
        if (!failed(role)) ctx.out << fmt::format("{} output off\n", role);
    }
    if (!bench.generator.present && !bench.supply.present) ctx.out << "the bench has no generator or supply\n";
    for (const auto& p : problems) ctx.err << "ampbench: " << p << "\n";
    return problems.empty() ? 0 : static_cast<int>(ExitCode::instrument);
}

}  // namespace

void add_off_command(CLI::App& app, Context& ctx) {
    auto bench = std::make_shared<std::string>();
    auto* cmd = app.add_subcommand("off", "Switch the generator output and then the supply output off");
    cmd->add_option("bench", *bench, "Bench file (ampbench-bench/1)")->required();
    cmd->callback([bench, &ctx] { ctx.action = [bench, &ctx] { return run_off(*bench, ctx); }; });
}

}  // namespace ampbench::cli
