// The sweep's frequency plan: log-spaced points between limits, kept off mains harmonics, plus
// adaptive points that close in on each −3 dB corner until it is located to a set fraction.
#pragma once
#include <optional>
#include <string>
#include <vector>

namespace ampbench::procedures {

struct FrequencyPlanOptions {
    std::optional<double> from_hz, to_hz;  // default: a decade beyond each predicted corner
    int per_decade = 8;
    double mains_hz = 50.0;
    int mains_harmonics = 10;       // 1st .. 10th harmonic are avoided
    double mains_clearance = 0.01;  // a point within 1 % of a harmonic is moved off it
    double corner_tolerance = 0.02; // adaptive points until each corner is bracketed this tightly
    std::string validate() const;   // empty when valid
};

// A frequency at least `clearance` (fraction) away from every harmonic 1..harmonics of mains_hz;
// the nearest such frequency (moved down or up, whichever is closer).
double clear_of_mains(double freq_hz, double mains_hz, int harmonics, double clearance);

// The base plan. predicted corners give the default limits; a missing corner defaults to
// 10 Hz / 1 MHz respectively. Sorted, distinct.
std::vector<double> base_plan(const FrequencyPlanOptions& options, std::optional<double> predicted_f_low_hz,
                              std::optional<double> predicted_f_high_hz);

struct MeasuredGain {
    double freq_hz = 0;
    double gain_db = 0;
};

// Frequencies to add so that each −3 dB crossing of `measured` (relative to its maximum) is
// bracketed by two points less than corner_tolerance apart in frequency; empty when every corner
// is located (or none is crossed). New points come in pairs straddling the log-interpolated
// crossing estimate (closer together than the tolerance), inside the bracket, kept off mains harmonics.
std::vector<double> adaptive_points(std::vector<MeasuredGain> measured, const FrequencyPlanOptions& options);

}  // namespace ampbench::procedures
