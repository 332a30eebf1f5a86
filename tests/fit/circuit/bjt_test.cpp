// The device equations: derivatives against finite differences, and closed forms of the
// Ebers–Moll transport model and the depletion capacitance.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>

#include "fit/circuit/bjt.h"

using namespace ampbench::circuit;

namespace {
BjtParams sample_params() {
    BjtParams p;
    p.is_a = 1e-14;
    p.bf = 200;
    p.br = 2;
    p.vaf_v = 80;
    p.cje_f = 10e-12;
    p.cjc_f = 4e-12;
    p.tf_s = 400e-12;
    return p;
}
}  // namespace

TEST_CASE("thermal voltage at 27 °C from CODATA constants", "[circuit][bjt]") {
    // Source: CODATA 2018, k = 1.380649e-23 J/K, e = 1.602176634e-19 C (exact); 300.15 K.
    CHECK(thermal_voltage() == Approx(1.380649e-23 * 300.15 / 1.602176634e-19).epsilon(1e-15));
    CHECK(thermal_voltage() == Approx(0.025865).epsilon(1e-4));  // from memory: 25.85 mV
}

TEST_CASE("device derivatives match finite differences", "[circuit][bjt]") {
    const BjtParams p = sample_params();
    const double vt = thermal_voltage();
    const double h = 1e-7;
    // Forward active, saturation, reverse, cutoff, and above FC·VJ on the BE junction.
    const std::pair<double, double> points[] = {{0.65, -5.0}, {0.7, 0.5}, {-2.0, 0.6},
                                                {-1.0, -8.0}, {0.45, -0.2}, {0.2, 0.1}};
    for (auto [vbe, vbc] : points) {
        INFO("vbe " << vbe << " vbc " << vbc);
        const BjtEval e = evaluate_bjt(p, vbe, vbc, vt);
        const BjtEval be_p = evaluate_bjt(p, vbe + h, vbc, vt), be_m = evaluate_bjt(p, vbe - h, vbc, vt);
        const BjtEval bc_p = evaluate_bjt(p, vbe, vbc + h, vt), bc_m = evaluate_bjt(p, vbe, vbc - h, vt);
        auto fd = [&](double plus, double minus) { return (plus - minus) / (2 * h); };
        // Central differences lose about eps·|i|/h to rounding; allow that beside 1e-5 relative.
        const double i_scale = std::max({std::abs(e.ic), std::abs(e.ib), std::abs(e.qbe) * 1e9,
                                         std::abs(e.qbc) * 1e9});
        auto close = [&](double analytic, double numeric) {
            return std::abs(analytic - numeric) <= 1e-5 * std::abs(numeric) + 1e-7 * i_scale + 1e-15;
        };
        CHECK(close(e.dic_dvbe, fd(be_p.ic, be_m.ic)));
        CHECK(close(e.dic_dvbc, fd(bc_p.ic, bc_m.ic)));
        CHECK(close(e.dib_dvbe, fd(be_p.ib, be_m.ib)));
        CHECK(close(e.dib_dvbc, fd(bc_p.ib, bc_m.ib)));
        CHECK(close(e.dqbc_dvbc, fd(bc_p.qbc, bc_m.qbc)));
        if (vbe > 0) {
            CHECK(close(e.dqbe_dvbe, fd(be_p.qbe, be_m.qbe)));
            CHECK(close(e.dqbe_dvbc, fd(bc_p.qbe, bc_m.qbe)));
        }
    }
}

TEST_CASE("forward-active currents follow Ebers–Moll with the Early factor", "[circuit][bjt]") {
    const BjtParams p = sample_params();
    const double vt = thermal_voltage();
    const double vbe = 0.65, vbc = -5.0;
    const BjtEval e = evaluate_bjt(p, vbe, vbc, vt, 0.0);
    // Source: Gummel–Poon with IKF = ∞, ISE = 0: I_C = IS·(e^{V_BE/V_T} − e^{V_BC/V_T})/q_b
    // − IS·(e^{V_BC/V_T} − 1)/BR, q_b = 1/(1 − V_BC/VAF); I_B = I_F/BF + I_R/BR.
    const double i_f = p.is_a * (std::exp(vbe / vt) - 1), i_r = p.is_a * (std::exp(vbc / vt) - 1);
    const double qb = 1 / (1 - vbc / p.vaf_v);
    CHECK(e.ic == Approx((i_f - i_r) / qb - i_r / p.br).epsilon(1e-12));
    CHECK(e.ib == Approx(i_f / p.bf + i_r / p.br).epsilon(1e-12));
    // REFERENCES.md: in this formulation β0 = g_m·r_π = BF·(1 + V_CB/V_A).
    CHECK(e.dic_dvbe / e.dib_dvbe == Approx(p.bf * (1 - vbc / p.vaf_v)).epsilon(1e-6));
    // Diffusion capacitance TF·g_m.
    const double cdep = depletion_charge(vbe, p.cje_f, p.vje_v, p.mje, p.fc).c;
    CHECK(e.dqbe_dvbe - cdep == Approx(p.tf_s * e.dic_dvbe).epsilon(1e-9));
}

TEST_CASE("depletion capacitance and its linear extension above FC·VJ", "[circuit][bjt]") {
    // Source: SPICE junction model, C = Cj0/(1 − V/VJ)^M below FC·VJ, linear continuation above.
    const double cj0 = 10e-12, vj = 0.75, m = 0.33, fc = 0.5;
    CHECK(depletion_charge(0.0, cj0, vj, m, fc).c == Approx(cj0));
    CHECK(depletion_charge(-5.0, cj0, vj, m, fc).c == Approx(cj0 / std::pow(1 + 5 / vj, m)));
    const double at = depletion_charge(fc * vj, cj0, vj, m, fc).c;
    CHECK(at == Approx(cj0 / std::pow(1 - fc, m)));
    // Continuous value and slope through FC·VJ.
    CHECK(depletion_charge(fc * vj - 1e-9, cj0, vj, m, fc).c == Approx(at).epsilon(1e-6));
    CHECK(depletion_charge(fc * vj + 1e-9, cj0, vj, m, fc).c == Approx(at).epsilon(1e-6));
    const double slope = cj0 * m / vj / std::pow(1 - fc, 1 + m);
    CHECK((depletion_charge(0.7, cj0, vj, m, fc).c - depletion_charge(0.6, cj0, vj, m, fc).c) / 0.1 ==
          Approx(slope).epsilon(1e-9));
}

TEST_CASE("junction limiting keeps Newton steps inside exp()'s range", "[circuit][bjt]") {
    const double nvt = thermal_voltage();
    const double vcrit = critical_voltage(1e-14, nvt);
    CHECK(vcrit == Approx(nvt * std::log(nvt / (std::sqrt(2.0) * 1e-14))));
    bool limited = false;
    const double v = limit_junction(5.0, 0.6, nvt, vcrit, &limited);
    CHECK(limited);
    CHECK(v < 0.8);
    limited = false;
    CHECK(limit_junction(0.61, 0.6, nvt, vcrit, &limited) == 0.61);
    CHECK_FALSE(limited);
}
