// Two-pass mean and variance (accurate when the spread is small against the mean, as hFE is).
#include "fit/lot/stats.h"

#include <algorithm>
#include <cmath>

#include "core/errors.h"

namespace ampbench::lot {

Summary summarize(const std::vector<double>& values) {
    if (values.empty()) throw FitInputError("no values to summarize");
    for (double v : values)
        if (!std::isfinite(v)) throw FitInputError("a value to summarize is not finite");
    Summary s;
    s.count = static_cast<long>(values.size());
    double sum = 0.0;
    for (double v : values) sum += v;
    s.mean = sum / static_cast<double>(values.size());
    if (values.size() >= 2) {
        double ss = 0.0, comp = 0.0;
        for (double v : values) {
            ss += (v - s.mean) * (v - s.mean);
            comp += v - s.mean;
        }
        // Corrected two-pass form: removes the rounding left in the mean.
        const double n = static_cast<double>(values.size());
        s.sd = std::sqrt(std::max(0.0, (ss - comp * comp / n) / (n - 1.0)));
    }
    const auto [lo, hi] = std::minmax_element(values.begin(), values.end());
    s.min = *lo;
    s.max = *hi;
    return s;
}

std::optional<double> cpk(double mean, std::optional<double> sd, std::optional<double> lsl,
                          std::optional<double> usl) {
    if (!sd || !(*sd > 0.0) || (!lsl && !usl)) return std::nullopt;
    double nearest = HUGE_VAL;
    if (usl) nearest = std::min(nearest, *usl - mean);
    if (lsl) nearest = std::min(nearest, mean - *lsl);
    return nearest / (3.0 * *sd);
}

std::optional<double> cpk(const Summary& summary, std::optional<double> lsl,
                          std::optional<double> usl) {
    return cpk(summary.mean, summary.sd, lsl, usl);
}

}  // namespace ampbench::lot
