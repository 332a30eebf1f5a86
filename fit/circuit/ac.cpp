// Complex MNA by Laub's method: with M = G⁻¹C reduced once to Hessenberg form H = QᵀMQ, each
// frequency needs only the O(n²) solve (I + jωH)·z = Qᵀ·G⁻¹·b. A dense complex LU stays as the
// fallback for a near-singular G and as the reference the tests compare against.
#include "fit/circuit/ac.h"

#include <cmath>
#include <numbers>

#include <Eigen/Dense>

namespace ampbench::circuit {
namespace {

using Complex = std::complex<double>;

void add(Eigen::MatrixXd& m, int row_node, int col_node, double v) {
    if (row_node && col_node) m(row_node - 1, col_node - 1) += v;
}
void add_two_terminal(Eigen::MatrixXd& m, int a, int b, double v) {
    add(m, a, a, v);
    add(m, b, b, v);
    add(m, a, b, -v);
    add(m, b, a, -v);
}

}  // namespace

void stamp_transistor_small_signal(const Transistor& t, const BjtEval& ev, int n, double* g,
                                   double* c) {
    Eigen::Map<Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>> gm(g, n, n);
    Eigen::Map<Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>> cm(c, n, n);
    auto at = [&](auto& m, int r, int col, double v) {
        if (r && col) m(r - 1, col - 1) += v;
    };
    const int cn = t.c, bi = t.b_internal, e = t.e;
    if (bi != t.b) {
        const double gb = 1.0 / t.params.rb_ohm;
        at(gm, t.b, t.b, gb);
        at(gm, bi, bi, gb);
        at(gm, t.b, bi, -gb);
        at(gm, bi, t.b, -gb);
    }
    // Collector and base currents as functions of v_be = V_B' − V_E and v_bc = V_B' − V_C.
    const double gcb = ev.dic_dvbe + ev.dic_dvbc, gcc = -ev.dic_dvbc, gce = -ev.dic_dvbe;
    const double gbb = ev.dib_dvbe + ev.dib_dvbc, gbc = -ev.dib_dvbc, gbe = -ev.dib_dvbe;
    at(gm, cn, bi, gcb);
    at(gm, cn, cn, gcc);
    at(gm, cn, e, gce);
    at(gm, bi, bi, gbb);
    at(gm, bi, cn, gbc);
    at(gm, bi, e, gbe);
    at(gm, e, bi, -(gcb + gbb));
    at(gm, e, cn, -(gcc + gbc));
    at(gm, e, e, -(gce + gbe));
    // Q_BE (C_pi and the transcapacitance towards V_BC) flows from B' to E; Q_BC from B' to C.
    const double cpi = ev.dqbe_dvbe, ct = ev.dqbe_dvbc, cmu = ev.dqbc_dvbc;
    at(cm, bi, bi, cpi + ct + cmu);
    at(cm, bi, e, -cpi);
    at(cm, bi, cn, -ct - cmu);
    at(cm, e, bi, -cpi - ct);
    at(cm, e, e, cpi);
    at(cm, e, cn, ct);
    at(cm, cn, bi, -cmu);
    at(cm, cn, cn, cmu);
}

struct AcAnalysis::Impl {
    int n = 0;
    int in = 0, out = 0, stimulus = 0;
    double generator_ohms = 50;
    Eigen::MatrixXd g, c;
    Eigen::VectorXd b;  // generator drive (Norton: 1 V / R_gen into the stimulus node)
    std::vector<double> g_rows, c_rows;
    bool fast = false;
    Eigen::PartialPivLU<Eigen::MatrixXd> lu_g;
    Eigen::HessenbergDecomposition<Eigen::MatrixXd> hess;
    Eigen::MatrixXd h, q, m;
    Eigen::VectorXd r_drive, r_out;  // Qᵀ·G⁻¹·b for the drive and for 1 A into the out node
    Eigen::VectorXd q_in, q_out, q_stim;
    Eigen::MatrixXcd work;
    Eigen::VectorXcd rhs, z;

    void build(const Netlist& nl, const OperatingPoint& op) {
        n = nl.unknown_count();
        in = nl.in;
        out = nl.out;
        stimulus = nl.stimulus;
        generator_ohms = nl.generator_ohms;
        g.setZero(n, n);
        c.setZero(n, n);
        b.setZero(n);
        for (const auto& r : nl.resistors) add_two_terminal(g, r.a, r.b, 1.0 / r.ohms);
        for (const auto& cap : nl.capacitors) add_two_terminal(c, cap.a, cap.b, cap.farads);
        add(g, nl.stimulus, nl.stimulus, 1.0 / nl.generator_ohms);
        if (nl.stimulus) b[nl.stimulus - 1] = 1.0 / nl.generator_ohms;
        auto branch = [&](int plus, int minus, int br) {
            const int k = nl.branch_unknown(br);
            if (plus) {
                g(plus - 1, k) += 1;
                g(k, plus - 1) += 1;
            }
            if (minus) {
                g(minus - 1, k) -= 1;
                g(k, minus - 1) -= 1;
            }
            return k;
        };
        for (const auto& s : nl.vsources) branch(s.plus, s.minus, s.branch);
        for (const auto& l : nl.inductors) {
            const int k = branch(l.a, l.b, l.branch);
            c(k, k) -= l.henries;
        }
        g_rows.assign(static_cast<size_t>(n) * n, 0.0);
        c_rows.assign(static_cast<size_t>(n) * n, 0.0);
        for (size_t k = 0; k < nl.transistors.size(); ++k)
            stamp_transistor_small_signal(nl.transistors[k], op.transistors[k].eval, n,
                                          g_rows.data(), c_rows.data());
        for (int i = 0; i < n; ++i)
            for (int j = 0; j < n; ++j) {
                g(i, j) += g_rows[static_cast<size_t>(i) * n + j];
                c(i, j) += c_rows[static_cast<size_t>(i) * n + j];
                g_rows[static_cast<size_t>(i) * n + j] = g(i, j);
                c_rows[static_cast<size_t>(i) * n + j] = c(i, j);
            }
        reduce();
    }

    void reduce() {
        lu_g.compute(g);
        fast = lu_g.rcond() > 1e-13;
        work.resize(n, n);
        rhs.resize(n);
        z.resize(n);
        if (!fast) return;
        m = lu_g.solve(c);
        hess.compute(m);
        h = hess.matrixH();
        q = hess.matrixQ();
        r_drive = q.transpose() * lu_g.solve(b);
        Eigen::VectorXd unit = Eigen::VectorXd::Zero(n);
        if (out) unit[out - 1] = 1.0;
        r_out = q.transpose() * lu_g.solve(unit);
        auto row = [&](int node) -> Eigen::VectorXd {
            if (node == 0) return Eigen::VectorXd::Zero(n);
            return q.row(node - 1).transpose();
        };
        q_in = row(in);
        q_out = row(out);
        q_stim = row(stimulus);
    }

    // Solves (I + sH)·z = r for upper-Hessenberg H by elimination with adjacent-row pivoting.
    void hessenberg_solve(Complex s, const Eigen::VectorXd& r) {
        for (int j = 0; j < n; ++j) {
            const int top = std::max(0, j - 1);
            for (int i = 0; i < top; ++i) work(i, j) = s * h(i, j);
            for (int i = top; i < n; ++i) work(i, j) = i <= j + 1 ? s * h(i, j) : Complex(0);
            work(j, j) += 1.0;
        }
        for (int i = 0; i < n; ++i) z[i] = r[i];
        for (int k = 0; k + 1 < n; ++k) {
            if (std::abs(work(k + 1, k)) > std::abs(work(k, k))) {
                for (int j = k; j < n; ++j) std::swap(work(k, j), work(k + 1, j));
                std::swap(z[k], z[k + 1]);
            }
            const Complex pivot = work(k, k);
            if (pivot == Complex(0)) continue;
            const Complex f = work(k + 1, k) / pivot;
            if (f == Complex(0)) continue;
            for (int j = k + 1; j < n; ++j) work(k + 1, j) -= f * work(k, j);
            z[k + 1] -= f * z[k];
        }
        for (int i = n - 1; i >= 0; --i) {
            Complex acc = z[i];
            for (int j = i + 1; j < n; ++j) acc -= work(i, j) * z[j];
            z[i] = acc / work(i, i);
        }
    }

    Complex dot(const Eigen::VectorXd& row) const {
        Complex acc = 0;
        for (int i = 0; i < n; ++i) acc += row[i] * z[i];
        return acc;
    }

    Eigen::VectorXcd direct(double freq_hz, const Eigen::VectorXd& rhs_real) const {
        const Complex s(0, 2 * std::numbers::pi * freq_hz);
        Eigen::MatrixXcd a = g.cast<Complex>() + s * c.cast<Complex>();
        return a.partialPivLu().solve(rhs_real.cast<Complex>());
    }

    static Complex node_of(const Eigen::VectorXcd& x, int node) {
        return node == 0 ? Complex(0) : x[node - 1];
    }
};

AcAnalysis::AcAnalysis(const Netlist& netlist, const OperatingPoint& op)
    : impl_(std::make_unique<Impl>()) {
    impl_->build(netlist, op);
}
AcAnalysis::AcAnalysis(AcAnalysis&&) noexcept = default;
AcAnalysis& AcAnalysis::operator=(AcAnalysis&&) noexcept = default;
AcAnalysis::~AcAnalysis() = default;

void AcAnalysis::update(const Netlist& netlist, const OperatingPoint& op) {
    impl_->build(netlist, op);
}

AcPoint AcAnalysis::point(double freq_hz) {
    Impl& d = *impl_;
    AcPoint p;
    p.freq_hz = freq_hz;
    if (d.fast) {
        d.hessenberg_solve(Complex(0, 2 * std::numbers::pi * freq_hz), d.r_drive);
        p.v_in = d.dot(d.q_in);
        p.v_out = d.dot(d.q_out);
        p.v_stimulus = d.dot(d.q_stim);
    } else {
        const Eigen::VectorXcd x = d.direct(freq_hz, d.b);
        p.v_in = Impl::node_of(x, d.in);
        p.v_out = Impl::node_of(x, d.out);
        p.v_stimulus = Impl::node_of(x, d.stimulus);
    }
    p.gain = p.v_out / p.v_in;
    // The generator drives (1 − V_stim)/R_gen into the board at V_stim.
    p.input_impedance = d.generator_ohms * p.v_stimulus / (1.0 - p.v_stimulus);
    return p;
}

std::complex<double> AcAnalysis::output_impedance(double freq_hz) {
    Impl& d = *impl_;
    if (d.out == 0) return 0;
    if (d.fast) {
        d.hessenberg_solve(Complex(0, 2 * std::numbers::pi * freq_hz), d.r_out);
        return d.dot(d.q_out);
    }
    Eigen::VectorXd unit = Eigen::VectorXd::Zero(d.n);
    unit[d.out - 1] = 1.0;
    return Impl::node_of(d.direct(freq_hz, unit), d.out);
}

std::vector<std::complex<double>> AcAnalysis::solution(double freq_hz) {
    Impl& d = *impl_;
    if (!d.fast) return solution_direct(freq_hz);
    d.hessenberg_solve(Complex(0, 2 * std::numbers::pi * freq_hz), d.r_drive);
    const Eigen::VectorXcd x = d.q.cast<Complex>() * d.z;
    return {x.data(), x.data() + x.size()};
}

std::vector<std::complex<double>> AcAnalysis::solution_direct(double freq_hz) const {
    const Eigen::VectorXcd x = impl_->direct(freq_hz, impl_->b);
    return {x.data(), x.data() + x.size()};
}

const std::vector<double>& AcAnalysis::conductance_matrix() const { return impl_->g_rows; }
const std::vector<double>& AcAnalysis::capacitance_matrix() const { return impl_->c_rows; }

}  // namespace ampbench::circuit
