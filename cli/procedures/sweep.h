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

// The channel-match run a sweep divided out of its readings (DESIGN.md §5: it replaces the
// bench's systematic gain and skew terms wherever it covers the frequency).
struct MatchUse {
    std::int64_t session_id = 0;
    std::string taken_utc;  // when the match run started
    double age_days = 0;    // at the time of the sweep
    int points_corrected = 0, points_outside = 0;
};

struct DcReading {
    std::string channel, node;
    double volts = 0, u_v = 0, predicted_v = 0;
};

// The gap table and diagnosis of a stored session (used by sweep and report).
struct SessionAnalysis {
    std::string predicted_design_json;  // the design as stored with the session
    std::string method = "capture";      // how the readings were taken (capture or amplitude)
    std::optional<MatchUse> match;       // the channel-match run used, if any
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

// `ampbench match`: both probes on one node, a sweep of the two channels' mismatch, stored as a
// dated match session of the scope (board serial match_serial(scope identity)).
struct MatchOptions {
    std::string bench_path, operator_name;
    FrequencyPlanOptions plan;        // default 1 Hz .. 20 MHz, 4 per decade
    std::optional<double> level_vpp;  // generator setting; default 1 Vpp within the bench's limit
    int captures = 1;
    bool assume_yes = false;
    bool progress = true;
};

struct MatchRow {
    double freq_hz = 0, gain_db = 0, gain_db_sd = 0, phase_deg = 0, phase_deg_sd = 0;
};

// A stored match-run reading as a mismatch row (a missing phase or sd reads as 0).
MatchRow match_row(const store::Point& p);

struct MatchOutcome {
    std::int64_t session_id = 0;
    std::string scope_serial;  // the board serial the run is stored under
    std::vector<MatchRow> rows;
    std::optional<double> virtual_s;
};

// The board serial a scope's match runs are stored under: "match:" + the manufacturer, model and
// serial fields of its identity ("maker,model,serial,firmware").
std::string match_serial(const std::string& scope_identity);

MatchOutcome run_match(const MatchOptions& options, store::Archive& archive, std::ostream& out, std::ostream& progress,
                       std::istream& in);

// Runs the sweep; `out` receives the safety notice (and the question read from `in`), `progress`
// the progress bar. Every exit powers the board down in reverse order.
SweepOutcome run_sweep(const SweepOptions& options, store::Archive& archive, std::ostream& out, std::ostream& progress,
                       std::istream& in);

// Recomputes a stored session's analysis (report uses it; sweep calls it once at the end).
SessionAnalysis analyse_session(store::Archive& archive, std::int64_t session_id, int tolerance_runs = 2000);

}  // namespace ampbench::procedures
