// `ampbench export SESSION (--csv | --json) [-o FILE]`: the current readings as the §4.4 CSV, or
// the whole session (superseded readings, instruments, settings) as JSON.
#include <cstdio>
#include <fstream>

#include <CLI/CLI.hpp>
#include <fmt/format.h>

#include "cli/commands.h"
#include "core/errors.h"
#include "store/archive.h"
#include "store/measurement_csv.h"
#include "store/session_export.h"

namespace ampbench::cli {
namespace {

struct ExportOptions {
    std::int64_t session = 0;
    bool csv = false;
    bool json = false;
    std::string output;
};

// Writes next to the target and renames, so a failed export leaves no partial file.
void write_file_whole(const std::string& path, const std::string& text) {
    const std::string temp = path + ".partial";
    {
        std::ofstream out(temp, std::ios::binary | std::ios::trunc);
        if (!out) throw InputError(path, "", "cannot create the output file");
        out << text;
        out.flush();
        if (!out) {
            std::remove(temp.c_str());
            throw InputError(path, "", "cannot write the output file");
        }
    }
    if (std::rename(temp.c_str(), path.c_str()) != 0) {
        std::remove(temp.c_str());
        throw InputError(path, "", "cannot write the output file");
    }
}

int run_export(Context& ctx, const ExportOptions& opt) {
    if (opt.csv == opt.json) throw UsageError("export: give exactly one of --csv and --json");
    auto archive = store::open_archive(ctx.db_path());
    if (!archive->session(opt.session))
        throw InputError(ctx.db_path(), "session",
                         fmt::format("no session {} in the archive", opt.session));
    std::string text;
    if (opt.csv) {
        const auto s = archive->session(opt.session);
        text = store::write_measurement_csv(
            archive->current_points(opt.session),
            fmt::format("ampbench session {} ({}), {} {}", s->id, s->uuid,
                        store::to_string(s->kind), s->started_utc));
    } else {
        text = store::session_json(archive->session_detail(opt.session));
    }
    if (opt.output.empty() || opt.output == "-")
        ctx.out << text;
    else
        write_file_whole(opt.output, text);
    return 0;
}

}  // namespace

void add_export_command(CLI::App& app, Context& ctx) {
    auto opt = std::make_shared<ExportOptions>();
    auto* cmd = app.add_subcommand("export", "Write one session's readings as CSV or JSON");
    cmd->add_option("session", opt->session, "Session number (see `ampbench history`)")
        ->required();
    auto* csv = cmd->add_flag("--csv", opt->csv, "Current readings: freq_hz,gain_db,phase_deg,...");
    auto* json = cmd->add_flag("--json", opt->json, "Everything, superseded readings included");
    csv->excludes(json);
    cmd->add_option("-o,--output", opt->output, "Write to FILE instead of standard output");
    cmd->callback([opt, &ctx] { ctx.action = [opt, &ctx] { return run_export(ctx, *opt); }; });
}

}  // namespace ampbench::cli
