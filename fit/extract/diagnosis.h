// Single-fault diagnosis: which one part value change, open or short best explains a measured
// response and the DC readings, found by fitting each candidate's prediction to both.
#pragma once
#include <string>
#include <vector>

#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"

namespace ampbench::extract {

struct ResponseSample {
    double freq_hz = 0;
    double gain_db = 0, gain_db_sd = 0;
    double phase_deg = 0, phase_deg_sd = 0;
    bool has_phase = true;
};

// What the meter and the supply read with the board powered: bias node voltages (by design node
// name) and the quiescent supply current. An empty record leaves the diagnosis to the response.
struct DcEvidence {
    struct Node {
        std::string node;
        double volts = 0, u_v = 0;
    };
    std::vector<Node> nodes;
    double supply_current_a = 0, supply_current_u_a = 0;  // 0 A: not read
    bool empty() const { return nodes.empty() && !(supply_current_a > 0); }
};

struct FaultCandidate {
    std::string ref;
    std::string kind;    // "open", "short", "value"
    double value = 0;    // the fitted value for "value" (ohms, farads, henries)
    double nominal = 0;
    std::string change;  // "C2 open", "R3 = 3.3 kΩ (design 5.6 kΩ)"
    double score = 0;    // reduced chi-square of the candidate against the points (lower is better)
};

struct DiagnosisOptions {
    int keep = 2;                  // candidates returned, best first
    double min_scale = 0.02;       // value changes searched over [min_scale, max_scale] × nominal
    double max_scale = 50.0;
    double gain_sd_floor_db = 0.05;
    double phase_sd_floor_deg = 0.5;
    // A DC reading's residual is scaled by its own uncertainty combined with the spread the part
    // tolerances give that node on a good board (a seeded Monte Carlo of this many draws).
    int dc_spread_runs = 200;
};

// The standard deviation each DC reading of `dc` has on good boards of `design` (part
// tolerances and beta_range), in the order of dc.nodes, then the supply current when read.
std::vector<double> dc_spread(const circuit::Design& design, const circuit::BenchLoading& bench, const DcEvidence& dc,
                              const DiagnosisOptions& options = {});

// Candidates are scored on the response points and, when given, the DC readings: a fault
// that silences the output (an open input capacitor, a starved transistor) is told apart by
// whether it moves the bias. Candidates whose operating point does not converge are skipped.
std::vector<FaultCandidate> diagnose(const circuit::Design& design, const circuit::BenchLoading& bench,
                                     const std::vector<ResponseSample>& points, const DcEvidence& dc = {},
                                     const DiagnosisOptions& options = {});

// Reduced chi-square of a design's prediction against the points and DC readings (+inf when its
// DC fails). `spread` is dc_spread() of the nominal design (empty: readings' own uncertainty).
double response_score(const circuit::Design& design, const circuit::BenchLoading& bench,
                      const std::vector<ResponseSample>& points, const DcEvidence& dc = {},
                      const std::vector<double>& spread = {}, const DiagnosisOptions& options = {});

}  // namespace ampbench::extract
