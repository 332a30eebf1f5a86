// Running ampbench commands in-process for the CLI tests: run_cli({...}) returns the exit code
// and what the command printed; CliTempDir gives each test its own directory (and archive).
#pragma once

#include <string>
#include <vector>

namespace ampbench::cli::testing {

struct CliResult {
    int code = -1;
    std::string out;
    std::string err;
};

// Runs `ampbench ARGS...` through cli::run (no program name in args).
CliResult run_cli(const std::vector<std::string>& args);

// A fresh directory, removed with its contents on destruction.
class CliTempDir {
public:
    CliTempDir();
    ~CliTempDir();
    CliTempDir(const CliTempDir&) = delete;
    CliTempDir& operator=(const CliTempDir&) = delete;
    std::string path(const std::string& name) const { return dir_ + "/" + name; }
    // An archive path inside the directory, for --db.
    std::string db() const { return path("archive.sqlite"); }

private:
    std::string dir_;
};

void write_text(const std::string& path, const std::string& text);
// One value from a SQLite archive by the sqlite3 shell, read-only (so a test never takes a lock
// a running command needs); "" when the query fails (e.g. before the schema exists).
std::string sqlite3_value(const std::string& db, const std::string& query);
std::string read_text(const std::string& path);

}  // namespace ampbench::cli::testing
