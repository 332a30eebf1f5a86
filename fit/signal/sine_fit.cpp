// Sine fits after IEEE Std 1057: linear least squares at a known frequency, Levenberg–Marquardt
// for the frequency, and delta-method uncertainties of amplitude and phase.
#include "fit/signal/sine_fit.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <numbers>

#include <Eigen/Dense>
#include <fmt/format.h>

#include "core/errors.h"
#include "fit/signal/sine_model.h"

namespace ampbench::fit {

JointSineModel::JointSineModel(std::vector<Channel> channels) : channels_(std::move(channels)) {
    for (const Channel& c : channels_) count_ += c.y.size();
}

void JointSineModel::residuals(std::span<const double> p, std::span<double> r) const {
    std::size_t row = 0;
    for (std::size_t c = 0; c < channels_.size(); ++c) {
        const Channel& ch = channels_[c];
        const double a = p[1 + 3 * c], b = p[2 + 3 * c], off = p[3 + 3 * c];
        for (std::size_t i = 0; i < ch.y.size(); ++i, ++row) {
            const double w = 2.0 * std::numbers::pi * p[0] * ch.t_s[i];
            r[row] = ch.weight * (a * std::cos(w) + b * std::sin(w) + off - ch.y[i]);
        }
    }
}

bool JointSineModel::jacobian(std::span<const double> p, std::span<double> jac) const {
    std::fill(jac.begin(), jac.end(), 0.0);
    const std::size_t n = p.size();
    std::size_t row = 0;
    for (std::size_t c = 0; c < channels_.size(); ++c) {
        const Channel& ch = channels_[c];
        const double a = p[1 + 3 * c], b = p[2 + 3 * c];
        for (std::size_t i = 0; i < ch.y.size(); ++i, ++row) {
            const double w = 2.0 * std::numbers::pi * p[0] * ch.t_s[i];
            const double cw = std::cos(w), sw = std::sin(w);
            double* j = &jac[row * n];
            j[0] = ch.weight * 2.0 * std::numbers::pi * ch.t_s[i] * (-a * sw + b * cw);
            j[1 + 3 * c] = ch.weight * cw;
            j[2 + 3 * c] = ch.weight * sw;
            j[3 + 3 * c] = ch.weight;
        }
    }
    return true;
}

namespace {

constexpr double two_pi = 2.0 * std::numbers::pi;

double wrap_pi(double x) {
    x = std::remainder(x, two_pi);
    return x <= -std::numbers::pi ? x + two_pi : x;
}

// Times and values of the unclipped samples.
struct Usable {
    std::vector<double> t, y;
    std::size_t clipped = 0;
};

Usable usable_samples(const SampleRecord& rec, std::size_t min_samples) {
    if (!(rec.dt_s > 0.0) || !std::isfinite(rec.dt_s))
        throw FitInputError(fmt::format("sine fit: sample interval must be positive, got {}", rec.dt_s));
    if (!rec.clipped.empty() && rec.clipped.size() != rec.samples.size())
        throw FitInputError(fmt::format("sine fit: {} clip flags for {} samples", rec.clipped.size(),
                                        rec.samples.size()));
    Usable u;
    for (std::size_t k = 0; k < rec.samples.size(); ++k) {
        if ((!rec.clipped.empty() && rec.clipped[k]) || !std::isfinite(rec.samples[k])) {
            ++u.clipped;
            continue;
        }
        u.t.push_back(rec.t0_s + static_cast<double>(k) * rec.dt_s);
        u.y.push_back(rec.samples[k]);
    }
    if (u.y.size() < min_samples)
        throw FitInputError(fmt::format("sine fit: {} usable samples ({} clipped), need at least {}",
                                        u.y.size(), u.clipped, min_samples));
    return u;
}

// Linear least squares on cos/sin columns of the given harmonics plus an offset column.
struct LinearFit {
    Eigen::VectorXd coef;  // a1, b1, a2, b2, ..., offset
    Eigen::MatrixXd cov;
    double rss = 0.0;
    std::size_t dof = 0;
};

LinearFit linear_sine_fit(const Usable& u, double freq_hz, int harmonics) {
    const auto m = static_cast<Eigen::Index>(u.y.size());
    const Eigen::Index n = 2 * harmonics + 1;
    Eigen::MatrixXd x(m, n);
    Eigen::VectorXd y(m);
    for (Eigen::Index i = 0; i < m; ++i) {
        const double w = two_pi * freq_hz * u.t[static_cast<std::size_t>(i)];
        for (int h = 1; h <= harmonics; ++h) {
            x(i, 2 * h - 2) = std::cos(h * w);
            x(i, 2 * h - 1) = std::sin(h * w);
        }
        x(i, n - 1) = 1.0;
        y[i] = u.y[static_cast<std::size_t>(i)];
    }
    LinearFit f;
    Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(x);
    f.coef = qr.solve(y);
    f.rss = (x * f.coef - y).squaredNorm();
    f.dof = static_cast<std::size_t>(m - n);
    const double s2 = f.dof > 0 ? f.rss / static_cast<double>(f.dof) : 0.0;
    f.cov = (x.transpose() * x).inverse() * s2;
    return f;
}

// Amplitude and phase of a·cos + b·sin, and their covariance from that of (a, b).
struct Polar {
    double amplitude, phase, amplitude_sd, phase_sd;
    Eigen::RowVector2d d_amp, d_phase;  // gradients w.r.t. (a, b)
};

Polar to_polar(double a, double b, const Eigen::Matrix2d& cov) {
    Polar p{};
    p.amplitude = std::hypot(a, b);
    p.phase = std::atan2(-b, a);  // a·cos + b·sin = A·cos(ωt + φ)
    const double a2 = std::max(p.amplitude * p.amplitude, 1e-300);
    p.d_amp << a / std::max(p.amplitude, 1e-300), b / std::max(p.amplitude, 1e-300);
    p.d_phase << b / a2, -a / a2;
    p.amplitude_sd = std::sqrt(std::max((p.d_amp * cov * p.d_amp.transpose())(0, 0), 0.0));
    p.phase_sd = std::sqrt(std::max((p.d_phase * cov * p.d_phase.transpose())(0, 0), 0.0));
    return p;
}

std::size_t next_pow2(std::size_t n) {
    std::size_t p = 1;
    while (p < n) p <<= 1;
    return p;
}

void fft_in_place(std::vector<std::complex<double>>& x) {
    const std::size_t n = x.size();
    for (std::size_t i = 1, j = 0; i < n; ++i) {
        std::size_t bit = n >> 1;
        for (; j & bit; bit >>= 1) j ^= bit;
        j ^= bit;
        if (i < j) std::swap(x[i], x[j]);
    }
    for (std::size_t len = 2; len <= n; len <<= 1) {
        const std::complex<double> wl = std::polar(1.0, -two_pi / static_cast<double>(len));
        for (std::size_t i = 0; i < n; i += len) {
            std::complex<double> w = 1.0;
            for (std::size_t k = 0; k < len / 2; ++k) {
                const std::complex<double> a = x[i + k], b = x[i + k + len / 2] * w;
                x[i + k] = a + b;
                x[i + k + len / 2] = a - b;
                w *= wl;
            }
        }
    }
}

// Best frequency near `guess` by scanning, then golden-section search, on the three-parameter
// residual sum of squares (the four-parameter fit then starts inside its basin).
double refine_frequency(const Usable& u, double guess, double bin_hz) {
    auto rss = [&](double f) { return linear_sine_fit(u, f, 1).rss; };
    double best = guess, best_rss = rss(guess);
    for (int k = -12; k <= 12; ++k) {
        const double f = guess + 0.05 * k * bin_hz;
        if (f <= 0) continue;
        const double r = rss(f);
        if (r < best_rss) best_rss = r, best = f;
    }
    double lo = std::max(best - 0.05 * bin_hz, 1e-12 * bin_hz), hi = best + 0.05 * bin_hz;
    const double g = (std::sqrt(5.0) - 1) / 2;
    double x1 = hi - g * (hi - lo), x2 = lo + g * (hi - lo);
    double f1 = rss(x1), f2 = rss(x2);
    for (int it = 0; it < 40; ++it) {
        if (f1 < f2) {
            hi = x2; x2 = x1; f2 = f1; x1 = hi - g * (hi - lo); f1 = rss(x1);
        } else {
            lo = x1; x1 = x2; f1 = f2; x2 = lo + g * (hi - lo); f2 = rss(x2);
        }
    }
    return 0.5 * (lo + hi);
}

}  // namespace

double estimate_frequency(const SampleRecord& record) {
    const Usable u = usable_samples(record, 4);
    const std::size_t n = record.samples.size();
    double mean = 0;
    for (double y : u.y) mean += y;
    mean /= static_cast<double>(u.y.size());
    // Zero-padded 4× so the peak is well sampled; clipped samples enter as the mean.
    const std::size_t nfft = next_pow2(4 * n);
    std::vector<std::complex<double>> x(nfft, 0.0);
    for (std::size_t k = 0; k < n; ++k) {
        const bool bad = (!record.clipped.empty() && record.clipped[k]) || !std::isfinite(record.samples[k]);
        const double hann = 0.5 - 0.5 * std::cos(two_pi * static_cast<double>(k) / static_cast<double>(n));
        x[k] = bad ? 0.0 : (record.samples[k] - mean) * hann;
    }
    fft_in_place(x);
    std::size_t peak = 1;
    for (std::size_t k = 2; k < nfft / 2; ++k)
        if (std::abs(x[k]) > std::abs(x[peak])) peak = k;
    // Parabolic interpolation of the log magnitude (near-exact for a Gaussian-like main lobe).
    double delta = 0.0;
    if (peak + 1 < nfft / 2) {
        const double l = std::log(std::abs(x[peak - 1]) + 1e-300), c = std::log(std::abs(x[peak]) + 1e-300),
                     r = std::log(std::abs(x[peak + 1]) + 1e-300);
        const double den = l - 2 * c + r;
        if (den < 0) delta = std::clamp(0.5 * (l - r) / den, -0.5, 0.5);
    }
    return (static_cast<double>(peak) + delta) / (static_cast<double>(nfft) * record.dt_s);
}

SineEstimate fit_sine_known_freq(const SampleRecord& record, double freq_hz) {
    if (!(freq_hz > 0.0) || !std::isfinite(freq_hz))
        throw FitInputError(fmt::format("sine fit: frequency must be positive, got {}", freq_hz));
    const Usable u = usable_samples(record, 4);
    const LinearFit f = linear_sine_fit(u, freq_hz, 1);
    const Polar p = to_polar(f.coef[0], f.coef[1], f.cov.topLeftCorner<2, 2>());
    SineEstimate e;
    e.status = FitStatus::converged;
    e.message = "three-parameter fit (IEEE 1057)";
    e.freq_hz = freq_hz;
    e.amplitude = p.amplitude;
    e.amplitude_sd = p.amplitude_sd;
    e.phase_rad = wrap_pi(p.phase);
    e.phase_rad_sd = p.phase_sd;
    e.offset = f.coef[2];
    e.offset_sd = std::sqrt(f.cov(2, 2));
    e.residual_rms = std::sqrt(f.rss / static_cast<double>(u.y.size()));
    e.used_samples = u.y.size();
    e.clipped_samples = u.clipped;
    return e;
}

JointSineEstimate fit_sine_joint(const std::vector<SampleRecord>& records, std::optional<double> freq_guess_hz) {
    if (records.empty()) throw FitInputError("sine fit: no channels given");
    for (const SampleRecord& r : records)
        if (r.dt_s != records[0].dt_s || r.t0_s != records[0].t0_s || r.samples.size() != records[0].samples.size())
            throw FitInputError("joint sine fit: channels differ in sample interval, start time or length");
    std::vector<Usable> used;
    for (const SampleRecord& r : records) used.push_back(usable_samples(r, 5));
    const double bin_hz = 1.0 / (static_cast<double>(records[0].samples.size()) * records[0].dt_s);
    const double guess = freq_guess_hz ? *freq_guess_hz : estimate_frequency(records[0]);
    if (!(guess > 0.0)) throw FitInputError("sine fit: frequency guess must be positive");
    const double f0 = refine_frequency(used[0], guess, bin_hz);

    // Start values and per-channel noise from three-parameter fits at the refined frequency;
    // each channel is weighted by its own residual scatter.
    std::vector<Parameter> params = {{"freq_hz", f0}};
    std::vector<JointSineModel::Channel> model_channels;
    for (std::size_t c = 0; c < used.size(); ++c) {
        const LinearFit lf = linear_sine_fit(used[c], f0, 1);
        params.push_back({fmt::format("a{}", c), lf.coef[0]});
        params.push_back({fmt::format("b{}", c), lf.coef[1]});
        params.push_back({fmt::format("c{}", c), lf.coef[2]});
        const double sigma = std::sqrt(lf.rss / static_cast<double>(std::max<std::size_t>(lf.dof, 1)));
        model_channels.push_back({used[c].t, used[c].y, sigma > 0 ? 1.0 / sigma : 1.0});
    }
    const JointSineModel model(std::move(model_channels));
    const FitReport rep = least_squares(model, params);

    JointSineEstimate e;
    e.status = rep.status;
    e.message = "four-parameter fit (IEEE 1057), shared frequency: " + rep.message;
    const std::size_t n = params.size();
    Eigen::MatrixXd cov = Eigen::Map<const Eigen::MatrixXd>(rep.covariance.data(), static_cast<Eigen::Index>(n),
                                                            static_cast<Eigen::Index>(n));
    if (rep.covariance.size() != n * n) cov = Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(n));
    e.freq_hz = rep.params[0].value;
    e.freq_hz_sd = rep.params[0].sd;
    std::vector<Polar> polar;
    for (std::size_t c = 0; c < used.size(); ++c) {
        const auto ia = static_cast<Eigen::Index>(1 + 3 * c);
        const Polar p = to_polar(rep.params[1 + 3 * c].value, rep.params[2 + 3 * c].value, cov.block<2, 2>(ia, ia));
        polar.push_back(p);
        ChannelSine ch;
        ch.amplitude = p.amplitude;
        ch.amplitude_sd = p.amplitude_sd;
        ch.phase_rad = wrap_pi(p.phase);
        ch.phase_rad_sd = p.phase_sd;
        ch.offset = rep.params[3 + 3 * c].value;
        ch.offset_sd = rep.params[3 + 3 * c].sd;
        double ss = 0;
        for (std::size_t i = 0; i < used[c].y.size(); ++i) {
            const double w = two_pi * e.freq_hz * used[c].t[i];
            const double r = rep.params[1 + 3 * c].value * std::cos(w) + rep.params[2 + 3 * c].value * std::sin(w) +
                             ch.offset - used[c].y[i];
            ss += r * r;
        }
        ch.residual_rms = std::sqrt(ss / static_cast<double>(used[c].y.size()));
        ch.used_samples = used[c].y.size();
        ch.clipped_samples = used[c].clipped;
        e.channels.push_back(ch);
    }
    // Ratio A_k/A_0 and phase φ_k − φ_0 by the delta method on (a0, b0, ak, bk).
    for (std::size_t c = 0; c < used.size(); ++c) {
        const double ratio = polar[c].amplitude / polar[0].amplitude;
        e.amplitude_ratio.push_back(ratio);
        e.phase_diff_rad.push_back(wrap_pi(polar[c].phase - polar[0].phase));
        if (c == 0) {
            e.amplitude_ratio_sd.push_back(0.0);
            e.phase_diff_rad_sd.push_back(0.0);
            continue;
        }
        Eigen::VectorXd g_ratio = Eigen::VectorXd::Zero(static_cast<Eigen::Index>(n));
        Eigen::VectorXd g_phase = Eigen::VectorXd::Zero(static_cast<Eigen::Index>(n));
        const auto i0 = static_cast<Eigen::Index>(1), ic = static_cast<Eigen::Index>(1 + 3 * c);
        g_ratio.segment<2>(ic) = polar[c].d_amp.transpose() / polar[0].amplitude;
        g_ratio.segment<2>(i0) = -ratio / polar[0].amplitude * polar[0].d_amp.transpose();
        g_phase.segment<2>(ic) = polar[c].d_phase.transpose();
        g_phase.segment<2>(i0) = -polar[0].d_phase.transpose();
        e.amplitude_ratio_sd.push_back(std::sqrt(std::max(g_ratio.dot(cov * g_ratio), 0.0)));
        e.phase_diff_rad_sd.push_back(std::sqrt(std::max(g_phase.dot(cov * g_phase), 0.0)));
    }
    return e;
}

SineEstimate fit_sine(const SampleRecord& record, std::optional<double> freq_guess_hz) {
    const JointSineEstimate j = fit_sine_joint({record}, freq_guess_hz);
    SineEstimate e;
    e.status = j.status;
    e.message = j.message;
    e.freq_hz = j.freq_hz;
    e.freq_hz_sd = j.freq_hz_sd;
    const ChannelSine& c = j.channels[0];
    e.amplitude = c.amplitude;
    e.amplitude_sd = c.amplitude_sd;
    e.phase_rad = c.phase_rad;
    e.phase_rad_sd = c.phase_rad_sd;
    e.offset = c.offset;
    e.offset_sd = c.offset_sd;
    e.residual_rms = c.residual_rms;
    e.used_samples = c.used_samples;
    e.clipped_samples = c.clipped_samples;
    return e;
}

HarmonicEstimate fit_harmonics(const SampleRecord& record, int harmonics, std::optional<double> freq_hz) {
    if (harmonics < 1) throw FitInputError(fmt::format("harmonic fit: need at least 1 harmonic, got {}", harmonics));
    const double f = freq_hz ? *freq_hz : fit_sine(record).freq_hz;
    if (!(f > 0.0)) throw FitInputError("harmonic fit: fundamental frequency must be positive");
    if (harmonics * f >= 0.5 / record.dt_s)
        throw FitInputError(fmt::format("harmonic fit: harmonic {} at {:.6g} Hz is above the Nyquist frequency",
                                        harmonics, harmonics * f));
    const Usable u = usable_samples(record, static_cast<std::size_t>(2 * harmonics + 2));
    const LinearFit lf = linear_sine_fit(u, f, harmonics);
    HarmonicEstimate e;
    e.status = FitStatus::converged;
    e.freq_hz = f;
    e.offset = lf.coef[2 * harmonics];
    e.residual_rms = std::sqrt(lf.rss / static_cast<double>(u.y.size()));
    e.used_samples = u.y.size();
    e.clipped_samples = u.clipped;
    const auto n = static_cast<Eigen::Index>(2 * harmonics + 1);
    std::vector<Polar> polar;
    for (int h = 0; h < harmonics; ++h) {
        const Polar p = to_polar(lf.coef[2 * h], lf.coef[2 * h + 1], lf.cov.block<2, 2>(2 * h, 2 * h));
        polar.push_back(p);
        e.amplitude.push_back(p.amplitude);
        e.amplitude_sd.push_back(p.amplitude_sd);
        e.phase_rad.push_back(wrap_pi(p.phase));
        e.phase_rad_sd.push_back(p.phase_sd);
    }
    double sum2 = 0;
    for (int h = 1; h < harmonics; ++h) sum2 += e.amplitude[static_cast<std::size_t>(h)] * e.amplitude[static_cast<std::size_t>(h)];
    const double hrms = std::sqrt(sum2);
    e.thd_ratio = hrms / e.amplitude[0];
    Eigen::VectorXd g = Eigen::VectorXd::Zero(n);
    g.segment<2>(0) = -e.thd_ratio / e.amplitude[0] * polar[0].d_amp.transpose();
    if (hrms > 0)
        for (int h = 1; h < harmonics; ++h)
            g.segment<2>(2 * h) = Eigen::Vector2d(lf.coef[2 * h], lf.coef[2 * h + 1]) / (e.amplitude[0] * hrms);
    e.thd_ratio_sd = std::sqrt(std::max(g.dot(lf.cov * g), 0.0));
    e.thd_db = 20.0 * std::log10(std::max(e.thd_ratio, 1e-300));
    e.thd_db_sd = e.thd_ratio > 0 ? 20.0 / std::numbers::ln10 * e.thd_ratio_sd / e.thd_ratio : 0.0;
    return e;
}

}  // namespace ampbench::fit
