// Levenberg–Marquardt on Eigen's MINPACK port, with the parameter transforms, the covariance
// and the report assembled here.
#include "fit/lsq/least_squares.h"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <sstream>
#include <stdexcept>

#include <Eigen/Dense>
#include <Eigen/SVD>
#include <unsupported/Eigen/LevenbergMarquardt>

#include <fmt/format.h>

namespace ampbench::fit {

bool ResidualModel::jacobian(std::span<const double>, std::span<double>) const { return false; }

std::vector<double> numeric_jacobian(const ResidualModel& model, std::span<const double> p) {
    const std::size_t m = model.residual_count();
    const std::size_t n = p.size();
    std::vector<double> jac(m * n, 0.0);
    std::vector<double> x(p.begin(), p.end());
    std::vector<double> r_plus(m), r_minus(m);
    for (std::size_t j = 0; j < n; ++j) {
        // cbrt(eps) balances truncation and round-off for a central difference.
        const double h = 6e-6 * (x[j] != 0.0 ? std::abs(x[j]) : 1.0);
        const double saved = x[j];
        x[j] = saved + h;
        model.residuals(x, r_plus);
        x[j] = saved - h;
        model.residuals(x, r_minus);
        x[j] = saved;
        for (std::size_t i = 0; i < m; ++i) jac[i * n + j] = (r_plus[i] - r_minus[i]) / (2.0 * h);
    }
    return jac;
}

std::string LsqOptions::validate() const {
    if (max_evaluations <= 0) return "max_evaluations must be positive";
    if (!(ftol >= 0.0)) return "ftol must be >= 0";
    if (!(xtol >= 0.0)) return "xtol must be >= 0";
    if (!(gtol >= 0.0)) return "gtol must be >= 0";
    if (!(confidence > 0.0 && confidence < 1.0)) return "confidence must lie in (0, 1)";
    if (!(max_condition > 1.0)) return "max_condition must exceed 1";
    return {};
}

std::string_view to_string(FitStatus status) {
    switch (status) {
        case FitStatus::converged: return "converged";
        case FitStatus::iteration_limit: return "iteration limit";
        case FitStatus::diverged: return "diverged";
        case FitStatus::ill_conditioned: return "ill-conditioned";
    }
    return "unknown";
}

double normal_quantile(double p) {
    // Acklam's rational approximation (relative error < 1.2e-9), one Halley step refines it.
    static const double a[] = {-3.969683028665376e+01, 2.209460984245205e+02, -2.759285104469687e+02,
                               1.383577518672690e+02, -3.066479806614716e+01, 2.506628277459239e+00};
    static const double b[] = {-5.447609879822406e+01, 1.615858368580409e+02, -1.556989798598866e+02,
                               6.680131188771972e+01, -1.328068155288572e+01};
    static const double c[] = {-7.784894002430293e-03, -3.223964580411365e-01, -2.400758277161838e+00,
                               -2.549732539343734e+00, 4.374664141464968e+00, 2.938163982698783e+00};
    static const double d[] = {7.784695709041462e-03, 3.224671290700398e-01, 2.445134137142996e+00,
                               3.754408661907416e+00};
    if (!(p > 0.0 && p < 1.0)) return std::numeric_limits<double>::quiet_NaN();
    const double plow = 0.02425;
    double x = 0.0;
    if (p < plow) {
        const double q = std::sqrt(-2 * std::log(p));
        x = (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) /
            ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
    } else if (p <= 1 - plow) {
        const double q = p - 0.5;
        const double r = q * q;
        x = (((((a[0] * r + a[1]) * r + a[2]) * r + a[3]) * r + a[4]) * r + a[5]) * q /
            (((((b[0] * r + b[1]) * r + b[2]) * r + b[3]) * r + b[4]) * r + 1);
    } else {
        const double q = std::sqrt(-2 * std::log(1 - p));
        x = -(((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) /
            ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
    }
    const double e = 0.5 * std::erfc(-x / std::numbers::sqrt2) - p;
    const double u = e * std::sqrt(2 * std::numbers::pi) * std::exp(x * x / 2);
    return x - u / (1 + x * u / 2);
}

double coverage_factor(double confidence, std::size_t dof) {
    const double p = 1.0 - (1.0 - confidence) / 2.0;
    if (dof == 0) return normal_quantile(p);
    if (dof == 1) return std::tan(std::numbers::pi * (p - 0.5));
    if (dof == 2) return (2 * p - 1) / std::sqrt(2 * p * (1 - p));
    // Cornish–Fisher expansion of the t quantile in 1/dof (Abramowitz & Stegun 26.7.5).
    const double z = normal_quantile(p);
    const double v = static_cast<double>(dof);
    const double z2 = z * z;
    const double g1 = (z2 + 1) * z / 4;
    const double g2 = ((5 * z2 + 16) * z2 + 3) * z / 96;
    const double g3 = (((3 * z2 + 19) * z2 + 17) * z2 - 15) * z / 384;
    const double g4 = ((((79 * z2 + 776) * z2 + 1482) * z2 - 1920) * z2 - 945) * z / 92160;
    return z + g1 / v + g2 / (v * v) + g3 / (v * v * v) + g4 / (v * v * v * v);
}

std::vector<double> delta_method_variance(const DeltaFunction& g, std::size_t outputs, std::span<const double> p,
                                          std::span<const std::size_t> free_index,
                                          std::span<const double> covariance, const std::vector<bool>& log_params,
                                          double step) {
    const std::size_t nf = free_index.size();
    if (covariance.size() != nf * nf || log_params.size() != nf) return {};
    std::vector<double> grad(nf * outputs, 0.0), up(outputs), down(outputs);
    std::vector<double> q(p.begin(), p.end());
    for (std::size_t k = 0; k < nf; ++k) {
        const std::size_t j = free_index[k];
        const double saved = q[j];
        // Step in the working variable: ln p for a log parameter, p itself otherwise.
        const double h = log_params[k] ? step : step * std::max(std::abs(saved), 1.0);
        q[j] = log_params[k] ? saved * std::exp(step) : saved + h;
        const bool ok_up = g(q, up);
        q[j] = log_params[k] ? saved * std::exp(-step) : saved - h;
        const bool ok_down = g(q, down);
        q[j] = saved;
        if (!ok_up || !ok_down) continue;
        for (std::size_t c = 0; c < outputs; ++c) grad[k * outputs + c] = (up[c] - down[c]) / (2 * h);
    }
    std::vector<double> variance(outputs, 0.0);
    for (std::size_t c = 0; c < outputs; ++c) {
        double v = 0;
        for (std::size_t a = 0; a < nf; ++a)
            for (std::size_t b = 0; b < nf; ++b)
                v += grad[a * outputs + c] * covariance[a * nf + b] * grad[b * outputs + c];
        variance[c] = std::max(v, 0.0);
    }
    return variance;
}

namespace {

// Maps the unconstrained variable u of the optimiser to the working variable w (ln p or p)
// inside its bounds, in the manner of MINUIT's transforms.
struct Transform {
    bool log_scale = false;
    double lo = -INFINITY, hi = INFINITY;  // bounds on w

    double w_of(double u) const {
        if (std::isfinite(lo) && std::isfinite(hi)) return lo + (hi - lo) * (1 + std::sin(u)) / 2;
        if (std::isfinite(lo)) return lo - 1 + std::sqrt(u * u + 1);
        if (std::isfinite(hi)) return hi + 1 - std::sqrt(u * u + 1);
        return u;
    }
    double dw_du(double u) const {
        if (std::isfinite(lo) && std::isfinite(hi)) return (hi - lo) * std::cos(u) / 2;
        if (std::isfinite(lo)) return u / std::sqrt(u * u + 1);
        if (std::isfinite(hi)) return -u / std::sqrt(u * u + 1);
        return 1.0;
    }
    double u_of(double w) const {
        if (std::isfinite(lo) && std::isfinite(hi))
            return std::asin(std::clamp(2 * (w - lo) / (hi - lo) - 1, -1.0, 1.0));
        // Start a little inside a one-sided bound so the derivative is not zero there.
        if (std::isfinite(lo)) return std::sqrt(std::pow(std::max(w - lo, 1e-8) + 1, 2) - 1);
        if (std::isfinite(hi)) return std::sqrt(std::pow(std::max(hi - w, 1e-8) + 1, 2) - 1);
        return w;
    }
    double p_of_w(double w) const { return log_scale ? std::exp(w) : w; }
    double dp_dw(double w) const { return log_scale ? std::exp(w) : 1.0; }
    bool near_bound(double u) const {
        if (std::isfinite(lo) && std::isfinite(hi)) return std::abs(std::cos(u)) < 1e-6;
        if (std::isfinite(lo) || std::isfinite(hi)) return std::abs(u) < 1e-6;
        return false;
    }
};

struct Problem {
    const ResidualModel& model;
    std::vector<double> fixed_values;  // every parameter's value; free ones overwritten
    std::vector<std::size_t> free;
    std::vector<Transform> transforms;  // per free parameter
    std::size_t m = 0;
    int evaluations = 0;
    bool start_finite = false;  // the first evaluation (the optimiser's residuals at the start) was finite

    std::vector<double> params_of(const Eigen::VectorXd& u) const {
        std::vector<double> p = fixed_values;
        for (std::size_t k = 0; k < free.size(); ++k)
            p[free[k]] = transforms[k].p_of_w(transforms[k].w_of(u[static_cast<Eigen::Index>(k)]));
        return p;
    }
    // Jacobian of the residuals w.r.t. the working variables w of the free parameters.
    Eigen::MatrixXd jacobian_w(const std::vector<double>& p) const {
        const std::size_t n_all = p.size();
        std::vector<double> jac(m * n_all);
        if (!model.jacobian(p, jac)) jac = numeric_jacobian(model, p);
        Eigen::MatrixXd j(static_cast<Eigen::Index>(m), static_cast<Eigen::Index>(free.size()));
        for (std::size_t k = 0; k < free.size(); ++k) {
            const double w = transforms[k].log_scale ? std::log(p[free[k]]) : p[free[k]];
            const double scale = transforms[k].dp_dw(w);
            for (std::size_t i = 0; i < m; ++i)
                j(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(k)) = jac[i * n_all + free[k]] * scale;
        }
        return j;
    }
};

struct Functor : Eigen::DenseFunctor<double> {
    Problem& problem;
    bool started = false;
    Functor(Problem& pr, int n, int m) : Eigen::DenseFunctor<double>(n, m), problem(pr) {}

    int operator()(const Eigen::VectorXd& u, Eigen::VectorXd& fvec) {
        ++problem.evaluations;
        const std::vector<double> p = problem.params_of(u);
        std::vector<double> r(problem.m);
        bool finite = std::all_of(p.begin(), p.end(), [](double v) { return std::isfinite(v); });
        if (finite) {
            problem.model.residuals(p, r);
            finite = std::all_of(r.begin(), r.end(), [](double v) { return std::isfinite(v); });
        }
        if (!finite) {
            if (!started) return -1;
            // A huge but finite residual makes the optimiser reject the step and shrink it.
            fvec.setConstant(1e100 / std::sqrt(static_cast<double>(problem.m)));
            return 0;
        }
        if (!started) problem.start_finite = problem.evaluations == 1;
        started = true;
        for (std::size_t i = 0; i < problem.m; ++i) fvec[static_cast<Eigen::Index>(i)] = r[i];
        return 0;
    }
    int df(const Eigen::VectorXd& u, Eigen::MatrixXd& fjac) {
        const std::vector<double> p = problem.params_of(u);
        fjac = problem.jacobian_w(p);
        for (std::size_t k = 0; k < problem.free.size(); ++k)
            fjac.col(static_cast<Eigen::Index>(k)) *= problem.transforms[k].dw_du(u[static_cast<Eigen::Index>(k)]);
        if (!fjac.allFinite()) fjac.setZero();
        return 0;
    }
};

std::string stop_reason(Eigen::LevenbergMarquardtSpace::Status s) {
    using namespace Eigen::LevenbergMarquardtSpace;
    switch (s) {
        case RelativeReductionTooSmall: return "relative reduction of the sum of squares below ftol";
        case RelativeErrorTooSmall: return "relative parameter change below xtol";
        case RelativeErrorAndReductionTooSmall: return "sum of squares and parameters both settled";
        case CosinusTooSmall: return "residuals orthogonal to the Jacobian columns";
        case TooManyFunctionEvaluation: return "evaluation limit reached";
        case FtolTooSmall: return "no further reduction possible (ftol at machine precision)";
        case XtolTooSmall: return "no further change possible (xtol at machine precision)";
        case GtolTooSmall: return "gradient at machine precision";
        case UserAsked: return "residuals not finite at the starting point";
        case ImproperInputParameters: return "improper input";
        default: return "stopped";
    }
}

}  // namespace

FitReport least_squares(const ResidualModel& model, const std::vector<Parameter>& params,
                        const LsqOptions& options) {
    FitReport report;
    if (const std::string why = options.validate(); !why.empty())
        throw std::invalid_argument("LsqOptions: " + why);

    Problem problem{model, {}, {}, {}, model.residual_count()};
    report.observations = problem.m;
    for (std::size_t j = 0; j < params.size(); ++j) {
        const Parameter& par = params[j];
        problem.fixed_values.push_back(par.start);
        FitParameter out;
        out.name = par.name;
        out.value = out.ci_low = out.ci_high = par.start;
        out.fixed = par.fixed;
        report.params.push_back(out);
        if (par.fixed) continue;
        Transform t;
        t.log_scale = par.log_scale;
        if (par.log_scale && !(par.start > 0.0)) {
            report.status = FitStatus::diverged;
            report.message = fmt::format("parameter {} is log-scaled but starts at {}", par.name, par.start);
            return report;
        }
        t.lo = par.log_scale ? (par.lower > 0 ? std::log(par.lower) : -INFINITY) : par.lower;
        t.hi = par.log_scale ? (std::isfinite(par.upper) ? std::log(par.upper) : INFINITY) : par.upper;
        problem.free.push_back(j);
        problem.transforms.push_back(t);
    }
    const std::size_t n = problem.free.size();
    report.free_index = problem.free;
    if (n == 0 || problem.m < n) {
        report.status = FitStatus::ill_conditioned;
        report.message = fmt::format("{} residuals cannot determine {} free parameters", problem.m, n);
        return report;
    }

    Eigen::VectorXd u(static_cast<Eigen::Index>(n));
    for (std::size_t k = 0; k < n; ++k) {
        const double p0 = params[problem.free[k]].start;
        u[static_cast<Eigen::Index>(k)] = problem.transforms[k].u_of(problem.transforms[k].log_scale ? std::log(p0) : p0);
    }

    Functor functor(problem, static_cast<int>(n), static_cast<int>(problem.m));
    Eigen::LevenbergMarquardt<Functor> lm(functor);
    lm.setFtol(options.ftol);
    lm.setXtol(options.xtol);
    lm.setGtol(options.gtol);
    lm.setMaxfev(options.max_evaluations);
    const auto status = lm.minimize(u);
    report.evaluations = problem.evaluations;
    report.message = stop_reason(status);

    const std::vector<double> p = problem.params_of(u);
    for (std::size_t j = 0; j < p.size(); ++j) report.params[j].value = p[j];
    if (status == Eigen::LevenbergMarquardtSpace::UserAsked ||
        status == Eigen::LevenbergMarquardtSpace::ImproperInputParameters ||
        !std::all_of(p.begin(), p.end(), [](double v) { return std::isfinite(v); })) {
        report.status = FitStatus::diverged;
        return report;
    }
    // The optimiser keeps the residuals of its accepted point (exactly the p above), once its
    // first evaluation at the start succeeded; evaluating them again would cost one more model
    // evaluation for the same numbers.
    const Eigen::VectorXd& last = lm.fvec();
    if (problem.start_finite && last.size() == static_cast<Eigen::Index>(problem.m)) {
        report.residuals.assign(last.data(), last.data() + last.size());
    } else {
        report.residuals.assign(problem.m, 0.0);
        model.residuals(p, report.residuals);
    }
    report.rss = 0.0;
    for (double r : report.residuals) report.rss += r * r;
    if (!std::isfinite(report.rss) || report.rss >= 1e199) {
        report.status = FitStatus::diverged;
        report.message = "residuals not finite at the end point";
        return report;
    }
    report.dof = problem.m - n;
    report.chi2_reduced = report.dof > 0 ? report.rss / static_cast<double>(report.dof) : 0.0;

    // Covariance of w from the SVD of the column-scaled Jacobian (scaling makes the condition
    // number independent of parameter units).
    const Eigen::MatrixXd jw = problem.jacobian_w(p);
    Eigen::VectorXd col_norm = jw.colwise().norm().transpose();
    bool degenerate = !jw.allFinite();
    for (Eigen::Index k = 0; k < col_norm.size(); ++k)
        if (!(col_norm[k] > 0.0)) {
            degenerate = true;
            col_norm[k] = 1.0;
        }
    const Eigen::MatrixXd js = jw * col_norm.cwiseInverse().asDiagonal();
    Eigen::JacobiSVD<Eigen::MatrixXd> svd(js, Eigen::ComputeThinV);
    const Eigen::VectorXd sv = svd.singularValues();
    const double smax = sv.size() ? sv[0] : 0.0;
    const double smin = sv.size() ? sv[sv.size() - 1] : 0.0;
    report.condition = smin > 0 ? smax / smin : INFINITY;
    Eigen::VectorXd inv_sq(sv.size());
    for (Eigen::Index k = 0; k < sv.size(); ++k)
        inv_sq[k] = sv[k] > smax / options.max_condition ? 1.0 / (sv[k] * sv[k]) : 0.0;
    Eigen::MatrixXd cov_w = svd.matrixV() * inv_sq.asDiagonal() * svd.matrixV().transpose();
    cov_w = col_norm.cwiseInverse().asDiagonal() * cov_w * col_norm.cwiseInverse().asDiagonal();
    if (options.scale_covariance) cov_w *= report.chi2_reduced;

    const auto ni = static_cast<Eigen::Index>(n);
    Eigen::VectorXd dp(ni);
    for (std::size_t k = 0; k < n; ++k) {
        const double pk = p[problem.free[k]];
        dp[static_cast<Eigen::Index>(k)] = problem.transforms[k].log_scale ? pk : 1.0;
    }
    const Eigen::MatrixXd cov_p = dp.asDiagonal() * cov_w * dp.asDiagonal();
    report.coverage_factor = coverage_factor(options.confidence, options.scale_covariance ? report.dof : 0);
    report.covariance.resize(n * n);
    report.working_covariance.resize(n * n);
    report.correlation.resize(n * n);
    for (Eigen::Index a = 0; a < ni; ++a)
        for (Eigen::Index b = 0; b < ni; ++b) {
            const auto idx = static_cast<std::size_t>(a * ni + b);
            report.covariance[idx] = cov_p(a, b);
            report.working_covariance[idx] = cov_w(a, b);
            const double den = std::sqrt(cov_w(a, a) * cov_w(b, b));
            report.correlation[idx] = den > 0 ? cov_w(a, b) / den : (a == b ? 1.0 : 0.0);
        }
    for (std::size_t k = 0; k < n; ++k) {
        FitParameter& out = report.params[problem.free[k]];
        const auto kk = static_cast<Eigen::Index>(k);
        out.sd = std::sqrt(std::max(cov_p(kk, kk), 0.0));
        out.at_bound = problem.transforms[k].near_bound(u[kk]);
        const double half = report.coverage_factor * std::sqrt(std::max(cov_w(kk, kk), 0.0));
        if (problem.transforms[k].log_scale) {
            out.ci_low = out.value * std::exp(-half);
            out.ci_high = out.value * std::exp(half);
        } else {
            out.ci_low = out.value - half;
            out.ci_high = out.value + half;
        }
    }

    // A parameter whose standard deviation dwarfs its own size is not determined by the data,
    // however well the column scaling hides it in the condition number.
    for (std::size_t k = 0; k < n; ++k) {
        const auto kk = static_cast<Eigen::Index>(k);
        const double wk = problem.transforms[k].log_scale ? std::log(p[problem.free[k]]) : p[problem.free[k]];
        const double sd_w = std::sqrt(std::max(cov_w(kk, kk), 0.0));
        if (!std::isfinite(sd_w) || sd_w > 1e6 * std::max(std::abs(wk), 1.0)) degenerate = true;
    }
    using namespace Eigen::LevenbergMarquardtSpace;
    if (status == TooManyFunctionEvaluation) {
        report.status = FitStatus::iteration_limit;
    } else if (degenerate || !(report.condition <= options.max_condition)) {
        report.status = FitStatus::ill_conditioned;
        report.message = fmt::format("{}; Jacobian condition number {:.3g} (parameters not all determined by the data)",
                                     report.message, report.condition);
    } else {
        report.status = FitStatus::converged;
    }
    return report;
}

std::string FitReport::brief() const {
    std::ostringstream s;
    s << to_string(status) << " (" << message << ")";
    if (status != FitStatus::diverged)
        s << fmt::format(", {} evaluations, reduced chi-square {:.4g}", evaluations, chi2_reduced);
    for (const FitParameter& par : params) {
        if (par.fixed)
            s << fmt::format("; {} = {:.6g} (fixed)", par.name, par.value);
        else
            s << fmt::format("; {} = {:.6g} ± {:.2g}", par.name, par.value, par.sd);
    }
    return s.str();
}

std::vector<double> FitReport::values() const {
    std::vector<double> v;
    for (const FitParameter& par : params) v.push_back(par.value);
    return v;
}

const FitParameter& FitReport::param(std::string_view name) const {
    for (const FitParameter& par : params)
        if (par.name == name) return par;
    throw std::out_of_range("no fit parameter named " + std::string(name));
}

double FitReport::correlation_between(std::string_view a, std::string_view b) const {
    std::size_t ia = free_index.size(), ib = free_index.size();
    for (std::size_t k = 0; k < free_index.size(); ++k) {
        if (params[free_index[k]].name == a) ia = k;
        if (params[free_index[k]].name == b) ib = k;
    }
    if (ia == free_index.size() || ib == free_index.size() || correlation.empty()) return 0.0;
    return correlation[ia * free_index.size() + ib];
}

}  // namespace ampbench::fit
