// Effective beta: the fitted circuit re-solved at the fitted parameters and at small steps in
// each ln(parameter) for the delta method; the verdict from the interval width and the
// correlation with the other free parameters.
#include "fit/extract/beta.h"

#include <cmath>
#include <span>
#include <vector>

#include <fmt/format.h>

#include "core/errors.h"
#include "fit/circuit/ac.h"
#include "fit/units/eseries.h"

namespace ampbench::extract {
namespace {

struct Beta {
    bool ok = false;
    double beta0 = 0, hfe = 0, ic = 0, vce = 0;
};

Beta beta_at(fit::CircuitModel& model, std::span<const double> p, const std::string& ref) {
    Beta b;
    if (!model.set(p)) return b;
    for (const circuit::BjtOperatingPoint& t : model.operating_point().transistors)
        if (t.ref == ref) {
            b.ok = t.beta0 > 0 && t.hfe > 0;
            b.beta0 = t.beta0;
            b.hfe = t.hfe;
            b.ic = t.ic_a;
            b.vce = t.vce_v;
        }
    return b;
}

std::string ohms_text(double ohms) {
    if (ohms >= 1e6) return fmt::format("{:.3g} MΩ", ohms / 1e6);
    if (ohms >= 1e3) return fmt::format("{:.3g} kΩ", ohms / 1e3);
    return fmt::format("{:.3g} Ω", ohms);
}

}  // namespace

EffectiveBeta effective_beta(const fit::CircuitFit& fit, const circuit::Design& design,
                             const circuit::BenchLoading& bench, const BetaOptions& options) {
    EffectiveBeta out;
    std::vector<std::string> free;
    for (const fit::CircuitParameter& p : fit.parameters)
        if (p.free) free.push_back(p.name);
    out.transistor = options.transistor;
    if (out.transistor.empty())
        for (const std::string& name : free)
            if (name.size() > 5 && name.compare(name.size() - 5, 5, ".beta") == 0) {
                out.transistor = name.substr(0, name.size() - 5);
                break;
            }
    if (out.transistor.empty())
        for (const circuit::Part& p : design.parts)
            if (circuit::is_transistor(p.kind)) {
                out.transistor = p.ref;
                break;
            }
    const circuit::Part* part = design.find_part(out.transistor);
    if (!part || !circuit::is_transistor(part->kind))
        throw InputError(design.path, "transistor", fmt::format("no transistor '{}' in the design", out.transistor));
    const std::string beta_name = out.transistor + ".beta";

    fit::CircuitModel model(design, bench, free);
    const std::vector<double> p = fit.report.values();
    const std::string ways = fmt::format(
        "To identify it: put a known series resistance (1 % or better, about the board's input resistance{}) "
        "between the generator and the board input and probe the generator side with the scope's 'in' channel, "
        "so the input divider depends on r_pi; or add DC readings of {}'s base and emitter from the meter, which fix "
        "the base current through the bias network when its resistors are known closely (0.1 % parts or measured values)",
        "{}", out.transistor);
    out.verdict = kBetaNotIdentifiable;
    if (p.size() != model.parameters().size() || fit.report.status == fit::FitStatus::diverged) {
        out.reason = "the circuit fit failed: " + fit.report.message;
        out.advice = fmt::format(fmt::runtime(ways), "");
        return out;
    }
    const Beta b0 = beta_at(model, p, out.transistor);
    if (!b0.ok) {
        out.reason = fmt::format("{} is not conducting at the fitted operating point", out.transistor);
        out.advice = fmt::format(fmt::runtime(ways), "");
        return out;
    }
    out.beta0 = b0.beta0;
    out.hfe = b0.hfe;
    out.ic_a = b0.ic;
    out.vce_v = b0.vce;
    // The board's input resistance at the midband frequency, to size the series resistor.
    std::string rin_hint;
    {
        circuit::AcAnalysis ac(model.netlist(), model.operating_point());
        const double f = fit.midband_freq_hz.present ? fit.midband_freq_hz.value : std::sqrt(fit.f_min_hz * fit.f_max_hz);
        const double zin = std::abs(ac.point(f).input_impedance);
        if (std::isfinite(zin) && zin > 0)
            rin_hint = fmt::format(", here about {} (E12 {})", ohms_text(zin),
                                   ohms_text(units::snap_nearest(zin, units::ESeries::e12)));
    }
    out.advice = fmt::format(fmt::runtime(ways), rin_hint);

    // Delta method in the working variables ln p of every fitted parameter.
    const std::vector<double> variance = fit::delta_method_variance(
        [&](std::span<const double> q, std::span<double> v) {
            const Beta b = beta_at(model, q, out.transistor);
            if (!b.ok) return false;
            v[0] = std::log(b.beta0);
            v[1] = std::log(b.hfe);
            return true;
        },
        2, p, fit.report.free_index, fit.report.working_covariance,
        std::vector<bool>(fit.report.free_index.size(), true));
    model.set(p);
    auto sd_of = [&](std::size_t c) -> double { return variance.empty() ? INFINITY : std::sqrt(variance[c]); };
    const double t = fit.report.coverage_factor > 0 ? fit.report.coverage_factor : 1.959963984540054;
    out.sd_ln = sd_of(0);
    out.ci_low = out.beta0 * std::exp(-t * out.sd_ln);
    out.ci_high = out.beta0 * std::exp(t * out.sd_ln);
    const double sd_hfe = sd_of(1);
    out.hfe_ci_low = out.hfe * std::exp(-t * sd_hfe);
    out.hfe_ci_high = out.hfe * std::exp(t * sd_hfe);

    bool beta_free = false;
    for (const fit::FitParameter& fp : fit.report.params)
        if (fp.name == beta_name) {
            out.bf = fp.value;
            out.bf_ci_low = fp.fixed ? fp.value : fp.ci_low;
            out.bf_ci_high = fp.fixed ? fp.value : fp.ci_high;
        }
    for (const fit::CircuitParameter& cp : fit.parameters) beta_free = beta_free || (cp.name == beta_name && cp.free);
    if (out.bf == 0) out.bf = design.model_of(*part).beta, out.bf_ci_low = out.bf_ci_high = out.bf;

    if (beta_free)
        for (const std::string& other : free) {
            if (other == beta_name) continue;
            const double rho = fit.report.correlation_between(beta_name, other);
            if (std::isfinite(rho) && std::abs(rho) > std::abs(out.correlation)) {
                out.correlation = rho;
                out.correlated_with = other;
            }
        }

    const double up_rel = out.ci_high / out.beta0 - 1, down_rel = 1 - out.ci_low / out.beta0;
    if (!beta_free) {
        out.reason = fmt::format("{} is not a free parameter of the fit (add it to --free)", beta_name);
    } else if (!fit.usable()) {
        out.reason = fmt::format("the circuit fit did not converge ({})", fit.report.message);
    } else if (!std::isfinite(out.sd_ln) || std::max(up_rel, down_rel) > options.max_relative_halfwidth) {
        out.reason = fmt::format("the 95 % interval [{:.4g}, {:.4g}] is wider than ±{:.0f} %", out.ci_low, out.ci_high,
                                 100 * options.max_relative_halfwidth);
    } else if (std::abs(out.correlation) > options.max_correlation) {
        out.reason = fmt::format("beta is correlated {:.3f} with {}: the data fix only their combination", out.correlation,
                                 out.correlated_with);
    } else {
        out.verdict = kBetaIdentified;
        out.advice.clear();
    }
    return out;
}

std::string EffectiveBeta::brief() const {
    std::string s = fmt::format("{} beta_eff (β0) {:.4g} [{:.4g}, {:.4g}] from BF {:.4g}, hFE {:.4g}, at I_C {:.4g} mA: {}",
                                transistor, beta0, ci_low, ci_high, bf, hfe, ic_a * 1e3, verdict);
    if (!reason.empty()) s += " — " + reason;
    return s;
}

}  // namespace ampbench::extract
