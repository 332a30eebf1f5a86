// The gap table of DESIGN.md §5: each measured quantity against its prediction and tolerance
// band, with the guarded-acceptance verdict (JCGM 106:2012).
#pragma once
#include <optional>
#include <string>

namespace ampbench::extract {

inline constexpr const char* kInBand = "in band";
inline constexpr const char* kOutOfBand = "out of band";
inline constexpr const char* kInconclusive = "inconclusive";
inline constexpr const char* kNoBand = "no band";      // the prediction has no band for it
inline constexpr const char* kNotMeasured = "not measured";

struct GapRow {
    std::string quantity;  // "midband_gain_db", "f_low_hz", "V(c)"
    std::string unit;      // "dB", "Hz", "V", "A"
    double predicted = 0;
    std::optional<double> band_low, band_high;
    std::optional<double> measured;
    double u = 0;           // combined standard uncertainty
    double coverage_k = 2;  // U = k·u (95 %)
    double gap = 0;         // measured − predicted
    std::string verdict;
};

// `in band` when [m − U, m + U] lies inside [low, high], `out of band` when it lies wholly
// outside, `inconclusive` otherwise.
std::string guarded_verdict(double measured, double expanded_u, double low, double high);

GapRow make_gap_row(std::string quantity, std::string unit, double predicted, std::optional<double> band_low,
                    std::optional<double> band_high, std::optional<double> measured, double u, double coverage_k = 2);

}  // namespace ampbench::extract
