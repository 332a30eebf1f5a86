// Synthetic gain data for the response-fit tests.
#include "response_support.h"

#include <cmath>
#include <numbers>

namespace ampbench::fit::testing {

GainData synthetic_gain(const RationalOrder& order, double sign, const std::vector<double>& p, double f_lo,
                        double f_hi, int points, Random* rng, double sd_db, double sd_deg, bool wrap_phase,
                        bool with_phase) {
    GainData d;
    d.origin = "synthetic";
    d.has_phase = with_phase;
    d.has_sd = rng != nullptr;
    double unwrapped_prev = 0;
    for (int i = 0; i < points; ++i) {
        const double f = f_lo * std::pow(f_hi / f_lo, static_cast<double>(i) / (points - 1));
        const std::complex<double> ln_h = rational_log_response(order, sign, p.data(), f);
        GainPoint pt;
        pt.freq_hz = f;
        pt.gain_db = ln_h.real() * 20 / std::numbers::ln10;
        double phase = ln_h.imag() * 180 / std::numbers::pi;
        // Unwrap along frequency so the unwrapped variant is continuous.
        if (i > 0) phase = unwrapped_prev + wrap_deg(phase - unwrapped_prev);
        unwrapped_prev = phase;
        if (rng) {
            pt.gain_db += rng->normal(0, sd_db);
            phase += rng->normal(0, sd_deg);
            pt.gain_db_sd = sd_db;
            pt.phase_deg_sd = sd_deg;
        }
        pt.phase_deg = wrap_phase ? wrap_deg(phase) : phase;
        d.points.push_back(pt);
    }
    return d;
}

}  // namespace ampbench::fit::testing
