// Shooting and settling on top of the trapezoidal engine; all matrices are state_size() square
// and small (a few tens), so dense Eigen is the right tool.
#include "fit/circuit/steady_state.h"

#include <cmath>
#include <numbers>

#include <Eigen/Dense>
#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::circuit {
namespace {

using RowMajor = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;

std::vector<double> identity(int d) {
    std::vector<double> m(static_cast<size_t>(d * d), 0.0);
    for (int i = 0; i < d; ++i) m[static_cast<size_t>(i * d + i)] = 1.0;
    return m;
}

}  // namespace

TransientState ac_initial_guess(TransientEngine& engine, const std::vector<double>& x_dc,
                                const std::vector<std::complex<double>>& ac_per_volt, const SineStimulus& g) {
    const size_t n = x_dc.size();
    const std::complex<double> drive = g.amplitude_v * std::exp(std::complex<double>(0, g.phase_rad));
    const double w = 2 * std::numbers::pi * g.freq_hz;
    std::vector<double> x(n), dxdt(n);
    for (size_t i = 0; i < n && i < ac_per_volt.size(); ++i) {
        const std::complex<double> v = drive * ac_per_volt[i];
        x[i] = x_dc[i] + v.imag();
        dxdt[i] = (std::complex<double>(0, w) * v).imag();
    }
    TransientState s = engine.state_at_rest(x);
    s.current = engine.charge_currents(x, dxdt);
    return s;
}

PeriodicSteadyState shoot_periodic(TransientEngine& engine, const SineStimulus& g, const TransientState& guess,
                                   const ShootingOptions& options) {
    const int n = engine.unknown_count();
    const int d = engine.state_size();
    const int steps = options.steps_per_period;
    const double h = g.period_s() / steps;
    PeriodicSteadyState out;
    out.stimulus = g;
    out.steps_per_period = steps;
    std::vector<double> s0 = guess.flat();
    TransientState work = guess;
    double last_norm = INFINITY;
    for (int it = 0; it < options.max_iterations; ++it) {
        out.iterations = it + 1;
        work.set_flat(s0);
        std::vector<double> m = identity(d);
        engine.integrate(work, 0.0, h, steps, g, &m);
        const std::vector<double> s1 = work.flat();
        Eigen::Map<const Eigen::VectorXd> a(s0.data(), d), b(s1.data(), d);
        const Eigen::VectorXd r = b - a;
        const double norm = r.head(n).lpNorm<Eigen::Infinity>();
        // The orbit already closes on itself within tolerance: at short periods the integration's
        // rounding floor keeps Newton's step from shrinking further, so test the residual too.
        bool closed = true;
        for (int i = 0; i < n && closed; ++i)
            closed = std::abs(r[i]) <= options.vntol_v + options.reltol * std::abs(b[i]);
        if (closed) {
            Eigen::Map<Eigen::VectorXd>(s0.data(), d) = b;
            out.monodromy = std::move(m);
            out.converged = true;
            break;
        }
        if (norm > last_norm) {
            // Newton overshot: one integrated period always moves toward a stable orbit.
            s0 = s1;
            last_norm = INFINITY;
            continue;
        }
        last_norm = norm;
        Eigen::Map<const RowMajor> mono(m.data(), d, d);
        const Eigen::VectorXd delta = (Eigen::MatrixXd::Identity(d, d) - mono).fullPivLu().solve(r);
        bool converged = true;
        for (int i = 0; i < n && converged; ++i)
            converged = std::abs(delta[i]) <= options.vntol_v + options.reltol * std::abs(a[i]);
        Eigen::Map<Eigen::VectorXd>(s0.data(), d) += delta;
        out.monodromy = std::move(m);
        if (converged) {
            out.converged = true;
            break;
        }
    }
    if (!out.converged)
        throw FitInputError(fmt::format("{}: the periodic steady state at {} Hz did not converge in {} shooting iterations",
                                        engine.netlist().source, g.freq_hz, options.max_iterations));
    out.start = guess;
    out.start.set_flat(s0);
    return out;
}

std::vector<double> matrix_power(const std::vector<double>& m, int d, long long k) {
    Eigen::MatrixXd result = Eigen::MatrixXd::Identity(d, d);
    Eigen::MatrixXd base = Eigen::Map<const RowMajor>(m.data(), d, d);
    while (k > 0) {
        if (k & 1) result = result * base;
        k >>= 1;
        if (k > 0) base = base * base;
    }
    std::vector<double> out(static_cast<size_t>(d * d));
    Eigen::Map<RowMajor>(out.data(), d, d) = result;
    return out;
}

TransientState settle_periods(const PeriodicSteadyState& pss, const TransientState& at_phase0, long long periods) {
    const std::vector<double> star = pss.start.flat();
    const std::vector<double> s = at_phase0.flat();
    const int d = static_cast<int>(star.size());
    const std::vector<double> mk = matrix_power(pss.monodromy, d, periods);
    Eigen::Map<const Eigen::VectorXd> vs(star.data(), d), v(s.data(), d);
    const Eigen::VectorXd out = vs + Eigen::Map<const RowMajor>(mk.data(), d, d) * (v - vs);
    TransientState r = at_phase0;
    r.set_flat({out.data(), out.data() + d});
    return r;
}

}  // namespace ampbench::circuit
