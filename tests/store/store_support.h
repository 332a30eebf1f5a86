// Helpers shared by the store tests: a temporary directory, sample readings and plans, a pid
// known to be dead, and SQLite's own integrity check.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "store/archive.h"

namespace ampbench::store::testing {

// A fresh directory under $TMPDIR (or /tmp), removed with everything in it on destruction.
class TempDir {
public:
    TempDir();
    ~TempDir();
    TempDir(const TempDir&) = delete;
    TempDir& operator=(const TempDir&) = delete;
    std::string path(const std::string& name) const { return dir_ + "/" + name; }
    const std::string& dir() const { return dir_; }

private:
    std::string dir_;
};

// A plausible reading at freq_hz: 40 dB midband with a few uncertainty fields set.
Point reading(double freq_hz, double gain_db, std::optional<std::int64_t> plan_index = {});
// n frequencies spaced logarithmically from f_start_hz to f_stop_hz, indexes 0..n-1.
std::vector<PlanPoint> log_plan(int n, double f_start_hz = 10.0, double f_stop_hz = 100e3);
// The pid of a child that has already exited and been reaped.
std::int64_t dead_pid();
// Seconds since the Unix epoch, from the system clock.
double unix_now_s();
// PRAGMA integrity_check on the file, through a separate connection ("ok" when sound).
std::string integrity_check(const std::string& path);
// Runs a SQL script on a new or existing file with the sqlite3 C API (for fixtures).
void run_sql_script(const std::string& path, const std::string& sql);
std::string read_text_file(const std::string& path);

}  // namespace ampbench::store::testing
