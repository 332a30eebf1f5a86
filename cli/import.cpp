// `ampbench import FILE.csv --board SERIAL [--design D]`: readings taken by hand or with another
// setup become one complete session of kind `import`; any bad row means nothing is written.
#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/json_read.h"
#include "store/archive.h"
#include "store/measurement_csv.h"

namespace ampbench::cli {
namespace {

struct ImportOptions {
    std::string file;
    std::string board;
    std::string design;
};

int run_import(Context& ctx, const ImportOptions& opt) {
    // Everything is read and checked before the archive is touched.
    const store::MeasurementCsv csv = store::read_measurement_csv(opt.file);
    std::string design_text;
    if (!opt.design.empty()) {
        const JsonDocument doc = JsonDocument::load(opt.design);
        JsonView(doc).require_format("ampbench-design/1");
        design_text = doc.root().dump(-1, ' ', false, nlohmann::json::error_handler_t::ignore);
    }
    std::vector<store::Point> points;
    points.reserve(csv.readings.size());
    for (const auto& r : csv.readings) points.push_back(store::point_from_reading(r));

    auto archive = store::open_archive(ctx.db_path());
    store::NewSession session;
    session.board_serial = opt.board;
    session.kind = store::SessionKind::import;
    session.notes = "imported from " + opt.file;
    if (!design_text.empty())
        session.design_address = archive->put_design(design_text, opt.design).address;
    const store::Session s = archive->import_session(session, points);
    ctx.out << fmt::format("imported {} readings from {} as session {} of board {}\n",
                           points.size(), opt.file, s.id, s.board_serial);
    return 0;
}

}  // namespace

void add_import_command(CLI::App& app, Context& ctx) {
    auto opt = std::make_shared<ImportOptions>();
    auto* cmd = app.add_subcommand("import", "Store readings from a CSV file as a new session");
    cmd->add_option("file", opt->file, "CSV: freq_hz,gain_db,phase_deg[,...] or freq_hz,vin_vpp,vout_vpp[,phase_deg]")
        ->required();
    cmd->add_option("--board", opt->board, "Serial number of the board measured")->required();
    cmd->add_option("--design", opt->design, "The board's design file (ampbench-design/1)");
    cmd->callback([opt, &ctx] { ctx.action = [opt, &ctx] { return run_import(ctx, *opt); }; });
}

}  // namespace ampbench::cli
