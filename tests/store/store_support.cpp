// Test helpers for the store suite.
#include "store_support.h"

#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <stdexcept>

#include <SQLiteCpp/SQLiteCpp.h>
#include <sqlite3.h>

namespace ampbench::store::testing {

TempDir::TempDir() {
    const char* base = std::getenv("TMPDIR");
    std::string pattern = std::string(base && *base ? base : "/tmp") + "/ampbench-store-XXXXXX";
    if (!::mkdtemp(pattern.data())) throw std::runtime_error("mkdtemp failed");
    dir_ = pattern;
}

TempDir::~TempDir() {
    std::error_code ec;
    std::filesystem::remove_all(dir_, ec);
}

Point reading(double freq_hz, double gain_db, std::optional<std::int64_t> plan_index) {
    Point p;
    p.plan_index = plan_index;
    p.freq_hz = freq_hz;
    p.in_amplitude_v = 0.05;
    p.in_amplitude_sd_v = 0.0002;
    p.in_phase_deg = 0.0;
    p.out_amplitude_v = 0.05 * std::pow(10.0, gain_db / 20.0);
    p.out_amplitude_sd_v = 0.002;
    p.out_phase_deg = -178.5;
    p.gain_db = gain_db;
    p.gain_db_sd = 0.03;
    p.phase_deg = -178.5;
    p.phase_deg_sd = 0.2;
    p.thd_pct = 0.12;
    p.settings_json = R"({"scope":{"timebase_s":0.001,"volts_per_div":[0.02,1]}})";
    return p;
}

std::vector<PlanPoint> log_plan(int n, double f_start_hz, double f_stop_hz) {
    std::vector<PlanPoint> plan;
    for (int i = 0; i < n; ++i) {
        const double t = n == 1 ? 0.0 : static_cast<double>(i) / (n - 1);
        plan.push_back({i, f_start_hz * std::pow(f_stop_hz / f_start_hz, t), false});
    }
    return plan;
}

std::int64_t dead_pid() {
    const pid_t child = ::fork();
    if (child == 0) ::_exit(0);
    int status = 0;
    ::waitpid(child, &status, 0);
    return child;
}

double unix_now_s() {
    using namespace std::chrono;
    return duration<double>(system_clock::now().time_since_epoch()).count();
}

std::string integrity_check(const std::string& path) {
    SQLite::Database db(path, SQLite::OPEN_READONLY);
    return db.execAndGet("PRAGMA integrity_check").getString();
}

void run_sql_script(const std::string& path, const std::string& sql) {
    sqlite3* db = nullptr;
    if (sqlite3_open(path.c_str(), &db) != SQLITE_OK) {
        sqlite3_close(db);
        throw std::runtime_error("cannot open " + path);
    }
    char* message = nullptr;
    const int rc = sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &message);
    std::string error = message ? message : "";
    sqlite3_free(message);
    sqlite3_close(db);
    if (rc != SQLITE_OK) throw std::runtime_error("SQL script failed on " + path + ": " + error);
}

std::string read_text_file(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    if (!in) throw std::runtime_error("cannot read " + path);
    std::ostringstream text;
    text << in.rdbuf();
    return text.str();
}

}  // namespace ampbench::store::testing
