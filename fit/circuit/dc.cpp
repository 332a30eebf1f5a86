// Newton–Raphson on the MNA equations with SPICE-style junction limiting; homotopies
// (gmin stepping, source stepping) as fallbacks.
#include "fit/circuit/dc.h"

#include <algorithm>
#include <cmath>

#include <Eigen/Dense>
#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::circuit {
namespace {

double voltage(const double* x, int node) { return node == 0 ? 0.0 : x[node - 1]; }

class NewtonSystem {
public:
    NewtonSystem(const Netlist& nl, const DcOptions& opt)
        : nl_(nl), opt_(opt), n_(nl.unknown_count()), a_(n_, n_), b_(n_), x_(n_), lu_(n_) {
        for (const auto& t : nl.transistors)
            v_crit_.push_back(critical_voltage(t.params.is_a, t.params.nf * nl.vt));
        junction_.assign(nl.transistors.size() * 2, 0.0);
    }

    // One Newton solve from x0 with source scale and extra shunt conductance on every node.
    bool solve(Eigen::VectorXd& x, double source_scale, double g_shunt, int* iterations) {
        initialise_junctions(x);
        for (int it = 0; it < opt_.max_iterations; ++it) {
            ++*iterations;
            bool limited = false;
            stamp(x, source_scale, g_shunt, &limited);
            lu_.compute(a_);
            if (!(std::abs(lu_.determinant()) > 0)) return false;
            x_ = lu_.solve(b_);
            if (!x_.allFinite()) return false;
            // Damping: never move a node by more than max_step_v in one step.
            const int nodes = nl_.node_count() - 1;
            double step = 0;
            for (int i = 0; i < nodes; ++i) step = std::max(step, std::abs(x_[i] - x[i]));
            if (step > opt_.max_step_v) {
                const double alpha = opt_.max_step_v / step;
                x_ = x + alpha * (x_ - x);
                limited = true;
            }
            bool converged = !limited && it > 0;
            for (int i = 0; i < n_ && converged; ++i) {
                const double tol = opt_.reltol * std::max(std::abs(x_[i]), std::abs(x[i])) +
                                   (i < nodes ? opt_.vntol_v : opt_.abstol_a);
                converged = std::abs(x_[i] - x[i]) <= tol;
            }
            x = x_;
            if (converged) return true;
        }
        return false;
    }

private:
    void initialise_junctions(const Eigen::VectorXd& x) {
        // From an all-zero start, each junction begins at its critical voltage as SPICE does.
        first_ = x.isZero(0.0);
        for (size_t k = 0; k < nl_.transistors.size(); ++k) {
            double vbe = 0, vbc = 0;
            transistor_voltages(nl_, nl_.transistors[k], x.data(), &vbe, &vbc);
            junction_[2 * k] = first_ ? v_crit_[k] : vbe;
            junction_[2 * k + 1] = first_ ? 0.0 : vbc;
        }
    }

    void conductance(int a, int b, double g) {
        if (a) a_(a - 1, a - 1) += g;
        if (b) a_(b - 1, b - 1) += g;
        if (a && b) {
            a_(a - 1, b - 1) -= g;
            a_(b - 1, a - 1) -= g;
        }
    }
    void inject(int node, double amps) {
        if (node) b_[node - 1] += amps;
    }
    void coeff(int row_node, int col_node, double g) {
        if (row_node && col_node) a_(row_node - 1, col_node - 1) += g;
    }

    void stamp(const Eigen::VectorXd& x, double scale, double g_shunt, bool* limited) {
        a_.setZero();
        b_.setZero();
        const int nodes = nl_.node_count() - 1;
        for (int i = 0; i < nodes; ++i) a_(i, i) += g_shunt;
        for (const auto& r : nl_.resistors) conductance(r.a, r.b, 1.0 / r.ohms);
        conductance(nl_.stimulus, 0, 1.0 / nl_.generator_ohms);
        for (const auto& s : nl_.isources) {
            inject(s.from, -scale * s.amps);
            inject(s.to, scale * s.amps);
        }
        auto branch = [&](int plus, int minus, int br, double volts) {
            const int k = nl_.branch_unknown(br);
            stamp_branch_incidence(a_, plus, minus, k);
            b_[k] += volts;
        };
        for (const auto& s : nl_.vsources) branch(s.plus, s.minus, s.branch, scale * s.volts);
        for (const auto& l : nl_.inductors) branch(l.a, l.b, l.branch, 0.0);
        for (size_t k = 0; k < nl_.transistors.size(); ++k) {
            const Transistor& t = nl_.transistors[k];
            const BjtParams& p = t.params;
            if (t.b_internal != t.b) conductance(t.b, t.b_internal, 1.0 / p.rb_ohm);
            double vbe = 0, vbc = 0;
            transistor_voltages(nl_, t, x.data(), &vbe, &vbc);
            if (!first_) {
                vbe = limit_junction(vbe, junction_[2 * k], p.nf * nl_.vt, v_crit_[k], limited);
                vbc = limit_junction(vbc, junction_[2 * k + 1], p.nr * nl_.vt,
                                     critical_voltage(p.is_a, p.nr * nl_.vt), limited);
            } else {
                vbe = junction_[2 * k];
                vbc = junction_[2 * k + 1];
                *limited = true;
            }
            junction_[2 * k] = vbe;
            junction_[2 * k + 1] = vbc;
            const BjtEval ev = evaluate_bjt(p, vbe, vbc, nl_.vt);
            const double pol = p.polarity;
            const int c = t.c, bi = t.b_internal, e = t.e;
            // Linearised terminal currents I_T = I_T0 + Σ g·(V − V0) (actual polarity).
            const double ic0 = pol * ev.ic, ib0 = pol * ev.ib;
            // Voltages consistent with the limited junctions, so the companion model is exact there.
            const double vbe_act = pol * vbe, vbc_act = pol * vbc;
            const double gcb = ev.dic_dvbe + ev.dic_dvbc, gcc = -ev.dic_dvbc, gce = -ev.dic_dvbe;
            const double gbb = ev.dib_dvbe + ev.dib_dvbc, gbc = -ev.dib_dvbc, gbe = -ev.dib_dvbe;
            // I0 − Σ g·V0 with V0 such that vb−ve = vbe_act and vb−vc = vbc_act.
            const double ic_eq = ic0 - (ev.dic_dvbe * vbe_act + ev.dic_dvbc * vbc_act);
            const double ib_eq = ib0 - (ev.dib_dvbe * vbe_act + ev.dib_dvbc * vbc_act);
            coeff(c, bi, gcb);
            coeff(c, c, gcc);
            coeff(c, e, gce);
            coeff(bi, bi, gbb);
            coeff(bi, c, gbc);
            coeff(bi, e, gbe);
            coeff(e, bi, -(gcb + gbb));
            coeff(e, c, -(gcc + gbc));
            coeff(e, e, -(gce + gbe));
            inject(c, -ic_eq);
            inject(bi, -ib_eq);
            inject(e, ic_eq + ib_eq);
        }
        first_ = false;
    }

    const Netlist& nl_;
    const DcOptions& opt_;
    int n_;
    Eigen::MatrixXd a_;
    Eigen::VectorXd b_, x_;
    Eigen::PartialPivLU<Eigen::MatrixXd> lu_;
    std::vector<double> v_crit_;
    std::vector<double> junction_;
    bool first_ = false;
};

OperatingPoint report(const Netlist& nl, const Eigen::VectorXd& x) {
    OperatingPoint op;
    op.x.assign(x.data(), x.data() + x.size());
    op.node_volts.assign(static_cast<size_t>(nl.node_count()), 0.0);
    for (int i = 1; i < nl.node_count(); ++i) op.node_volts[static_cast<size_t>(i)] = x[i - 1];
    op.supply_current_a = -x[nl.branch_unknown(nl.vsources[0].branch)];
    for (const auto& t : nl.transistors) {
        BjtOperatingPoint d;
        d.ref = t.ref;
        transistor_voltages(nl, t, x.data(), &d.vbe_internal, &d.vbc_internal);
        d.eval = evaluate_bjt(t.params, d.vbe_internal, d.vbc_internal, nl.vt);
        const double pol = t.params.polarity;
        d.ic_a = pol * d.eval.ic;
        d.ib_a = pol * d.eval.ib;
        d.ie_a = -(d.ic_a + d.ib_a);
        const double vb = voltage(x.data(), t.b), vc = voltage(x.data(), t.c),
                     ve = voltage(x.data(), t.e);
        d.vbe_v = vb - ve;
        d.vbc_v = vb - vc;
        d.vce_v = vc - ve;
        d.region = bjt_region(d.vbe_internal, d.vbc_internal, d.eval.ic);
        d.hfe = d.eval.ib != 0 ? d.eval.ic / d.eval.ib : 0.0;
        d.gm_s = d.eval.dic_dvbe;
        d.rpi_ohm = d.eval.dib_dvbe > 0 ? 1.0 / d.eval.dib_dvbe : 0.0;
        d.beta0 = d.gm_s * d.rpi_ohm;
        op.transistors.push_back(std::move(d));
    }
    return op;
}

}  // namespace

void transistor_voltages(const Netlist& nl, const Transistor& t, const double* x, double* vbe,
                         double* vbc) {
    (void)nl;
    const double vb = voltage(x, t.b_internal);
    *vbe = t.params.polarity * (vb - voltage(x, t.e));
    *vbc = t.params.polarity * (vb - voltage(x, t.c));
}

OperatingPoint solve_operating_point(const Netlist& nl, const DcOptions& options,
                                     const std::vector<double>* guess) {
    const int n = nl.unknown_count();
    NewtonSystem sys(nl, options);
    int iterations = 0;
    Eigen::VectorXd x = Eigen::VectorXd::Zero(n);
    auto finish = [&](const char* method) {
        OperatingPoint op = report(nl, x);
        op.method = method;
        op.iterations = iterations;
        return op;
    };

    if (guess && static_cast<int>(guess->size()) == n) {
        x = Eigen::Map<const Eigen::VectorXd>(guess->data(), n);
        if (sys.solve(x, 1.0, 0.0, &iterations)) return finish("newton");
    }
    x.setZero();
    if (sys.solve(x, 1.0, 0.0, &iterations)) return finish("newton");

    // gmin stepping: a shunt on every node makes the system well-behaved; shrink it to zero.
    x.setZero();
    bool ok = true;
    for (double g = 1e-2; g > 1e-13 && ok; g /= 10) ok = sys.solve(x, 1.0, g, &iterations);
    if (ok && sys.solve(x, 1.0, 0.0, &iterations)) return finish("gmin stepping");

    // Source stepping: ramp every independent source from zero, halving the step on failure.
    x.setZero();
    double scale = 0.0, step = 0.1;
    Eigen::VectorXd last = x;
    while (scale < 1.0 && step > 1e-4) {
        const double next = std::min(1.0, scale + step);
        if (sys.solve(x, next, 0.0, &iterations)) {
            scale = next;
            last = x;
            step = std::min(0.25, step * 1.5);
        } else {
            x = last;
            step /= 2;
        }
    }
    if (scale >= 1.0) return finish("source stepping");

    throw InputError(nl.source, "",
                     fmt::format("the DC operating point did not converge (Newton, gmin stepping "
                                 "and source stepping all failed after {} iterations); check "
                                 "the supply, the bias network and the transistor polarities",
                                 iterations));
}

}  // namespace ampbench::circuit
