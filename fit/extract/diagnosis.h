// Single-fault diagnosis: which one part value change, open or short best explains a measured
// response, found by fitting each candidate's predicted response to the measured points.
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
};

// The nominal design's score comes first in the search as "no single change" and is returned
// when nothing beats it. Candidates whose operating point does not converge are skipped.
std::vector<FaultCandidate> diagnose(const circuit::Design& design, const circuit::BenchLoading& bench,
                                     const std::vector<ResponseSample>& points, const DiagnosisOptions& options = {});

// Reduced chi-square of a design's predicted response against the points (+inf when its DC fails).
double response_score(const circuit::Design& design, const circuit::BenchLoading& bench,
                      const std::vector<ResponseSample>& points, const DiagnosisOptions& options = {});

}  // namespace ampbench::extract
