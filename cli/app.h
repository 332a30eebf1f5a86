// The command-line front end: one CLI11 app, one file per command, errors mapped to exit codes
// once (DESIGN.md §9). run() is what main() calls and what the CLI tests call in-process.
#pragma once

#include <functional>
#include <iosfwd>
#include <string>
#include <vector>

namespace CLI {
class App;
}

namespace ampbench::cli {

// Options that every command accepts.
struct GlobalOptions {
    std::string db;     // --db PATH or URL (else $AMPBENCH_DB, else ./ampbench.sqlite)
    std::string trace;  // --trace FILE: log every instrument exchange
};

struct Context {
    std::ostream& out;
    std::ostream& err;
    GlobalOptions global;
    // Set by the chosen subcommand's callback; run() calls it after parsing.
    std::function<int()> action;

    // The archive path by the rule of --db, $AMPBENCH_DB, ./ampbench.sqlite.
    std::string db_path() const;
};

// Parses args (without the program name) and runs the command. Returns the exit code; all
// output goes to ctx streams. Never throws.
int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

}  // namespace ampbench::cli
