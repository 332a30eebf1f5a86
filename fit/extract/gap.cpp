// Gap rows and the guarded-acceptance verdict.
#include "fit/extract/gap.h"

#include <cmath>

namespace ampbench::extract {

std::string guarded_verdict(double m, double big_u, double low, double high) {
    const double a = m - std::abs(big_u), b = m + std::abs(big_u);
    if (a >= low && b <= high) return kInBand;
    if (b < low || a > high) return kOutOfBand;
    return kInconclusive;
}

GapRow make_gap_row(std::string quantity, std::string unit, double predicted, std::optional<double> low,
                    std::optional<double> high, std::optional<double> measured, double u, double k) {
    GapRow r;
    r.quantity = std::move(quantity);
    r.unit = std::move(unit);
    r.predicted = predicted;
    r.band_low = low;
    r.band_high = high;
    r.measured = measured;
    r.u = u;
    r.coverage_k = k;
    if (!measured || !std::isfinite(*measured)) {
        r.verdict = kNotMeasured;
        return r;
    }
    r.gap = *measured - predicted;
    r.verdict = (low && high) ? guarded_verdict(*measured, k * u, *low, *high) : kNoBand;
    return r;
}

}  // namespace ampbench::extract
