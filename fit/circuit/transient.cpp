// Trapezoidal integration: each charge q(x) becomes the companion i = (2/h)(q − q_n) − i_n,
// linearised at the Newton iterate; the state-transition matrix follows from the converged
// step's Jacobian by the implicit-function theorem.
#include "fit/circuit/transient.h"

#include <algorithm>
#include <cmath>
#include <numbers>

#include <Eigen/Dense>
#include <fmt/format.h>

#include "core/errors.h"
#include "fit/circuit/dc.h"

namespace ampbench::circuit {

double SineStimulus::at(double t_s) const {
    return offset_v + amplitude_v * std::sin(2.0 * std::numbers::pi * freq_hz * t_s + phase_rad);
}

std::vector<double> TransientState::flat() const {
    std::vector<double> v(x);
    v.insert(v.end(), current.begin(), current.end());
    return v;
}

void TransientState::set_flat(const std::vector<double>& v) {
    const auto nx = static_cast<std::ptrdiff_t>(x.size());
    std::copy(v.begin(), v.begin() + nx, x.begin());
    std::copy(v.begin() + nx, v.end(), current.begin());
}

namespace {

// A charge element: where its dq/dt enters the equations and how its charge depends on x.
struct ChargeElement {
    enum Kind { capacitor, bjt_be, bjt_bc, inductor } kind = capacitor;
    int row_plus = -1, row_minus = -1;  // equation rows (−1: ground / none)
    double sign_plus = 1.0;             // −1 for an inductor's branch row
    double value = 0;                   // farads or henries
    int a = 0, b = 0;                   // capacitor nodes
    int transistor = -1;
    int branch_col = -1;                // inductor current column
};

// A charge linearised as q ≈ q_const + Σ coeff·x[col].
struct Linearised {
    double q_const = 0;
    int cols[3] = {-1, -1, -1};
    double coeffs[3] = {0, 0, 0};
    int count = 0;
    void add(int col, double c) {
        if (col < 0) return;
        for (int i = 0; i < count; ++i)
            if (cols[i] == col) {
                coeffs[i] += c;
                return;
            }
        cols[count] = col;
        coeffs[count++] = c;
    }
    double value(const double* x) const {
        double q = q_const;
        for (int i = 0; i < count; ++i) q += coeffs[i] * x[cols[i]];
        return q;
    }
};

}  // namespace

struct TransientEngine::Impl {
    Netlist nl;
    TransientOptions opt;
    int n = 0, m = 0;
    Eigen::MatrixXd g_lin, a, inc;  // inc: n×m, column k = element k's incidence
    Eigen::VectorXd b_const, rhs, x_new, x_iter;
    Eigen::PartialPivLU<Eigen::MatrixXd> lu;
    std::vector<ChargeElement> elements;
    std::vector<Linearised> lin;       // per element, at the current iterate
    std::vector<BjtEval> evals;        // per transistor, at the current iterate
    std::vector<double> junction;      // limited (vbe, vbc) per transistor
    std::vector<double> v_crit_be, v_crit_bc;
    Eigen::MatrixXd q_grad_prev, q_grad_new;  // m×n charge gradients at x_n and x_{n+1}
    Eigen::VectorXd q_prev, q_new;
    Eigen::MatrixXd w, sx, sy;  // transition products (preallocated per state size)
    int stim_row = -1;
    double g_gen = 0;
    long newton_total = 0;

    explicit Impl(const Netlist& netlist, TransientOptions o) : nl(netlist), opt(o) {
        n = nl.unknown_count();
        for (const auto& c : nl.capacitors) {
            if (c.a == c.b) continue;
            ChargeElement e;
            e.kind = ChargeElement::capacitor;
            e.a = c.a;
            e.b = c.b;
            e.row_plus = c.a - 1;
            e.row_minus = c.b - 1;
            e.value = c.farads;
            elements.push_back(e);
        }
        for (size_t k = 0; k < nl.transistors.size(); ++k) {
            const Transistor& t = nl.transistors[k];
            const bool charged = t.params.cje_f > 0 || t.params.cjc_f > 0 || t.params.tf_s > 0;
            if (!charged) continue;
            ChargeElement be;
            be.kind = ChargeElement::bjt_be;
            be.transistor = static_cast<int>(k);
            be.row_plus = t.b_internal - 1;
            be.row_minus = t.e - 1;
            elements.push_back(be);
            ChargeElement bc = be;
            bc.kind = ChargeElement::bjt_bc;
            bc.row_minus = t.c - 1;
            elements.push_back(bc);
        }
        for (const auto& l : nl.inductors) {
            ChargeElement e;
            e.kind = ChargeElement::inductor;
            e.row_plus = nl.branch_unknown(l.branch);
            e.sign_plus = -1.0;
            e.value = l.henries;
            e.branch_col = nl.branch_unknown(l.branch);
            elements.push_back(e);
        }
        m = static_cast<int>(elements.size());
        g_lin = Eigen::MatrixXd::Zero(n, n);
        a = Eigen::MatrixXd::Zero(n, n);
        inc = Eigen::MatrixXd::Zero(n, m);
        b_const = Eigen::VectorXd::Zero(n);
        rhs = x_new = x_iter = Eigen::VectorXd::Zero(n);
        lu = Eigen::PartialPivLU<Eigen::MatrixXd>(n);
        lin.resize(static_cast<size_t>(m));
        evals.resize(nl.transistors.size());
        junction.assign(nl.transistors.size() * 2, 0.0);
        q_grad_prev = q_grad_new = Eigen::MatrixXd::Zero(m, n);
        q_prev = q_new = Eigen::VectorXd::Zero(m);
        for (int k = 0; k < m; ++k) {
            const auto& e = elements[static_cast<size_t>(k)];
            if (e.row_plus >= 0) inc(e.row_plus, k) += e.sign_plus;
            if (e.row_minus >= 0) inc(e.row_minus, k) -= 1.0;
        }
        for (const auto& t : nl.transistors) {
            v_crit_be.push_back(critical_voltage(t.params.is_a, t.params.nf * nl.vt));
            v_crit_bc.push_back(critical_voltage(t.params.is_a, t.params.nr * nl.vt));
        }
        stamp_linear();
    }

    void conductance(Eigen::MatrixXd& mat, int na, int nb, double g) {
        if (na) mat(na - 1, na - 1) += g;
        if (nb) mat(nb - 1, nb - 1) += g;
        if (na && nb) {
            mat(na - 1, nb - 1) -= g;
            mat(nb - 1, na - 1) -= g;
        }
    }

    void stamp_linear() {
        for (const auto& r : nl.resistors)
            if (r.a != r.b) conductance(g_lin, r.a, r.b, 1.0 / r.ohms);
        for (const auto& t : nl.transistors)
            if (t.b_internal != t.b) conductance(g_lin, t.b, t.b_internal, 1.0 / t.params.rb_ohm);
        g_gen = 1.0 / nl.generator_ohms;
        conductance(g_lin, nl.stimulus, 0, g_gen);
        stim_row = nl.stimulus - 1;
        auto branch = [&](int plus, int minus, int br, double volts) {
            const int k = nl.branch_unknown(br);
            stamp_branch_incidence(g_lin, plus, minus, k);
            b_const[k] += volts;
        };
        for (const auto& s : nl.vsources) branch(s.plus, s.minus, s.branch, s.volts);
        for (const auto& l : nl.inductors) branch(l.a, l.b, l.branch, 0.0);
        for (const auto& s : nl.isources) {
            if (s.from) b_const[s.from - 1] -= s.amps;
            if (s.to) b_const[s.to - 1] += s.amps;
        }
    }

    // Evaluates every transistor at x (limited against the last iterate when `limit`).
    bool evaluate_devices(const double* x, bool limit) {
        bool limited = false;
        for (size_t k = 0; k < nl.transistors.size(); ++k) {
            const Transistor& t = nl.transistors[k];
            double vbe = 0, vbc = 0;
            transistor_voltages(nl, t, x, &vbe, &vbc);
            if (limit) {
                vbe = limit_junction(vbe, junction[2 * k], t.params.nf * nl.vt, v_crit_be[k], &limited);
                vbc = limit_junction(vbc, junction[2 * k + 1], t.params.nr * nl.vt, v_crit_bc[k], &limited);
            }
            junction[2 * k] = vbe;
            junction[2 * k + 1] = vbc;
            evals[k] = evaluate_bjt(t.params, vbe, vbc, nl.vt);
        }
        return limited;
    }

    // Linearises every charge at the device state just evaluated (capacitors exactly).
    void linearise_charges() {
        for (int k = 0; k < m; ++k) {
            const ChargeElement& e = elements[static_cast<size_t>(k)];
            Linearised& l = lin[static_cast<size_t>(k)];
            l = Linearised{};
            switch (e.kind) {
                case ChargeElement::capacitor:
                    l.add(e.a - 1, e.value);
                    l.add(e.b - 1, -e.value);
                    break;
                case ChargeElement::inductor: l.add(e.branch_col, e.value); break;
                case ChargeElement::bjt_be:
                case ChargeElement::bjt_bc: {
                    const auto ti = static_cast<size_t>(e.transistor);
                    const Transistor& t = nl.transistors[ti];
                    const BjtEval& ev = evals[ti];
                    const double pol = t.params.polarity;
                    const double vbe_act = pol * junction[2 * ti], vbc_act = pol * junction[2 * ti + 1];
                    if (e.kind == ChargeElement::bjt_be) {
                        l.q_const = pol * ev.qbe - ev.dqbe_dvbe * vbe_act - ev.dqbe_dvbc * vbc_act;
                        l.add(t.b_internal - 1, ev.dqbe_dvbe + ev.dqbe_dvbc);
                        l.add(t.e - 1, -ev.dqbe_dvbe);
                        l.add(t.c - 1, -ev.dqbe_dvbc);
                    } else {
                        l.q_const = pol * ev.qbc - ev.dqbc_dvbc * vbc_act;
                        l.add(t.b_internal - 1, ev.dqbc_dvbc);
                        l.add(t.c - 1, -ev.dqbc_dvbc);
                    }
                    break;
                }
            }
        }
    }

    void coeff(int row_node, int col_node, double g) {
        if (row_node && col_node) a(row_node - 1, col_node - 1) += g;
    }

    void stamp_devices() {
        for (size_t k = 0; k < nl.transistors.size(); ++k) {
            const Transistor& t = nl.transistors[k];
            const BjtEval& ev = evals[k];
            const double pol = t.params.polarity;
            const double vbe_act = pol * junction[2 * k], vbc_act = pol * junction[2 * k + 1];
            const int c = t.c, bi = t.b_internal, e = t.e;
            const double gcb = ev.dic_dvbe + ev.dic_dvbc, gcc = -ev.dic_dvbc, gce = -ev.dic_dvbe;
            const double gbb = ev.dib_dvbe + ev.dib_dvbc, gbc = -ev.dib_dvbc, gbe = -ev.dib_dvbe;
            const double ic_eq = pol * ev.ic - (ev.dic_dvbe * vbe_act + ev.dic_dvbc * vbc_act);
            const double ib_eq = pol * ev.ib - (ev.dib_dvbe * vbe_act + ev.dib_dvbc * vbc_act);
            coeff(c, bi, gcb);
            coeff(c, c, gcc);
            coeff(c, e, gce);
            coeff(bi, bi, gbb);
            coeff(bi, c, gbc);
            coeff(bi, e, gbe);
            coeff(e, bi, -(gcb + gbb));
            coeff(e, c, -(gcc + gbc));
            coeff(e, e, -(gce + gbe));
            if (c) rhs[c - 1] -= ic_eq;
            if (bi) rhs[bi - 1] -= ib_eq;
            if (e) rhs[e - 1] += ic_eq + ib_eq;
        }
    }

    // Newton for x_{n+1}; dynamic = false solves the DC equations. Leaves `lu` factored at the
    // final iterate. Returns false when it did not converge.
    bool newton(const double* x_start, double emf, bool dynamic, double h, const double* q_n,
                const double* i_n) {
        x_iter = Eigen::Map<const Eigen::VectorXd>(x_start, n);
        for (size_t k = 0; k < nl.transistors.size(); ++k)
            transistor_voltages(nl, nl.transistors[k], x_start, &junction[2 * k], &junction[2 * k + 1]);
        const double two_h = dynamic ? 2.0 / h : 0.0;
        double last_ratio = INFINITY;
        for (int it = 0; it < opt.max_newton; ++it) {
            ++newton_total;
            const bool limited = evaluate_devices(x_iter.data(), true);
            a = g_lin;
            rhs = b_const;
            if (stim_row >= 0) rhs[stim_row] += emf * g_gen;
            stamp_devices();
            if (dynamic) {
                linearise_charges();
                for (int k = 0; k < m; ++k) {
                    const ChargeElement& e = elements[static_cast<size_t>(k)];
                    const Linearised& l = lin[static_cast<size_t>(k)];
                    const double hist = two_h * (l.q_const - q_n[k]) - i_n[k];
                    const int rows[2] = {e.row_plus, e.row_minus};
                    const double signs[2] = {e.sign_plus, -1.0};
                    for (int r = 0; r < 2; ++r) {
                        if (rows[r] < 0) continue;
                        for (int j = 0; j < l.count; ++j) a(rows[r], l.cols[j]) += signs[r] * two_h * l.coeffs[j];
                        rhs[rows[r]] -= signs[r] * hist;
                    }
                }
            }
            lu.compute(a);
            x_new = lu.solve(rhs);
            if (!x_new.allFinite()) return false;
            const int nodes = nl.node_count() - 1;
            double ratio = 0;  // the largest move in units of its tolerance
            for (int i = 0; i < n; ++i) {
                const double tol = opt.reltol * std::max(std::abs(x_new[i]), std::abs(x_iter[i])) +
                                   (i < nodes ? opt.vntol_v : opt.abstol_a);
                ratio = std::max(ratio, std::abs(x_new[i] - x_iter[i]) / tol);
            }
            // Huge companion conductances (a big capacitor at a tiny step) leave a rounding
            // floor above the tolerance: stop when moves near it no longer shrink.
            const bool converged = !limited && (ratio <= 1 || (it >= 2 && ratio < 1e3 && ratio > 0.5 * last_ratio));
            last_ratio = ratio;
            x_iter = x_new;
            if (converged) return true;
        }
        return false;
    }

    // Charges and their gradients at x (exact, no limiting), into q and grad.
    void charges_at(const double* x, Eigen::VectorXd& q, Eigen::MatrixXd& grad) {
        evaluate_devices(x, false);
        linearise_charges();
        grad.setZero();
        for (int k = 0; k < m; ++k) {
            const Linearised& l = lin[static_cast<size_t>(k)];
            q[k] = l.value(x);
            for (int j = 0; j < l.count; ++j) grad(k, l.cols[j]) = l.coeffs[j];
        }
    }
};

TransientEngine::TransientEngine(const Netlist& netlist, TransientOptions options)
    : impl_(std::make_unique<Impl>(netlist, options)) {}
TransientEngine::TransientEngine(TransientEngine&&) noexcept = default;
TransientEngine& TransientEngine::operator=(TransientEngine&&) noexcept = default;
TransientEngine::~TransientEngine() = default;

int TransientEngine::unknown_count() const { return impl_->n; }
int TransientEngine::charge_count() const { return impl_->m; }
const Netlist& TransientEngine::netlist() const { return impl_->nl; }
long TransientEngine::newton_iterations() const { return impl_->newton_total; }

TransientState TransientEngine::state_at_rest(const std::vector<double>& x) const {
    TransientState s;
    s.x = x;
    s.current.assign(static_cast<size_t>(impl_->m), 0.0);
    return s;
}

std::vector<double> TransientEngine::dc_solution(double emf_v, const std::vector<double>& guess) {
    Impl& p = *impl_;
    if (!p.newton(guess.data(), emf_v, false, 0.0, nullptr, nullptr))
        throw FitInputError(fmt::format("{}: the DC solution with the generator at {} V did not converge",
                                        p.nl.source, emf_v));
    return {p.x_iter.data(), p.x_iter.data() + p.n};
}

std::vector<double> TransientEngine::charge_currents(const std::vector<double>& x,
                                                     const std::vector<double>& dxdt) {
    Impl& p = *impl_;
    p.charges_at(x.data(), p.q_new, p.q_grad_new);
    const Eigen::VectorXd i = p.q_grad_new * Eigen::Map<const Eigen::VectorXd>(dxdt.data(), p.n);
    return {i.data(), i.data() + p.m};
}

double TransientEngine::supply_current(const TransientState& state) const {
    return -state.x[static_cast<size_t>(impl_->nl.branch_unknown(impl_->nl.vsources[0].branch))];
}

void TransientEngine::integrate(TransientState& state, double t0_s, double h_s, long steps,
                                const SineStimulus& g, std::vector<double>* transition,
                                const StepObserver& observer) {
    Impl& p = *impl_;
    const int n = p.n, m = p.m, d = n + m;
    p.charges_at(state.x.data(), p.q_prev, p.q_grad_prev);
    Eigen::Map<Eigen::VectorXd> x(state.x.data(), n);
    Eigen::Map<Eigen::VectorXd> cur(state.current.data(), m);
    using RowMajor = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
    if (transition) {
        p.w.resize(m, d);
        p.sx.resize(n, d);
        p.sy.resize(n, d);
    }
    const double two_h = 2.0 / h_s;
    for (long k = 0; k < steps; ++k) {
        const double t1 = t0_s + static_cast<double>(k + 1) * h_s;
        if (!p.newton(state.x.data(), g.at(t1), true, h_s, p.q_prev.data(), state.current.data()))
            throw FitInputError(fmt::format("{}: transient step at t = {} s did not converge", p.nl.source, t1));
        p.charges_at(p.x_iter.data(), p.q_new, p.q_grad_new);
        if (transition) {
            Eigen::Map<RowMajor> s(transition->data(), d, d);
            p.w.noalias() = two_h * p.q_grad_prev * s.topRows(n);
            p.w += s.bottomRows(m);
            p.sx.noalias() = p.inc * p.w;
            p.sy = p.lu.solve(p.sx);
            s.topRows(n) = p.sy;
            s.bottomRows(m).noalias() = two_h * p.q_grad_new * p.sy;
            s.bottomRows(m) -= p.w;
        }
        cur = two_h * (p.q_new - p.q_prev) - cur;
        x = p.x_iter;
        std::swap(p.q_prev, p.q_new);
        std::swap(p.q_grad_prev, p.q_grad_new);
        if (observer) observer(t1, state.x.data());
    }
}

}  // namespace ampbench::circuit
