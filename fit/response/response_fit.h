// Transfer-function fits of measured gain points: order selection, Levenberg–Marquardt on the
// rational model, and the derived quantities of DESIGN.md §5 with 95 % intervals.
#pragma once

#include <complex>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "fit/lsq/least_squares.h"
#include "fit/response/gain_points.h"
#include "fit/response/rational_model.h"

namespace ampbench::fit {

struct ResponseFitOptions {
    std::string model = "auto";  // "auto" or a RationalOrder name such as "rational:2,2"
    double confidence = 0.95;
    int max_low_poles = 3;
    int max_high_poles = 3;
    std::string validate() const;  // empty when valid
};

// A derived quantity; `present` is false when it does not exist (a corner the data do not
// reach), and then value and interval are not meaningful.
struct DerivedValue {
    bool present = false;
    double value = 0.0, sd = 0.0, ci_low = 0.0, ci_high = 0.0;
};

struct ResponseFit {
    FitReport report;
    RationalOrder order;
    double sign = 1.0;  // −1 when the model carries a 180° inversion
    bool magnitude_only = false;
    double f_min_hz = 0.0, f_max_hz = 0.0;  // measured range
    // Order selection: every candidate tried with its information criterion (BIC), or NaN when
    // that fit was not usable.
    std::vector<std::pair<std::string, double>> candidates;
    std::vector<std::string> notes;  // assumptions and why a quantity is missing

    DerivedValue midband_gain_db, f_low_hz, f_high_hz, midband_freq_hz, peaking_db;
    std::optional<bool> inverting;  // unknown for magnitude-only data

    bool usable() const { return report.usable(); }
    std::string model_name() const { return order.name(); }
    std::string brief() const;
    // The fitted H(f) (complex, sign included).
    std::complex<double> response(double freq_hz) const;
};

// FitInputError for data that cannot be fitted (fewer points than parameters, ...). Otherwise
// always returns a ResponseFit; check usable().
ResponseFit fit_response(const GainData& data, const ResponseFitOptions& options = {});

// The fit at a fixed order from given starting parameters (used by the reference checks).
ResponseFit fit_response_from(const GainData& data, const RationalOrder& order, double sign,
                              const std::vector<double>& start, double confidence = 0.95);

// Starting parameters for an order: Sanathanan–Koerner on each side of the maximum when the
// data have phase, else corner estimates read off the magnitude.
std::vector<double> rational_start(const GainData& data, const RationalOrder& order, bool linearised);

// Sign (+1 or −1) that best matches the measured phase at the given start (+1 without phase).
double choose_sign(const GainData& data, const RationalOrder& order, const std::vector<double>& start);

}  // namespace ampbench::fit
