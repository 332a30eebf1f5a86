// Summary statistics of a lot's measurements and the process capability index Cpk.
#pragma once

#include <optional>
#include <vector>

namespace ampbench::lot {

struct Summary {
    long count = 0;
    double mean = 0.0;
    std::optional<double> sd;  // sample standard deviation (n - 1); needs two values
    double min = 0.0;
    double max = 0.0;
};

// Mean, sample standard deviation, minimum and maximum. Throws FitInputError for no values or
// a non-finite value.
Summary summarize(const std::vector<double>& values);

// Cpk = min(USL - mu, mu - LSL) / (3 sigma), or the one-sided index when only one limit is
// given. Empty when sigma is zero or unknown, or when neither limit is given.
// Source: ISO 22514-2 (process capability indices); the formula is common practice.
std::optional<double> cpk(double mean, std::optional<double> sd, std::optional<double> lsl,
                          std::optional<double> usl);
std::optional<double> cpk(const Summary& summary, std::optional<double> lsl,
                          std::optional<double> usl);

}  // namespace ampbench::lot
