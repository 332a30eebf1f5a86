// A Levenberg–Marquardt least-squares engine with bounded and log-scale parameters, a
// covariance from the Jacobian at the solution, and a FitReport that explains the outcome.
#pragma once

#include <cstddef>
#include <functional>
#include <limits>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace ampbench::fit {

// One model parameter as the caller sees it (the "external" value).
struct Parameter {
    std::string name;
    double start = 0.0;
    double lower = -std::numeric_limits<double>::infinity();
    double upper = std::numeric_limits<double>::infinity();
    // Fit ln(value) instead of value: keeps a corner frequency positive and makes its interval
    // multiplicative. The value (and any bounds) must then be > 0.
    bool log_scale = false;
    bool fixed = false;
};

// Weighted residuals r_i(p) of a model; the engine minimises sum r_i².
class ResidualModel {
public:
    virtual ~ResidualModel() = default;
    virtual std::size_t residual_count() const = 0;
    // p holds every parameter (fixed ones included), r has residual_count() entries.
    virtual void residuals(std::span<const double> p, std::span<double> r) const = 0;
    // Row-major residual_count() × p.size() matrix of dr_i/dp_j. Returns false when the model
    // has no analytic Jacobian; the engine then uses central differences.
    virtual bool jacobian(std::span<const double> p, std::span<double> jac) const;
};

// Central-difference Jacobian of any model (row-major), also used to check analytic ones.
std::vector<double> numeric_jacobian(const ResidualModel& model, std::span<const double> p);

struct LsqOptions {
    int max_evaluations = 4000;
    double ftol = 1e-12;  // relative reduction of the sum of squares
    double xtol = 1e-12;  // relative change of the scaled parameters
    double gtol = 0.0;    // cosine between residuals and Jacobian columns
    // true: residuals are weighted by unknown-scale weights, so the covariance is scaled by the
    // reduced chi-square; false: weights are 1/sd with known sd, covariance taken as is.
    bool scale_covariance = true;
    double confidence = 0.95;
    // Scaled Jacobian condition number above which the fit is called ill-conditioned.
    double max_condition = 1e10;

    // Empty string when valid; otherwise which field is wrong and why.
    std::string validate() const;
};

enum class FitStatus { converged, iteration_limit, diverged, ill_conditioned };
std::string_view to_string(FitStatus status);

struct FitParameter {
    std::string name;
    double value = 0.0;
    double sd = 0.0;        // standard uncertainty (0 for fixed parameters)
    double ci_low = 0.0;    // interval at LsqOptions::confidence; multiplicative for log_scale
    double ci_high = 0.0;
    bool fixed = false;
    bool at_bound = false;  // ended on a bound: its sd is not meaningful
};

struct FitReport {
    FitStatus status = FitStatus::diverged;
    std::string message;  // why the engine stopped, in words
    std::vector<FitParameter> params;
    // Free-parameter covariance and correlation (row-major, free parameters in order).
    std::vector<double> covariance;
    std::vector<double> correlation;
    // Covariance of the working variables (ln p for log-scale parameters, p otherwise), for
    // delta-method propagation by callers; same order as `covariance`.
    std::vector<double> working_covariance;
    std::vector<std::size_t> free_index;  // params index of each free parameter
    std::vector<double> residuals;        // weighted residuals at the solution
    double rss = 0.0;
    double chi2_reduced = 0.0;
    std::size_t observations = 0;
    std::size_t dof = 0;
    int evaluations = 0;
    double condition = 0.0;
    double coverage_factor = 0.0;  // t quantile used for the intervals

    bool usable() const { return status == FitStatus::converged; }
    // One line: status, chi-square, parameter values with their sd.
    std::string brief() const;
    std::vector<double> values() const;
    const FitParameter& param(std::string_view name) const;  // std::out_of_range if unknown
    double correlation_between(std::string_view a, std::string_view b) const;
};

FitReport least_squares(const ResidualModel& model, const std::vector<Parameter>& params,
                        const LsqOptions& options = {});

// Delta method: the variance of each output of g(p) propagated from the covariance of the
// fitted working variables. `free_index` names the varied entries of p in the order of
// `covariance` (row-major, free × free); `log_params[k]` says free parameter k works in ln p
// (as FitReport::working_covariance does for log-scale parameters). The gradient is a central
// difference of step `step` in each working variable; a component whose g evaluation fails
// (g returns false) counts as 0. Returns one variance per output, or an empty vector when the
// covariance does not match free_index. `g` fills `outputs` values for the given p.
using DeltaFunction = std::function<bool(std::span<const double> p, std::span<double> out)>;
std::vector<double> delta_method_variance(const DeltaFunction& g, std::size_t outputs, std::span<const double> p,
                                          std::span<const std::size_t> free_index,
                                          std::span<const double> covariance, const std::vector<bool>& log_params,
                                          double step = 1e-4);

// Two-sided Student-t coverage factor for `confidence` with `dof` degrees of freedom
// (the normal quantile for dof == 0, meaning known variance).
double coverage_factor(double confidence, std::size_t dof);
// Standard normal quantile.
double normal_quantile(double p);

}  // namespace ampbench::fit
