// Measured gain points (frequency, gain, phase, their standard deviations) from a vector or a
// measurement CSV (DESIGN.md §4.4), checked and sorted before any fit sees them.
#pragma once

#include <string>
#include <string_view>
#include <vector>

namespace ampbench::fit {

struct GainPoint {
    double freq_hz = 0.0;
    double gain_db = 0.0;
    double phase_deg = 0.0;     // ignored when the set has no phase
    double gain_db_sd = 0.0;    // 0 = not given
    double phase_deg_sd = 0.0;  // 0 = not given
};

struct GainData {
    std::vector<GainPoint> points;  // sorted by frequency after prepare_gain_data
    bool has_phase = true;
    bool has_sd = false;  // every point carries gain_db_sd (and phase_deg_sd when has_phase)
    std::string origin;   // file name or "points", for messages
};

// Checks and sorts: FitInputError naming the origin and the point for a NaN, zero or negative
// frequency, a non-finite gain (zero amplitude), repeated frequencies, a non-positive sd, or
// fewer than two distinct frequencies. Unsorted input is sorted.
GainData prepare_gain_data(GainData data);

// Reads `freq_hz,gain_db,phase_deg[,gain_db_sd,phase_deg_sd]` or
// `freq_hz,vin_vpp,vout_vpp[,phase_deg]` (phase optional in both; `#` starts a comment line).
// InputError naming file, line and column for text that is not a number or a bad header;
// the result has been through prepare_gain_data.
GainData parse_gain_csv(std::string_view text, const std::string& origin);
GainData read_gain_csv(const std::string& path);

}  // namespace ampbench::fit
