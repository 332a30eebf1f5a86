// The sweep procedure: pre-flight, power sequencing, DC step, frequency plan, per-point settle /
// autorange / capture / joint sine fit, retakes, the response fit, the gap table and diagnosis.
#pragma once
#include <cstdint>
#include <iosfwd>
#include <optional>
#include <string>
#include <vector>

#include "cli/procedures/frequency_plan.h"
#include "fit/circuit/predict.h"
#include "fit/circuit/tolerance.h"
#include "fit/extract/diagnosis.h"
#include "fit/extract/gap.h"
#include "fit/response/response_fit.h"
#include "store/archive.h"

namespace ampbench::procedures {

struct SweepOptions {
    std::string bench_path, design_path, board_serial;
    std::string operator_name;
    FrequencyPlanOptions plan;
    std::optional<double> level_vpp;  // generator setting; nullopt = auto
    int captures = 1;
    std::string method = "capture";  // or "amplitude"
    std::optional<std::int64_t> resume_session;
    bool assume_yes = false;
    bool progress = true;
    double thd_limit = 0.05;   // a reading above this THD (fraction) is retaken at a lower level
    int tolerance_runs = 2000;
    std::string validate() const;  // empty when valid
};

struct DcReading {
    std::string channel, node;
    double volts = 0, u_v = 0, predicted_v = 0;
};

// The gap table and diagnosis of a stored session (used by sweep and report).
struct SessionAnalysis {
    std::string predicted_design_json;  // the design as stored with the session
    circuit::BenchLoading loading;       // what the session's bench adds to it
    double current_limit_a = 0;
    fit::ResponseFit fit;
    circuit::Prediction prediction;
    circuit::ToleranceBand band;
    std::vector<DcReading> dc;
    double quiescent_a = 0;
    std::vector<extract::GapRow> gap;
    std::vector<extract::FaultCandidate> diagnosis;
};

struct SweepOutcome {
    std::int64_t session_id = 0;
    std::string board;
    int points = 0;
    std::optional<double> virtual_s;
    double quiescent_a = 0;
    double level_vpp = 0;          // final generator setting
    double stimulus_vpp = 0;       // what it gives at the stimulus node
    std::vector<DcReading> dc;
    fit::ResponseFit fit;
    circuit::Prediction prediction;
    circuit::ToleranceBand band;
    std::vector<extract::GapRow> gap;
    std::vector<extract::FaultCandidate> diagnosis;
    SessionAnalysis analysis;  // everything the reports need, computed once
    bool out_of_band() const;
};

// Runs the sweep; `out` receives the safety notice (and the question read from `in`), `progress`
// the progress bar. Every exit powers the board down in reverse order.
SweepOutcome run_sweep(const SweepOptions& options, store::Archive& archive, std::ostream& out, std::ostream& progress,
                       std::istream& in);

// Recomputes a stored session's analysis (report uses it; sweep calls it once at the end).
SessionAnalysis analyse_session(store::Archive& archive, std::int64_t session_id, int tolerance_runs = 2000);

}  // namespace ampbench::procedures
