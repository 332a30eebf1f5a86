// Every subcommand registers itself here; each lives in its own cli/<name>.cpp.
#pragma once

#include "cli/app.h"

namespace ampbench::cli {

void add_predict_command(CLI::App& app, Context& ctx);
void add_simulate_command(CLI::App& app, Context& ctx);
void add_check_command(CLI::App& app, Context& ctx);
void add_off_command(CLI::App& app, Context& ctx);
void add_ports_command(CLI::App& app, Context& ctx);
void add_history_command(CLI::App& app, Context& ctx);
void add_export_command(CLI::App& app, Context& ctx);
void add_import_command(CLI::App& app, Context& ctx);
void add_boards_command(CLI::App& app, Context& ctx);
void add_lot_command(CLI::App& app, Context& ctx);
void add_lots_command(CLI::App& app, Context& ctx);
void add_fit_command(CLI::App& app, Context& ctx);
void add_sweep_command(CLI::App& app, Context& ctx);
void add_match_command(CLI::App& app, Context& ctx);
void add_report_command(CLI::App& app, Context& ctx);
void add_demo_command(CLI::App& app, Context& ctx);
void add_sync_command(CLI::App& app, Context& ctx);

}  // namespace ampbench::cli
