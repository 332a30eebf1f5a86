// In-process command runner and temporary directories for the CLI tests.
#include "cli_support.h"

#include <unistd.h>

#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <stdexcept>

#include "cli/app.h"

namespace ampbench::cli::testing {

CliResult run_cli(const std::vector<std::string>& args) {
    std::ostringstream out, err;
    CliResult result;
    result.code = ampbench::cli::run(args, out, err);
    result.out = out.str();
    result.err = err.str();
    return result;
}

CliTempDir::CliTempDir() {
    const char* base = std::getenv("TMPDIR");
    std::string pattern = std::string(base && *base ? base : "/tmp") + "/ampbench-cli-XXXXXX";
    if (!::mkdtemp(pattern.data())) throw std::runtime_error("mkdtemp failed");
    dir_ = pattern;
}

CliTempDir::~CliTempDir() {
    std::error_code ec;
    std::filesystem::remove_all(dir_, ec);
}

void write_text(const std::string& path, const std::string& text) {
    std::ofstream out(path, std::ios::binary | std::ios::trunc);
    if (!out) throw std::runtime_error("cannot write " + path);
    out << text;
}

std::string read_text(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    if (!in) throw std::runtime_error("cannot read " + path);
    std::ostringstream text;
    text << in.rdbuf();
    return text.str();
}

std::string sqlite3_value(const std::string& db, const std::string& query) {
    const std::string cmd = "sqlite3 -readonly -batch -noheader '" + db + "' \"" + query + "\" 2>/dev/null";
    std::string out;
    FILE* p = ::popen(cmd.c_str(), "r");
    if (!p) return out;
    char buf[4096];
    for (size_t n; (n = std::fread(buf, 1, sizeof buf, p)) > 0;) out.append(buf, n);
    ::pclose(p);
    while (!out.empty() && (out.back() == '\n' || out.back() == '\r')) out.pop_back();
    return out;
}

}  // namespace ampbench::cli::testing
