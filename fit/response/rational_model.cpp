// Evaluation, analytic derivatives and residuals of the rational transfer-function model.
#include "fit/response/rational_model.h"

#include <cmath>
#include <numbers>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::fit {

namespace {
constexpr double db_per_neper = 20.0 / std::numbers::ln10;
constexpr double deg_per_rad = 180.0 / std::numbers::pi;
// Without given sds, a residual of 1 dB weighs as much as one of 6.6° (1 neper ↔ 1 radian).
constexpr double default_sd_db = 1.0;
constexpr double default_sd_deg = deg_per_rad / db_per_neper;
}  // namespace

double wrap_deg(double deg) {
    double w = std::remainder(deg, 360.0);
    if (w <= -180.0) w += 360.0;
    return w;
}

std::string RationalOrder::name() const {
    std::string s = fmt::format("rational:{}", low_poles);
    if (low_zeros > 0) s += fmt::format("/{}", low_zeros);
    s += fmt::format(",{}", high_poles);
    if (complex_pairs > 0) s += fmt::format("+{}c", complex_pairs);
    return s;
}

RationalOrder RationalOrder::parse(const std::string& text) {
    // Grammar: rational:L[/Z],H[+Pc] with single digits (hand-parsed: <regex> trips GCC 12's
    // maybe-uninitialized warning under the sanitizers).
    const auto bad = [&] {
        return FitInputError(fmt::format("model '{}': expected auto or rational:L,H (e.g. rational:2,2, "
                                          "rational:3/1,2, rational:2,1+1c)", text));
    };
    const std::string prefix = "rational:";
    if (text.rfind(prefix, 0) != 0) throw bad();
    std::size_t i = prefix.size();
    auto digit = [&]() {
        if (i >= text.size() || text[i] < '0' || text[i] > '9') throw bad();
        return text[i++] - '0';
    };
    RationalOrder o;
    o.low_poles = digit();
    if (i < text.size() && text[i] == '/') {
        ++i;
        o.low_zeros = digit();
    }
    if (i >= text.size() || text[i] != ',') throw bad();
    ++i;
    o.high_poles = digit();
    if (i < text.size() && text[i] == '+') {
        ++i;
        o.complex_pairs = digit();
        if (i >= text.size() || text[i] != 'c') throw bad();
        ++i;
    }
    if (i != text.size()) throw bad();
    if (o.low_zeros > o.low_poles)
        throw FitInputError(fmt::format("model '{}': {} finite low zeros but only {} low poles", text, o.low_zeros, o.low_poles));
    return o;
}

std::vector<std::string> rational_parameter_names(const RationalOrder& o) {
    std::vector<std::string> names = {"gain_db"};
    for (int i = 0; i < o.low_poles; ++i) names.push_back(fmt::format("low_pole_{}_hz", i + 1));
    for (int i = 0; i < o.low_zeros; ++i) names.push_back(fmt::format("low_zero_{}_hz", i + 1));
    for (int i = 0; i < o.high_poles; ++i) names.push_back(fmt::format("high_pole_{}_hz", i + 1));
    for (int i = 0; i < o.complex_pairs; ++i) {
        names.push_back(fmt::format("pair_{}_hz", i + 1));
        names.push_back(fmt::format("pair_{}_q", i + 1));
    }
    return names;
}

std::complex<double> rational_log_response(const RationalOrder& o, double sign, const double* p, double f,
                                           std::complex<double>* d) {
    using C = std::complex<double>;
    if (d) rational_log_derivatives(o, p, f, d);
    const C jf(0.0, f);
    C ln_h = p[0] / db_per_neper + (sign < 0 ? C(0.0, std::numbers::pi) : C(0.0));
    std::size_t k = 1;
    const std::size_t zeros_at = 1 + static_cast<std::size_t>(o.low_poles);
    const int origin_zeros = o.low_poles - o.low_zeros;
    for (int i = 0; i < o.low_poles; ++i, ++k) {
        const C den = jf + p[k];
        const C num = i < origin_zeros ? jf : jf + p[zeros_at + static_cast<std::size_t>(i - origin_zeros)];
        ln_h += std::log(num / den);
    }
    k += static_cast<std::size_t>(o.low_zeros);
    for (int i = 0; i < o.high_poles; ++i, ++k) ln_h -= std::log(1.0 + jf / p[k]);
    for (int i = 0; i < o.complex_pairs; ++i, k += 2) {
        const double u = f / p[k];
        ln_h -= std::log(C(1.0 - u * u, u / p[k + 1]));
    }
    return ln_h;
}

double rational_gain(double sign, const double* p) {
    return std::pow(10.0, p[0] / 20.0) * (sign < 0 ? -1.0 : 1.0);
}

std::complex<double> rational_response_at_gain(const RationalOrder& o, double gain, const double* p, double f) {
    using C = std::complex<double>;
    // One product instead of a sum of complex logarithms.
    const C jf(0.0, f);
    C num = 1.0, den = 1.0;
    std::size_t k = 1;
    const std::size_t zeros_at = 1 + static_cast<std::size_t>(o.low_poles);
    const int origin_zeros = o.low_poles - o.low_zeros;
    for (int i = 0; i < o.low_poles; ++i, ++k) {
        den *= jf + p[k];
        num *= i < origin_zeros ? jf : jf + p[zeros_at + static_cast<std::size_t>(i - origin_zeros)];
    }
    k += static_cast<std::size_t>(o.low_zeros);
    for (int i = 0; i < o.high_poles; ++i, ++k) den *= 1.0 + jf / p[k];
    for (int i = 0; i < o.complex_pairs; ++i, k += 2) {
        const double u = f / p[k];
        den *= C(1.0 - u * u, u / p[k + 1]);
    }
    return gain * num / den;
}

void rational_log_derivatives(const RationalOrder& o, const double* p, double f, std::complex<double>* d) {
    using C = std::complex<double>;
    // 1/z as conj(z)/|z|²: no overflow guard is needed for these factors (|z| stays between
    // about 1e-150 and 1e150 for any corner and frequency the fits reach), and it avoids the
    // scaled library division.
    const auto inv = [](C z) { return std::conj(z) / std::norm(z); };
    const C jf(0.0, f);
    d[0] = 1.0 / db_per_neper;
    std::size_t k = 1;
    const std::size_t zeros_at = 1 + static_cast<std::size_t>(o.low_poles);
    const int origin_zeros = o.low_poles - o.low_zeros;
    for (int i = 0; i < o.low_poles; ++i, ++k) {
        if (i >= origin_zeros) {
            const std::size_t kz = zeros_at + static_cast<std::size_t>(i - origin_zeros);
            d[kz] = inv(jf + p[kz]);
        }
        d[k] = -inv(jf + p[k]);
    }
    k += static_cast<std::size_t>(o.low_zeros);
    for (int i = 0; i < o.high_poles; ++i, ++k) d[k] = (jf / (p[k] * p[k])) * inv(1.0 + jf / p[k]);
    for (int i = 0; i < o.complex_pairs; ++i, k += 2) {
        const double f0 = p[k], q = p[k + 1], u = f / f0;
        const C inv_den = inv(C(1.0 - u * u, u / q));
        // dD/d ln f0 = 2u² − j·u/Q and dD/d ln Q = −j·u/Q, divided by f0 and Q for d/dp.
        d[k] = -C(2 * u * u, -u / q) * inv_den / f0;
        d[k + 1] = C(0.0, u / q) * inv_den / q;
    }
}

std::complex<double> rational_response(const RationalOrder& o, double sign, const double* p, double f,
                                       std::complex<double>* d) {
    if (d) rational_log_derivatives(o, p, f, d);
    return rational_response_at_gain(o, rational_gain(sign, p), p, f);
}

RationalResiduals::RationalResiduals(const GainData& data, RationalOrder order, double sign)
    : data_(data), order_(order), sign_(sign) {
    for (const GainPoint& pt : data.points) {
        sd_db_.push_back(data.has_sd ? pt.gain_db_sd : default_sd_db);
        sd_deg_.push_back(data.has_sd ? pt.phase_deg_sd : default_sd_deg);
    }
}

std::size_t RationalResiduals::residual_count() const {
    return data_.points.size() * (data_.has_phase ? 2 : 1);
}

void RationalResiduals::residuals(std::span<const double> p, std::span<double> r) const {
    const std::size_t n = data_.points.size();
    const double gain = rational_gain(sign_, p.data());
    for (std::size_t i = 0; i < n; ++i) {
        const GainPoint& pt = data_.points[i];
        const std::complex<double> h = rational_response_at_gain(order_, gain, p.data(), pt.freq_hz);
        r[i] = (10.0 * std::log10(std::norm(h)) - pt.gain_db) / sd_db_[i];
        if (data_.has_phase) r[n + i] = wrap_deg(std::arg(h) * deg_per_rad - pt.phase_deg) / sd_deg_[i];
    }
}

bool RationalResiduals::jacobian(std::span<const double> p, std::span<double> jac) const {
    const std::size_t n = data_.points.size(), np = p.size();
    std::vector<std::complex<double>> d(np);
    for (std::size_t i = 0; i < n; ++i) {
        rational_log_derivatives(order_, p.data(), data_.points[i].freq_hz, d.data());
        for (std::size_t j = 0; j < np; ++j) {
            jac[i * np + j] = d[j].real() * db_per_neper / sd_db_[i];
            if (data_.has_phase) jac[(n + i) * np + j] = d[j].imag() * deg_per_rad / sd_deg_[i];
        }
    }
    return true;
}

}  // namespace ampbench::fit
