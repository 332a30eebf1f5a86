// Benchmark: one 200-point AC prediction and 1000 Monte Carlo runs of HVE-LD2, against ngspice
// doing the same 1000 AC analyses in one batch deck, measured in the same run.
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <sstream>

#include "fit/circuit/ac.h"
#include "fit/circuit/design.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/predict.h"
#include "fit/circuit/tolerance.h"
#include "../reference/circuit_deck_support.h"

using namespace ampbench;
using namespace ampbench::circuit;
using Clock = std::chrono::steady_clock;

namespace {

double seconds_since(Clock::time_point start) {
    return std::chrono::duration<double>(Clock::now() - start).count();
}

double time_ngspice(const Design& d, int analyses) {
    std::ostringstream deck;
    deck << testing::spice_circuit(d, {});
    // 11 decades at 18 points per decade: 199 frequencies, as in our 200-point sweep.
    deck << ".control\nrepeat " << analyses << "\nac dec 18 0.01 1e9\ndestroy all\nend\n.endc\n.end\n";
    const auto dir = testing::scratch_dir("bench-predict");
    const auto start = Clock::now();
    const bool ok = testing::run_ngspice(dir, deck.str());
    const double t = seconds_since(start);
    std::filesystem::remove_all(dir);
    return ok ? t : -1.0;
}

}  // namespace

int main() {
    const Design design = load_design(std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/ld2.design.json");
    const Netlist netlist = build_netlist(design);
    const std::vector<double> freqs = log_frequencies(0.01, 1e9, 200);

    // One 200-point AC prediction: operating point, linearisation and 200 frequencies.
    const int reps = 200;
    double sink = 0;
    auto start = Clock::now();
    for (int i = 0; i < reps; ++i) {
        const OperatingPoint op = solve_operating_point(netlist);
        AcAnalysis ac(netlist, op);
        for (double f : freqs) sink += std::abs(ac.gain(f));
    }
    const double t_sweep = seconds_since(start) / reps;

    start = Clock::now();
    const Prediction p = predict(netlist);
    const double t_predict = seconds_since(start);
    sink += p.response.midband_gain;

    ToleranceOptions opt;
    opt.runs = 1000;
    start = Clock::now();
    const ToleranceBand band = tolerance_band(design, {}, opt);
    const double t_mc = seconds_since(start);
    sink += band.quantities.front().median;

    const double t_spice_1 = time_ngspice(design, 1);
    const double t_spice = time_ngspice(design, 1000);

    std::printf("circuit: %s (%d unknowns)\n", design.name.c_str(), netlist.unknown_count());
    std::printf("one 200-point AC sweep (DC + AC):        %10.3f ms\n", 1e3 * t_sweep);
    std::printf("one full prediction (grid + refinement): %10.3f ms\n", 1e3 * t_predict);
    std::printf("1000 Monte Carlo runs (full prediction): %10.3f s\n", t_mc);
    if (t_spice < 0) {
        std::printf("ngspice did not run; no ratio\n");
        return 1;
    }
    std::printf("ngspice, 1 AC analysis of 199 points:    %10.3f s (start-up included)\n", t_spice_1);
    std::printf("ngspice, 1000 AC analyses in one deck:   %10.3f s\n", t_spice);
    std::printf("ratio ngspice(1000 AC) / ours(1000 Monte Carlo runs): %.1fx\n", t_spice / t_mc);
    std::printf("ratio ngspice(1000 AC) / ours(1000 x 200-point sweeps): %.1fx\n",
                t_spice / (1000 * t_sweep));
    std::printf("(checksum %.6g)\n", sink);
    return 0;
}
