// Response quantities from the AC analysis: a log grid over 0.01 Hz–1 GHz, the maximum refined
// by golden-section search and the −3 dB crossings by the Illinois variant of regula falsi.
#include "fit/circuit/predict.h"

#include <algorithm>
#include <cmath>
#include <numbers>

#include <fmt/format.h>

namespace ampbench::circuit {
namespace {

double degrees(std::complex<double> z) {
    double deg = std::arg(z) * 180.0 / std::numbers::pi;
    if (deg <= -180.0) deg += 360.0;
    return deg;
}

// |H(f)| by its squared parts: the gain is far from over- and underflow, and this skips hypot.
double gain_magnitude(AcAnalysis& ac, double f_hz) {
    const std::complex<double> h = ac.gain(f_hz);
    return std::sqrt(h.real() * h.real() + h.imag() * h.imag());
}

// Largest |H| on [lo, hi] in log10(f), by golden-section search.
double refine_maximum(AcAnalysis& ac, double lo, double hi, double* best_u) {
    const double r = (std::sqrt(5.0) - 1) / 2;
    auto mag = [&](double u) { return gain_magnitude(ac, std::pow(10.0, u)); };
    double a = lo, b = hi;
    double x1 = b - r * (b - a), x2 = a + r * (b - a);
    double f1 = mag(x1), f2 = mag(x2);
    for (int i = 0; i < 60 && b - a > 1e-6; ++i) {
        if (f1 < f2) {
            a = x1;
            x1 = x2;
            f1 = f2;
            x2 = a + r * (b - a);
            f2 = mag(x2);
        } else {
            b = x2;
            x2 = x1;
            f2 = f1;
            x1 = b - r * (b - a);
            f1 = mag(x1);
        }
    }
    *best_u = f1 > f2 ? x1 : x2;
    return std::max(f1, f2);
}

// The u = log10(f) in [u_a, u_b] where |H| crosses `target`, given a bracket.
double refine_crossing(AcAnalysis& ac, double u_a, double u_b, double target) {
    auto fn = [&](double u) {
        return std::log(gain_magnitude(ac, std::pow(10.0, u)) / target);
    };
    double fa = fn(u_a), fb = fn(u_b);
    int side = 0;
    for (int i = 0; i < 100 && std::abs(u_b - u_a) > 1e-10; ++i) {
        const double u = (u_a * fb - u_b * fa) / (fb - fa);
        const double fu = fn(u);
        if (fu == 0) return u;
        if ((fu > 0) == (fb > 0)) {
            u_b = u;
            fb = fu;
            if (side == -1) fa /= 2;
            side = -1;
        } else {
            u_a = u;
            fa = fu;
            if (side == 1) fb /= 2;
            side = 1;
        }
    }
    return (u_a * fb - u_b * fa) / (fb - fa);
}

void output_swing(AcAnalysis& ac, const Netlist& nl, const OperatingPoint& op, double f_hz,
                  double vce_sat, Response* r) {
    const std::vector<std::complex<double>> x = ac.solution(f_hz);
    auto v = [&](int node) { return node == 0 ? std::complex<double>(0) : x[node - 1]; };
    const std::complex<double> vout = v(nl.out);
    r->max_output_vpp = 0;
    r->swing_limit.clear();
    if (std::abs(vout) == 0) return;
    double peak = INFINITY;
    for (size_t k = 0; k < nl.transistors.size(); ++k) {
        const Transistor& t = nl.transistors[k];
        const BjtOperatingPoint& d = op.transistors[k];
        const double pol = t.params.polarity;
        const std::complex<double> dvbe = pol * (v(t.b_internal) - v(t.e)) / vout;
        const std::complex<double> dvbc = pol * (v(t.b_internal) - v(t.c)) / vout;
        const double dic = std::abs(d.eval.dic_dvbe * dvbe + d.eval.dic_dvbc * dvbc);
        const double dvce = std::abs(dvbe - dvbc);
        // common practice: the swing is symmetric and linear until the collector current
        // reaches zero (cutoff) or V_CE reaches V_CE(sat) (saturation).
        if (dic > 0) {
            const double cutoff = std::max(0.0, d.eval.ic) / dic;
            if (cutoff < peak) {
                peak = cutoff;
                r->swing_limit = t.ref + " cutoff";
            }
        }
        if (dvce > 0) {
            const double vce = d.vbe_internal - d.vbc_internal;
            const double sat = std::max(0.0, vce - vce_sat) / dvce;
            if (sat < peak) {
                peak = sat;
                r->swing_limit = t.ref + " saturation";
            }
        }
    }
    if (std::isfinite(peak)) r->max_output_vpp = 2 * peak;
}

}  // namespace

std::vector<double> log_frequencies(double f_lo_hz, double f_hi_hz, int count) {
    std::vector<double> out;
    if (count < 2) return {f_lo_hz};
    out.reserve(static_cast<size_t>(count));
    const double a = std::log10(f_lo_hz), b = std::log10(f_hi_hz);
    for (int i = 0; i < count; ++i) out.push_back(std::pow(10.0, a + (b - a) * i / (count - 1)));
    return out;
}

Response predict_response(AcAnalysis& ac, const Netlist& nl, const OperatingPoint& op,
                          const PredictOptions& opt) {
    Response r;
    const double u_lo = std::log10(opt.f_min_hz), u_hi = std::log10(opt.f_max_hz);
    const int count = std::max(3, static_cast<int>(std::ceil((u_hi - u_lo) * opt.points_per_decade)) + 1);
    std::vector<double> mags(static_cast<size_t>(count));
    auto u_at = [&](int i) { return u_lo + (u_hi - u_lo) * i / (count - 1); };
    int best = 0;
    for (int i = 0; i < count; ++i) {
        mags[i] = gain_magnitude(ac, std::pow(10.0, u_at(i)));
        if (mags[i] > mags[best]) best = i;
    }
    double u_max = u_at(best);
    double max_mag = mags[best];
    if (best > 0 && best + 1 < count) {
        double u = u_max;
        const double m = refine_maximum(ac, u_at(best - 1), u_at(best + 1), &u);
        if (m > max_mag) {
            max_mag = m;
            u_max = u;
        }
    }
    r.midband_gain = max_mag;
    r.midband_gain_db = 20 * std::log10(max_mag);
    r.max_gain_freq_hz = std::pow(10.0, u_max);
    const double target = max_mag / std::numbers::sqrt2;
    for (int i = best; i > 0; --i)
        if (mags[i - 1] < target) {
            r.f_low_hz = std::pow(10.0, refine_crossing(ac, u_at(i - 1), std::min(u_at(i), u_max), target));
            break;
        }
    for (int i = best; i + 1 < count; ++i)
        if (mags[i + 1] < target) {
            r.f_high_hz = std::pow(10.0, refine_crossing(ac, std::max(u_at(i), u_max), u_at(i + 1), target));
            break;
        }
    r.midband_freq_hz = (r.f_low_hz && r.f_high_hz) ? std::sqrt(*r.f_low_hz * *r.f_high_hz)
                                                    : r.max_gain_freq_hz;
    const AcPoint mid = ac.point(r.midband_freq_hz);
    r.midband_phase_deg = degrees(mid.gain);
    r.inverting = std::abs(r.midband_phase_deg) > 90.0;
    r.peaking_db = 20 * std::log10(max_mag / std::abs(mid.gain));
    r.input_impedance = mid.input_impedance;
    r.input_impedance_ohm = std::abs(mid.input_impedance);
    r.output_impedance = ac.output_impedance(r.midband_freq_hz);
    r.output_impedance_ohm = std::abs(r.output_impedance);
    output_swing(ac, nl, op, r.midband_freq_hz, opt.vce_sat_v, &r);
    return r;
}

Prediction predict(const Netlist& netlist, const PredictOptions& options) {
    Prediction p;
    p.op = solve_operating_point(netlist, options.dc);
    AcAnalysis ac(netlist, p.op);
    p.response = predict_response(ac, netlist, p.op, options);
    return p;
}

}  // namespace ampbench::circuit
