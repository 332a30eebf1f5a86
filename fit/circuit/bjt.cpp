// Gummel–Poon subset of bjt.h, written to follow the SPICE3 formulation term by term so the
// engine and ngspice agree to rounding.
#include "fit/circuit/bjt.h"

#include <cmath>
#include <numbers>

namespace ampbench::circuit {
namespace {

// Diode current and conductance IS·(e^{v/nVt} − 1), with SPICE's cubic form in deep reverse
// bias (below −3·n·Vt) that avoids a flat zero slope.
void diode(double v, double is, double n_vt, double* i, double* g) {
    if (v >= -3 * n_vt) {
        const double e = std::exp(v / n_vt);
        *i = is * (e - 1);
        *g = is * e / n_vt;
    } else {
        double arg = 3 * n_vt / (v * std::numbers::e);
        arg = arg * arg * arg;
        *i = -is * (1 + arg);
        *g = is * 3 * arg / v;
    }
}

}  // namespace

double thermal_voltage(double temperature_c) {
    return kBoltzmann_j_per_k * (temperature_c + kZeroCelsius_k) / kElementaryCharge_c;
}

JunctionCharge depletion_charge(double v, double cj0, double vj, double m, double fc) {
    JunctionCharge out;
    if (cj0 <= 0) return out;
    const double v_fc = fc * vj;
    if (v < v_fc) {
        const double arg = 1 - v / vj;
        const double sarg = std::exp(-m * std::log(arg));
        out.q = vj * cj0 * (1 - arg * sarg) / (1 - m);
        out.c = cj0 * sarg;
    } else {
        // Linear continuation of C above FC·VJ (f1, f2, f3 as in SPICE).
        const double f1 = vj * (1 - std::pow(1 - fc, 1 - m)) / (1 - m);
        const double f2 = std::pow(1 - fc, 1 + m);
        const double f3 = 1 - fc * (1 + m);
        out.q = cj0 * f1 + cj0 / f2 * (f3 * (v - v_fc) + m / (2 * vj) * (v * v - v_fc * v_fc));
        out.c = cj0 / f2 * (f3 + m * v / vj);
    }
    return out;
}

BjtEval evaluate_bjt(const BjtParams& p, double vbe, double vbc, double vt, double gmin) {
    BjtEval out;
    const double vte = p.nf * vt;
    const double vtc = p.nr * vt;
    double ibe = 0, gbe = 0, ibc = 0, gbc = 0;
    diode(vbe, p.is_a, vte, &ibe, &gbe);
    diode(vbc, p.is_a, vtc, &ibc, &gbc);

    // Base-width modulation; with no reverse Early voltage and no high-level injection
    // q_b = q_1 = 1/(1 − V_BC/V_AF).
    const double inv_vaf = p.vaf_v > 0 ? 1.0 / p.vaf_v : 0.0;
    const double qb = 1.0 / (1.0 - vbc * inv_vaf);
    const double dqb_dvbc = qb * qb * inv_vaf;
    out.qb = qb;

    const double transport = (ibe - ibc) / qb;
    out.ic = transport - ibc / p.br - gmin * vbc;
    out.ib = ibe / p.bf + gmin * vbe + ibc / p.br + gmin * vbc;
    out.dic_dvbe = gbe / qb;
    out.dic_dvbc = -gbc / qb - transport / qb * dqb_dvbc - gbc / p.br - gmin;
    out.dib_dvbe = gbe / p.bf + gmin;
    out.dib_dvbc = gbc / p.br + gmin;

    const JunctionCharge je = depletion_charge(vbe, p.cje_f, p.vje_v, p.mje, p.fc);
    const JunctionCharge jc = depletion_charge(vbc, p.cjc_f, p.vjc_v, p.mjc, p.fc);
    out.qbe = je.q;
    out.dqbe_dvbe = je.c;
    if (p.tf_s > 0 && vbe > 0) {
        // Diffusion charge TF·I_F/q_b (SPICE stores it only in forward bias).
        out.qbe += p.tf_s * ibe / qb;
        out.dqbe_dvbe += p.tf_s * gbe / qb;
        out.dqbe_dvbc = -p.tf_s * ibe / (qb * qb) * dqb_dvbc;
    }
    out.qbc = jc.q;
    out.dqbc_dvbc = jc.c;
    return out;
}

double critical_voltage(double is_a, double n_vt) {
    return n_vt * std::log(n_vt / (std::numbers::sqrt2 * is_a));
}

double limit_junction(double v_new, double v_old, double n_vt, double v_crit, bool* limited) {
    bool changed = false;
    if (v_new > v_crit && std::abs(v_new - v_old) > 2 * n_vt) {
        if (v_old > 0) {
            const double arg = 1 + (v_new - v_old) / n_vt;
            v_new = arg > 0 ? v_old + n_vt * std::log(arg) : v_crit;
        } else {
            v_new = n_vt * std::log(v_new / n_vt);
        }
        changed = true;
    } else if (v_new < 0) {
        const double floor_v = v_old > 0 ? -v_old - 1 : 2 * v_old - 1;
        if (v_new < floor_v) {
            v_new = floor_v;
            changed = true;
        }
    }
    if (limited) *limited = *limited || changed;
    return v_new;
}

const char* bjt_region(double vbe, double vbc, double ic_a) {
    // common practice: a silicon junction conducts usefully above about 0.5 V.
    const bool be_on = vbe > 0.5;
    const bool bc_on = vbc > 0.4;  // V_CE below about 0.3 V
    if (be_on && bc_on) return "saturation";
    if (be_on) return ic_a > 1e-9 ? "active" : "cutoff";
    if (bc_on) return "reverse";
    return "cutoff";
}

}  // namespace ampbench::circuit
