// Benchmark: the virtual time one HVE-PA1 sweep takes on the in-process virtual bench, as a
// ratio to a fixed 1 s wait per point and to the least any procedure needs (per point, the
// board's settling time 5τ of its slowest pole plus one capture), both computed in the same run.
// Usage: bench_sweep [per_decade] [to_hz]   (defaults 6 and 150000)
#include <chrono>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <iostream>
#include <numbers>
#include <sstream>
#include <string>

#include <unistd.h>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/procedures/sweep.h"
#include "store/archive.h"

using namespace ampbench;

int main(int argc, char** argv) {
    const int per_decade = argc > 1 ? std::atoi(argv[1]) : 6;
    const double to_hz = argc > 2 ? std::atof(argv[2]) : 150e3;
    const std::filesystem::path dir = std::filesystem::temp_directory_path() / fmt::format("bench_sweep_{}", ::getpid());
    std::filesystem::create_directories(dir);
    auto archive = store::open_archive((dir / "bench.sqlite").string());

    procedures::SweepOptions o;
    o.bench_path = std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/virtual.bench.json";
    o.design_path = std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/pa1.design.json";
    o.board_serial = "PA1-2611-0042";
    o.assume_yes = true;
    o.progress = false;
    o.plan.per_decade = per_decade;
    o.plan.to_hz = to_hz;
    o.tolerance_runs = 200;
    std::ostringstream sink;
    std::istringstream no_input;
    const auto t0 = std::chrono::steady_clock::now();
    const procedures::SweepOutcome r = procedures::run_sweep(o, *archive, sink, sink, no_input);
    const double wall_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();

    // The least: per current point, 5τ of the predicted lowest corner plus the capture it needs.
    const double f_low = r.prediction.response.f_low_hz.value_or(1.0);
    const double settle_s = 5.0 / (2 * std::numbers::pi * f_low);
    double least_s = 0;
    int points = 0;
    for (const store::Point& p : archive->session_detail(r.session_id).points) {
        if (p.superseded_by) continue;
        const auto s = nlohmann::json::parse(p.settings_json.empty() ? "{}" : p.settings_json);
        least_s += settle_s + s.value("capture_s", 0.0);
        ++points;
    }
    const double virtual_s = r.virtual_s.value_or(0.0);
    std::cout << fmt::format("sweep: {} points, {:.2f} s of virtual time ({:.1f} s wall)\n", points, virtual_s, wall_s);
    std::cout << fmt::format("  against a fixed 1 s wait per point ({:.0f} s): {:.3f}x\n", 1.0 * points, virtual_s / points);
    std::cout << fmt::format("  against the least (settling {:.1f} ms + one capture per point, {:.2f} s): {:.3f}x\n", settle_s * 1e3,
                             least_s, least_s > 0 ? virtual_s / least_s : 0.0);
    std::filesystem::remove_all(dir);
    return 0;
}
