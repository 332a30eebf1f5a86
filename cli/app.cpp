// CLI11 set-up and the single place where errors become one line on stderr and an exit code.
#include "cli/app.h"

#include <cstdlib>
#include <iostream>

#include <CLI/CLI.hpp>

#include "cli/commands.h"
#include "core/errors.h"
#include "core/version.h"

namespace ampbench::cli {

std::string Context::db_path() const {
    if (!global.db.empty()) return global.db;
    if (const char* env = std::getenv("AMPBENCH_DB"); env && *env) return env;
    return "ampbench.sqlite";
}

int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
    Context ctx{out, err, {}, {}};
    CLI::App app{"ampbench: bench characterization of transistor amplifier boards and "
                 "incoming inspection of transistor lots",
                 "ampbench"};
    app.set_version_flag("--version", std::string("ampbench ") + software_version());
    app.require_subcommand(1);
    app.fallthrough();
    app.add_option("--db", ctx.global.db, "Archive file or postgresql:// URL (default $AMPBENCH_DB or ./ampbench.sqlite)");
    app.add_option("--trace", ctx.global.trace, "Log every instrument exchange to FILE");
    add_predict_command(app, ctx);
    add_simulate_command(app, ctx);
    add_check_command(app, ctx);
    add_off_command(app, ctx);
    add_ports_command(app, ctx);
    add_history_command(app, ctx);
    add_export_command(app, ctx);
    add_import_command(app, ctx);
    add_boards_command(app, ctx);
    add_lot_command(app, ctx);
    add_lots_command(app, ctx);
    add_fit_command(app, ctx);
    add_sweep_command(app, ctx);
    add_match_command(app, ctx);
    add_report_command(app, ctx);
    add_demo_command(app, ctx);
    add_sync_command(app, ctx);


    try {
        // CLI11 wants argv order reversed when given a vector.
        std::vector<std::string> reversed(args.rbegin(), args.rend());
        app.parse(reversed);
    } catch (const CLI::CallForHelp&) {
        out << app.help();
        return 0;
    } catch (const CLI::CallForAllHelp&) {
        out << app.help("", CLI::AppFormatMode::All);
        return 0;
    } catch (const CLI::CallForVersion&) {
        out << "ampbench " << software_version() << "\n";
        return 0;
    } catch (const CLI::ParseError& e) {
        err << "ampbench: " << e.what() << "\n";
        return static_cast<int>(ExitCode::usage);
    }

    try {
        return ctx.action ? ctx.action() : 0;
    } catch (const Error& e) {
        err << "ampbench: " << e.what() << "\n";
        return static_cast<int>(e.exit_code());
    } catch (const std::bad_alloc&) {
        err << "ampbench: out of memory\n";
        return static_cast<int>(ExitCode::input);
    } catch (const std::exception& e) {
        err << "ampbench: internal error: " << e.what() << "\n";
        return 70;
    }
}

}  // namespace ampbench::cli
