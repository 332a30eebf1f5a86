// Response fitting: starting values (Sanathanan–Koerner per side, or read off the magnitude),
// LM refinement, information-criterion order choice, and delta-method derived quantities.
#include "fit/response/response_fit.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <numbers>

#include <Eigen/Dense>
#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::fit {
namespace {

using Complex = std::complex<double>;
constexpr double db_per_neper = 20.0 / std::numbers::ln10;
constexpr double half_power_db = 3.0102999566398120;  // 20·log10(√2)
constexpr double search_low_hz = 0.01, search_high_hz = 1e9;

// |H| in dB at fixed parameters, the signed linear gain computed once (the derived quantities
// evaluate it at a thousand or more frequencies per parameter set).
class Magnitude {
public:
    Magnitude(const RationalOrder& o, double sign, const std::vector<double>& p)
        : order_(o), p_(p.data()), gain_(rational_gain(sign, p_)) {}
    double operator()(double f) const { return 10.0 * std::log10(std::norm(rational_response_at_gain(order_, gain_, p_, f))); }

private:
    const RationalOrder& order_;
    const double* p_;
    double gain_;
};

// Log-interpolated −3 dB crossing of the data on one side of the maximum, or `fallback`.
double data_crossing(const GainData& d, std::size_t peak, double level_db, int dir, double fallback) {
    for (std::size_t i = peak;;) {
        const std::size_t next = dir < 0 ? i - 1 : i + 1;
        if ((dir < 0 && i == 0) || (dir > 0 && next >= d.points.size())) return fallback;
        const GainPoint &a = d.points[i], &b = d.points[next];
        if (b.gain_db < level_db) {
            const double t = (a.gain_db - level_db) / (a.gain_db - b.gain_db);
            return std::exp(std::log(a.freq_hz) + t * (std::log(b.freq_hz) - std::log(a.freq_hz)));
        }
        i = next;
    }
}

// Roots of c[0] + c[1]x + ... + c[n]x^n by the companion matrix.
std::vector<Complex> poly_roots(const std::vector<double>& c) {
    const std::size_t n = c.size() - 1;
    if (n == 0) return {};
    const auto ni = static_cast<Eigen::Index>(n);
    Eigen::MatrixXd comp = Eigen::MatrixXd::Zero(ni, ni);
    for (Eigen::Index i = 1; i < ni; ++i) comp(i, i - 1) = 1.0;
    for (Eigen::Index i = 0; i < ni; ++i) comp(i, ni - 1) = -c[static_cast<std::size_t>(i)] / c[n];
    Eigen::EigenSolver<Eigen::MatrixXd> es(comp, false);
    std::vector<Complex> r;
    for (Eigen::Index i = 0; i < ni; ++i) r.push_back(es.eigenvalues()[i]);
    return r;
}

// Sanathanan–Koerner iteration for N(s)/D(s) on points (s_k, H_k): N = s^m0·Σ a_i s^i (deg nz),
// D monic of degree nd (low side) or D = 1 + Σ b_i s^i (high side). Returns false if singular.
bool sk_fit(const std::vector<Complex>& s, const std::vector<Complex>& h, int m0, int nz, int nd, bool monic,
            std::vector<double>& num, std::vector<double>& den) {
    const std::size_t m = s.size();
    const int unknowns = (nz + 1) + nd;
    if (static_cast<int>(2 * m) < unknowns + 1) return false;
    std::vector<double> weight(m, 1.0);
    for (int iter = 0; iter < 6; ++iter) {
        Eigen::MatrixXd a(static_cast<Eigen::Index>(2 * m), unknowns);
        Eigen::VectorXd rhs(static_cast<Eigen::Index>(2 * m));
        for (std::size_t k = 0; k < m; ++k) {
            std::vector<Complex> row(static_cast<std::size_t>(unknowns));
            for (int i = 0; i <= nz; ++i) row[static_cast<std::size_t>(i)] = std::pow(s[k], m0 + i);
            Complex target;
            if (monic) {
                for (int i = 0; i < nd; ++i) row[static_cast<std::size_t>(nz + 1 + i)] = -h[k] * std::pow(s[k], i);
                target = h[k] * std::pow(s[k], nd);
            } else {
                for (int i = 0; i < nd; ++i) row[static_cast<std::size_t>(nz + 1 + i)] = -h[k] * std::pow(s[k], i + 1);
                target = h[k];
            }
            for (int j = 0; j < unknowns; ++j) {
                a(static_cast<Eigen::Index>(2 * k), j) = weight[k] * row[static_cast<std::size_t>(j)].real();
                a(static_cast<Eigen::Index>(2 * k + 1), j) = weight[k] * row[static_cast<std::size_t>(j)].imag();
            }
            rhs[static_cast<Eigen::Index>(2 * k)] = weight[k] * target.real();
            rhs[static_cast<Eigen::Index>(2 * k + 1)] = weight[k] * target.imag();
        }
        const Eigen::VectorXd x = a.colPivHouseholderQr().solve(rhs);
        if (!x.allFinite()) return false;
        num.assign(x.data(), x.data() + nz + 1);
        den.clear();
        if (monic) {
            den.assign(x.data() + nz + 1, x.data() + unknowns);
            den.push_back(1.0);
        } else {
            den.push_back(1.0);
            den.insert(den.end(), x.data() + nz + 1, x.data() + unknowns);
        }
        // Re-weight by 1/|D_prev| so the linearised error approaches the true relative error.
        for (std::size_t k = 0; k < m; ++k) {
            Complex dv = 0.0;
            for (std::size_t i = den.size(); i-- > 0;) dv = dv * s[k] + den[i];
            weight[k] = 1.0 / std::max(std::abs(dv), 1e-12) * std::max(1e-300, 1.0 / std::abs(h[k]));
        }
    }
    return true;
}

struct DataShape {
    std::size_t peak = 0;
    double peak_db = 0.0, f_low = 0.0, f_high = 0.0;
};

DataShape data_shape(const GainData& d) {
    DataShape s;
    for (std::size_t i = 0; i < d.points.size(); ++i)
        if (d.points[i].gain_db > d.points[s.peak].gain_db) s.peak = i;
    s.peak_db = d.points[s.peak].gain_db;
    s.f_low = data_crossing(d, s.peak, s.peak_db - half_power_db, -1, d.points.front().freq_hz / 2);
    s.f_high = data_crossing(d, s.peak, s.peak_db - half_power_db, +1, d.points.back().freq_hz * 2);
    return s;
}

std::vector<double> heuristic_start(const GainData& d, const RationalOrder& o) {
    const DataShape shape = data_shape(d);
    std::vector<double> p = {shape.peak_db};
    static const double low_spread[] = {1.0, 0.3, 0.1, 0.03};
    static const double high_spread[] = {1.0, 3.0, 10.0, 30.0};
    for (int i = 0; i < o.low_poles; ++i) p.push_back(shape.f_low * low_spread[i]);
    for (int i = 0; i < o.low_zeros; ++i) p.push_back(shape.f_low * low_spread[o.low_poles - o.low_zeros + i] * 0.15);
    for (int i = 0; i < o.high_poles; ++i) p.push_back(shape.f_high * high_spread[i]);
    for (int i = 0; i < o.complex_pairs; ++i) {
        p.push_back(shape.f_high * high_spread[o.high_poles + i]);
        p.push_back(0.6);
    }
    return p;
}

// Sanathanan–Koerner starts on each side of the maximum, folded into the model's layout.
bool linearised_start(const GainData& d, const RationalOrder& o, std::vector<double>& p) {
    if (!d.has_phase) return false;
    const DataShape shape = data_shape(d);
    p = heuristic_start(d, o);
    auto measured = [&](const GainPoint& pt) {
        return std::polar(std::pow(10.0, pt.gain_db / 20.0), pt.phase_deg * std::numbers::pi / 180.0);
    };
    if (o.low_poles > 0) {
        std::vector<Complex> s, h;
        for (std::size_t i = 0; i <= shape.peak; ++i) {
            s.emplace_back(0.0, d.points[i].freq_hz / shape.f_low);
            h.push_back(measured(d.points[i]));
        }
        std::vector<double> num, den;
        if (!sk_fit(s, h, o.low_poles - o.low_zeros, o.low_zeros, o.low_poles, true, num, den)) return false;
        std::vector<Complex> poles = poly_roots(den), zeros = poly_roots(num);
        std::vector<double> pm, zm;
        for (const Complex& r : poles) pm.push_back(std::abs(r) * shape.f_low);
        for (const Complex& r : zeros) zm.push_back(std::abs(r) * shape.f_low);
        std::sort(pm.rbegin(), pm.rend());
        std::sort(zm.rbegin(), zm.rend());
        for (int i = 0; i < o.low_poles; ++i) p[1 + static_cast<std::size_t>(i)] = pm[static_cast<std::size_t>(i)];
        for (int i = 0; i < o.low_zeros && i < static_cast<int>(zm.size()); ++i)
            p[1 + static_cast<std::size_t>(o.low_poles + i)] = zm[static_cast<std::size_t>(i)];
    }
    const int high_order = o.high_poles + 2 * o.complex_pairs;
    if (high_order > 0) {
        std::vector<Complex> s, h;
        for (std::size_t i = shape.peak; i < d.points.size(); ++i) {
            s.emplace_back(0.0, d.points[i].freq_hz / shape.f_high);
            h.push_back(measured(d.points[i]));
        }
        std::vector<double> num, den;
        if (!sk_fit(s, h, 0, 0, high_order, false, num, den)) return false;
        std::vector<Complex> roots = poly_roots(den);
        std::sort(roots.begin(), roots.end(), [](Complex a, Complex b) { return std::abs(a) < std::abs(b); });
        std::vector<Complex> complex_roots;
        std::vector<double> real_mags;
        for (const Complex& r : roots) {
            if (std::abs(r.imag()) > 1e-9 * std::abs(r)) {
                if (r.imag() > 0) complex_roots.push_back(r);
            } else {
                real_mags.push_back(std::abs(r) * shape.f_high);
            }
        }
        std::vector<std::pair<double, double>> pairs;
        for (const Complex& r : complex_roots) {
            const double f0 = std::abs(r) * shape.f_high;
            if (static_cast<int>(pairs.size()) < o.complex_pairs)
                pairs.emplace_back(f0, std::clamp(std::abs(r) / (2 * std::abs(r.real())), 0.3, 20.0));
            else
                real_mags.insert(real_mags.end(), {f0, f0});
        }
        std::sort(real_mags.begin(), real_mags.end());
        while (static_cast<int>(pairs.size()) < o.complex_pairs && real_mags.size() >= 2) {
            const double a = real_mags.back();
            real_mags.pop_back();
            const double b = real_mags.back();
            real_mags.pop_back();
            pairs.emplace_back(std::sqrt(a * b), std::sqrt(a * b) / (a + b));
        }
        if (static_cast<int>(real_mags.size()) != o.high_poles || static_cast<int>(pairs.size()) != o.complex_pairs)
            return false;
        std::size_t k = 1 + static_cast<std::size_t>(o.low_poles + o.low_zeros);
        for (double m : real_mags) p[k++] = m;
        for (const auto& [f0, q] : pairs) {
            p[k++] = f0;
            p[k++] = q;
        }
    }
    return std::all_of(p.begin(), p.end(), [](double v) { return std::isfinite(v) && v != 0.0; }) &&
           std::all_of(p.begin() + 1, p.end(), [](double v) { return v > 0.0; });
}

std::vector<Parameter> make_params(const RationalOrder& o, const std::vector<double>& start) {
    const std::vector<std::string> names = rational_parameter_names(o);
    std::vector<Parameter> params;
    for (std::size_t j = 0; j < names.size(); ++j) {
        Parameter par{names[j], start[j]};
        par.log_scale = j > 0;
        params.push_back(par);
    }
    return params;
}

FitReport run_fit(const GainData& d, const RationalOrder& o, double sign, const std::vector<double>& start,
                  double confidence) {
    const RationalResiduals model(d, o, sign);
    LsqOptions opt;
    opt.scale_covariance = !d.has_sd;
    opt.confidence = confidence;
    opt.max_evaluations = 2000;
    return least_squares(model, make_params(o, start), opt);
}

struct Derived {
    double peak_db = 0.0, f_peak = 0.0, f_low = 0.0, f_high = 0.0, f_mid = 0.0, peaking_db = 0.0, mid_phase_deg = 0.0;
    bool has_low = false, has_high = false;
};

// Frequency where |H| crosses `level_db` between f_in (above the level) and the search limit.
std::optional<double> model_crossing(const Magnitude& mag_db, double f_in, double level_db, double limit_hz) {
    const double step = limit_hz > f_in ? std::pow(10.0, 1.0 / 40) : std::pow(10.0, -1.0 / 40);
    double a = f_in;
    while ((limit_hz > f_in) ? a < limit_hz : a > limit_hz) {
        double b = a * step;
        b = limit_hz > f_in ? std::min(b, limit_hz) : std::max(b, limit_hz);
        if (mag_db(b) < level_db) {
            double lo = std::log(a), hi = std::log(b);
            for (int it = 0; it < 80; ++it) {
                const double mid = 0.5 * (lo + hi);
                if (mid == lo || mid == hi) break;  // adjacent doubles: further halving changes nothing
                (mag_db(std::exp(mid)) < level_db ? hi : lo) = mid;
            }
            return std::exp(0.5 * (lo + hi));
        }
        a = b;
    }
    return std::nullopt;
}

// Golden-section search for the maximum of |H| in dB over ln f in [lo, hi], narrowed in place
// (60 steps); returns the magnitudes at the two last inner points.
std::pair<double, double> golden_peak(const Magnitude& mag_db, double& lo, double& hi) {
    const double gr = (std::sqrt(5.0) - 1) / 2;
    double x1 = hi - gr * (hi - lo), x2 = lo + gr * (hi - lo);
    double g1 = mag_db(std::exp(x1)), g2 = mag_db(std::exp(x2));
    for (int it = 0; it < 60; ++it) {
        if (g1 > g2) {
            hi = x2; x2 = x1; g2 = g1; x1 = hi - gr * (hi - lo); g1 = mag_db(std::exp(x1));
        } else {
            lo = x1; x1 = x2; g1 = g2; x2 = lo + gr * (hi - lo); g2 = mag_db(std::exp(x2));
        }
    }
    return {g1, g2};
}

// The corners found (or not), the midband frequency, peaking and midband phase.
void finish_derived(Derived& r, std::optional<double> fl, std::optional<double> fh, const Magnitude& mag_db,
                    const RationalOrder& o, double sign, const std::vector<double>& p) {
    r.has_low = fl.has_value();
    r.has_high = fh.has_value();
    r.f_low = fl.value_or(0.0);
    r.f_high = fh.value_or(0.0);
    r.f_mid = r.has_low && r.has_high ? std::sqrt(r.f_low * r.f_high) : r.f_peak;
    r.peaking_db = r.peak_db - mag_db(r.f_mid);
    r.mid_phase_deg = wrap_deg(rational_log_response(o, sign, p.data(), r.f_mid).imag() * 180.0 / std::numbers::pi);
}

Derived derive(const RationalOrder& o, double sign, const std::vector<double>& p, double f_min, double f_max) {
    const Magnitude mag_db(o, sign, p);
    Derived r;
    const int grid = 400;
    const double lmin = std::log(f_min), lmax = std::log(f_max);
    int best = 0;
    double best_db = -INFINITY;
    for (int i = 0; i <= grid; ++i) {
        const double g = mag_db(std::exp(lmin + (lmax - lmin) * i / grid));
        if (g > best_db) best_db = g, best = i;
    }
    // Golden-section refinement of the maximum between the neighbouring grid points.
    double lo = lmin + (lmax - lmin) * std::max(best - 1, 0) / grid, hi = lmin + (lmax - lmin) * std::min(best + 1, grid) / grid;
    golden_peak(mag_db, lo, hi);
    r.f_peak = std::exp(0.5 * (lo + hi));
    r.peak_db = std::max(best_db, mag_db(r.f_peak));
    const double level = r.peak_db - half_power_db;
    const auto fl = model_crossing(mag_db, r.f_peak, level, search_low_hz);
    const auto fh = model_crossing(mag_db, r.f_peak, level, search_high_hz);
    finish_derived(r, fl, fh, mag_db, o, sign, p);
    return r;
}

// The same quantities for parameters a small step from those of `base` (the delta-method
// gradients): the maximum by golden section within one grid step of base's, each crossing by the
// Illinois method in a narrow bracket around base's, falling back to the full search when the
// crossing has left that bracket. About a sixth of the work of derive().
Derived derive_near(const RationalOrder& o, double sign, const std::vector<double>& p, double f_min, double f_max,
                    const Derived& base) {
    const Magnitude mag_db(o, sign, p);
    const double lmin = std::log(f_min), lmax = std::log(f_max), step = (lmax - lmin) / 400;
    Derived r;
    double lo = std::max(lmin, std::log(base.f_peak) - step), hi = std::min(lmax, std::log(base.f_peak) + step);
    const auto [g1, g2] = golden_peak(mag_db, lo, hi);
    r.f_peak = std::exp(0.5 * (lo + hi));
    r.peak_db = std::max({mag_db(r.f_peak), g1, g2});
    const double level = r.peak_db - half_power_db;
    auto crossing = [&](bool had, double f_base, double limit_hz) -> std::optional<double> {
        if (!had) return model_crossing(mag_db, r.f_peak, level, limit_hz);
        double a = std::log(f_base) - 0.01, b = std::log(f_base) + 0.01;
        double fa = mag_db(std::exp(a)) - level, fb = mag_db(std::exp(b)) - level;
        if (!((fa > 0) != (fb > 0))) return model_crossing(mag_db, r.f_peak, level, limit_hz);
        int side = 0;
        for (int it = 0; it < 60 && std::abs(b - a) > 1e-14; ++it) {
            const double c = (a * fb - b * fa) / (fb - fa);
            const double fc = mag_db(std::exp(c)) - level;
            if (fc == 0) return std::exp(c);
            if ((fc > 0) == (fb > 0)) {
                b = c; fb = fc;
                if (side == -1) fa /= 2;
                side = -1;
            } else {
                a = c; fa = fc;
                if (side == 1) fb /= 2;
                side = 1;
            }
            if (std::abs(fc) < 1e-13) break;
        }
        return std::exp((a * fb - b * fa) / (fb - fa));
    };
    const auto fl = crossing(base.has_low, base.f_low, search_low_hz);
    const auto fh = crossing(base.has_high, base.f_high, search_high_hz);
    finish_derived(r, fl, fh, mag_db, o, sign, p);
    return r;
}

void fill_derived(ResponseFit& fit) {
    const std::vector<double> p = fit.report.values();
    const Derived d = derive(fit.order, fit.sign, p, fit.f_min_hz, fit.f_max_hz);
    const std::size_t n = p.size();
    // Gradients of (peak dB, ln f_low, ln f_high, ln f_mid, peaking dB) with respect to the
    // working variables (gain_db and ln of every corner), by central differences.
    std::vector<std::array<double, 5>> grad(n);
    auto quantities = [&](const Derived& q) {
        return std::array<double, 5>{q.peak_db, q.has_low ? std::log(q.f_low) : 0.0, q.has_high ? std::log(q.f_high) : 0.0,
                                     std::log(q.f_mid), q.peaking_db};
    };
    for (std::size_t j = 0; j < n; ++j) {
        const double h = 1e-5;
        std::vector<double> up = p, down = p;
        if (j == 0) {
            up[0] += h;
            down[0] -= h;
        } else {
            up[j] *= std::exp(h);
            down[j] *= std::exp(-h);
        }
        const auto qu = quantities(derive_near(fit.order, fit.sign, up, fit.f_min_hz, fit.f_max_hz, d));
        const auto qd = quantities(derive_near(fit.order, fit.sign, down, fit.f_min_hz, fit.f_max_hz, d));
        for (int k = 0; k < 5; ++k) grad[j][static_cast<std::size_t>(k)] = (qu[static_cast<std::size_t>(k)] - qd[static_cast<std::size_t>(k)]) / (2 * h);
    }
    const std::vector<double>& cov = fit.report.working_covariance;
    auto sd_of = [&](int k) {
        if (cov.size() != n * n) return 0.0;
        double v = 0;
        for (std::size_t a = 0; a < n; ++a)
            for (std::size_t b = 0; b < n; ++b) v += grad[a][static_cast<std::size_t>(k)] * cov[a * n + b] * grad[b][static_cast<std::size_t>(k)];
        return std::sqrt(std::max(v, 0.0));
    };
    const double t = fit.report.coverage_factor;
    auto linear = [&](double value, int k) {
        DerivedValue v{true, value, sd_of(k), 0, 0};
        v.ci_low = value - t * v.sd;
        v.ci_high = value + t * v.sd;
        return v;
    };
    auto logarithmic = [&](double value, int k) {
        const double sd_ln = sd_of(k);
        return DerivedValue{true, value, value * sd_ln, value * std::exp(-t * sd_ln), value * std::exp(t * sd_ln)};
    };
    fit.midband_gain_db = linear(d.peak_db, 0);
    fit.peaking_db = linear(d.peaking_db, 4);
    fit.midband_freq_hz = logarithmic(d.f_mid, 3);
    // A corner counts only inside the measured range; beyond it the model merely extrapolates.
    const double tol = 1e-9;
    if (d.has_low && d.f_low >= fit.f_min_hz * (1 - tol)) {
        fit.f_low_hz = logarithmic(d.f_low, 1);
    } else {
        fit.notes.push_back(d.has_low ? fmt::format("f_low not reached: the model puts it at {:.4g} Hz, below the "
                                                    "lowest measured frequency {:.4g} Hz", d.f_low, fit.f_min_hz)
                                      : "f_low not reached: the response does not fall 3 dB below the maximum at low frequencies");
    }
    if (d.has_high && d.f_high <= fit.f_max_hz * (1 + tol)) {
        fit.f_high_hz = logarithmic(d.f_high, 2);
    } else {
        fit.notes.push_back(d.has_high ? fmt::format("f_high not reached: the model puts it at {:.4g} Hz, above the "
                                                     "highest measured frequency {:.4g} Hz", d.f_high, fit.f_max_hz)
                                       : "f_high not reached: the response does not fall 3 dB below the maximum at high frequencies");
    }
    if (!fit.magnitude_only) fit.inverting = std::abs(d.mid_phase_deg) > 90.0;
}

ResponseFit assemble(const GainData& data, const RationalOrder& order, double sign, FitReport report) {
    ResponseFit fit;
    fit.report = std::move(report);
    fit.order = order;
    fit.sign = sign;
    fit.magnitude_only = !data.has_phase;
    fit.f_min_hz = data.points.front().freq_hz;
    fit.f_max_hz = data.points.back().freq_hz;
    if (fit.magnitude_only)
        fit.notes.push_back("magnitude-only data: phase and inversion follow from a minimum-phase assumption");
    if (!data.has_sd) fit.notes.push_back("no standard deviations given: unit weights scaled by the reduced chi-square");
    if (fit.report.status != FitStatus::diverged) fill_derived(fit);
    return fit;
}

double information_criterion(const FitReport& r, bool known_sd) {
    const double m = static_cast<double>(r.observations);
    const double k = static_cast<double>(r.free_index.size());
    // BIC: χ² + k·ln m with known sds; m·ln(RSS/m) + k·ln m with unit weights.
    return (known_sd ? r.rss : m * std::log(std::max(r.rss, 1e-300) / m)) + k * std::log(m);
}

void require_enough_points(const GainData& data, const RationalOrder& order) {
    const std::size_t residuals = data.points.size() * (data.has_phase ? 2 : 1);
    const auto params = static_cast<std::size_t>(order.parameter_count());
    if (data.points.size() < static_cast<std::size_t>(order.parameter_count()) || residuals <= params)
        throw FitInputError(fmt::format("{}: {} points cannot determine the {} parameters of {}",
                                        data.origin.empty() ? "gain points" : data.origin, data.points.size(), params,
                                        order.name()));
}

// The better of the linearised and the magnitude-read starts.
ResponseFit fit_order(const GainData& data, const RationalOrder& order, double confidence) {
    std::vector<std::vector<double>> starts = {rational_start(data, order, false)};
    std::vector<double> lin;
    if (linearised_start(data, order, lin)) starts.push_back(lin);
    std::optional<FitReport> best;
    double best_sign = 1.0;
    for (const std::vector<double>& start : starts) {
        const double sign = choose_sign(data, order, start);
        FitReport r = run_fit(data, order, sign, start, confidence);
        const bool better = !best || (r.usable() && !best->usable()) ||
                            (r.usable() == best->usable() && r.status != FitStatus::diverged && r.rss < best->rss) ||
                            best->status == FitStatus::diverged;
        if (better) {
            best = std::move(r);
            best_sign = sign;
        }
    }
    return assemble(data, order, best_sign, std::move(*best));
}

}  // namespace

std::string ResponseFitOptions::validate() const {
    if (!(confidence > 0 && confidence < 1)) return "confidence must lie in (0, 1)";
    if (max_low_poles < 0 || max_low_poles > 4) return "max_low_poles must be 0..4";
    if (max_high_poles < 0 || max_high_poles > 4) return "max_high_poles must be 0..4";
    if (model != "auto") {
        try {
            RationalOrder::parse(model);
        } catch (const FitInputError& e) {
            return e.what();
        }
    }
    return {};
}

std::vector<double> rational_start(const GainData& data, const RationalOrder& order, bool linearised) {
    std::vector<double> p;
    if (linearised && linearised_start(data, order, p)) return p;
    return heuristic_start(data, order);
}

double choose_sign(const GainData& data, const RationalOrder& order, const std::vector<double>& start) {
    if (!data.has_phase) return 1.0;
    double cost[2] = {0, 0};
    for (int s = 0; s < 2; ++s) {
        const double sign = s == 0 ? 1.0 : -1.0;
        for (const GainPoint& pt : data.points) {
            const double ph = rational_log_response(order, sign, start.data(), pt.freq_hz).imag() * 180.0 / std::numbers::pi;
            const double e = wrap_deg(ph - pt.phase_deg);
            cost[s] += e * e;
        }
    }
    return cost[1] < cost[0] ? -1.0 : 1.0;
}

ResponseFit fit_response_from(const GainData& data, const RationalOrder& order, double sign,
                              const std::vector<double>& start, double confidence) {
    require_enough_points(data, order);
    return assemble(data, order, sign, run_fit(data, order, sign, start, confidence));
}

ResponseFit fit_response(const GainData& raw, const ResponseFitOptions& options) {
    if (const std::string why = options.validate(); !why.empty()) throw FitInputError("response fit: " + why);
    const GainData data = prepare_gain_data(raw);
    if (options.model != "auto") {
        const RationalOrder order = RationalOrder::parse(options.model);
        require_enough_points(data, order);
        ResponseFit fit = fit_order(data, order, options.confidence);
        fit.notes.insert(fit.notes.begin(), fmt::format("model {} as requested", order.name()));
        return fit;
    }
    std::vector<RationalOrder> candidates;
    for (int l = 0; l <= options.max_low_poles; ++l)
        for (int z = 0; z <= std::min(l, 2); ++z)
            for (int h = 0; h <= options.max_high_poles; ++h)
                for (int c = 0; c <= (h >= 2 ? 1 : 0); ++c)
                    candidates.push_back({l, z, h - 2 * c, c});
    std::optional<ResponseFit> best;
    double best_ic = INFINITY;
    std::vector<std::pair<std::string, double>> table;
    for (const RationalOrder& order : candidates) {
        const auto params = static_cast<std::size_t>(order.parameter_count());
        if (data.points.size() < params || data.points.size() * (data.has_phase ? 2 : 1) <= params) continue;
        ResponseFit fit = fit_order(data, order, options.confidence);
        const double ic = fit.usable() ? information_criterion(fit.report, data.has_sd) : NAN;
        table.emplace_back(order.name(), ic);
        if ((fit.usable() && ic < best_ic) || !best) {
            if (fit.usable()) best_ic = ic;
            if (fit.usable() || !best) best = std::move(fit);
        }
    }
    if (!best)
        throw FitInputError(fmt::format("{}: {} points are too few for any rational model",
                                        data.origin.empty() ? "gain points" : data.origin, data.points.size()));
    best->candidates = std::move(table);
    best->notes.insert(best->notes.begin(), fmt::format("model {} chosen by BIC among {} candidates", best->order.name(),
                                                        best->candidates.size()));
    return std::move(*best);
}

std::complex<double> ResponseFit::response(double freq_hz) const {
    const std::vector<double> p = report.values();
    return std::exp(rational_log_response(order, sign, p.data(), freq_hz));
}

std::string ResponseFit::brief() const {
    std::string s = fmt::format("{} {}", order.name(), to_string(report.status));
    if (report.status == FitStatus::diverged) return s + ": " + report.message;
    s += fmt::format(": midband {:.3f} dB [{:.3f}, {:.3f}]", midband_gain_db.value, midband_gain_db.ci_low,
                     midband_gain_db.ci_high);
    if (f_low_hz.present)
        s += fmt::format(", f_low {:.4g} Hz [{:.4g}, {:.4g}]", f_low_hz.value, f_low_hz.ci_low, f_low_hz.ci_high);
    else
        s += ", f_low not reached";
    if (f_high_hz.present)
        s += fmt::format(", f_high {:.4g} Hz [{:.4g}, {:.4g}]", f_high_hz.value, f_high_hz.ci_low, f_high_hz.ci_high);
    else
        s += ", f_high not reached";
    if (inverting) s += *inverting ? ", inverting" : ", non-inverting";
    s += fmt::format(", reduced chi-square {:.3g}", report.chi2_reduced);
    return s;
}

}  // namespace ampbench::fit
