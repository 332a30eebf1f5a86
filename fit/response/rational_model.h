// The rational transfer-function model of an RC-coupled amplifier: a midband gain, low-frequency
// pole/zero sections, high-frequency real poles and complex pairs, all corners log-scaled.
#pragma once

#include <complex>
#include <string>
#include <vector>

#include "fit/lsq/least_squares.h"
#include "fit/response/gain_points.h"

namespace ampbench::fit {

// H(f) = ±10^(gain_db/20) · Π_low (jf + z_i)/(jf + p_i) · Π_high 1/(1 + jf/p_k)
//        · Π_pairs 1/(1 − (f/f0)² + j·f/(f0·Q)),
// with z_i = 0 (a zero at the origin, as a coupling capacitor gives) for the first
// low_poles − low_zeros sections and a finite zero for the rest (an emitter bypass).
struct RationalOrder {
    int low_poles = 0;
    int low_zeros = 0;      // finite low-frequency zeros, ≤ low_poles
    int high_poles = 0;     // real high-frequency poles
    int complex_pairs = 0;  // high-frequency complex pole pairs

    int parameter_count() const { return 1 + low_poles + low_zeros + high_poles + 2 * complex_pairs; }
    // "rational:L,H" with "/Z" after L for finite low zeros and "+Pc" after H for complex pairs,
    // e.g. "rational:3/1,2", "rational:2,1+1c".
    std::string name() const;
    // Parses the form above; FitInputError for anything else.
    static RationalOrder parse(const std::string& text);
    bool operator==(const RationalOrder&) const = default;
};

// Parameter vector layout (external values): gain_db, low poles (Hz), low finite zeros (Hz),
// high poles (Hz), then (f0 Hz, Q) per pair.
std::vector<std::string> rational_parameter_names(const RationalOrder& order);

// ln H(f) for parameters p (sign: +1 or −1) and, optionally, d ln H / d p_j.
std::complex<double> rational_log_response(const RationalOrder& order, double sign, const double* p,
                                           double freq_hz, std::complex<double>* dlog_dp = nullptr);

// H(f) itself (sign included) by one complex product, and optionally the same d ln H / d p_j:
// the fast path for residuals and magnitudes, where the phase is only needed modulo 360°.
std::complex<double> rational_response(const RationalOrder& order, double sign, const double* p,
                                       double freq_hz, std::complex<double>* dlog_dp = nullptr);

// The signed linear gain ±10^(gain_db/20) of parameters p.
double rational_gain(double sign, const double* p);

// H(f) for a gain from rational_gain(): the value rational_response gives, without the power
// for every frequency (loops over frequencies at fixed parameters).
std::complex<double> rational_response_at_gain(const RationalOrder& order, double gain, const double* p,
                                               double freq_hz);

// d ln H / d p_j alone, every entry set: closed-form per factor, no product or logarithm.
void rational_log_derivatives(const RationalOrder& order, const double* p, double freq_hz,
                              std::complex<double>* dlog_dp);

// Residuals on log magnitude (dB) and wrapped phase (degrees), each divided by its sd;
// magnitude only when the data have no phase.
class RationalResiduals : public ResidualModel {
public:
    RationalResiduals(const GainData& data, RationalOrder order, double sign);
    std::size_t residual_count() const override;
    void residuals(std::span<const double> p, std::span<double> r) const override;
    bool jacobian(std::span<const double> p, std::span<double> jac) const override;

private:
    const GainData& data_;
    RationalOrder order_;
    double sign_;
    std::vector<double> sd_db_, sd_deg_;
};

// Wraps degrees into (−180, 180].
double wrap_deg(double deg);

}  // namespace ampbench::fit
