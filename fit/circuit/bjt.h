// The bipolar transistor's device equations — Gummel–Poon with high-level injection and
// recombination off (Ebers–Moll transport with base-width modulation) — as plain functions the
// DC, AC and transient engines share. No Eigen here.
#pragma once

namespace ampbench::circuit {

// CODATA 2018 exact SI values.
inline constexpr double kBoltzmann_j_per_k = 1.380649e-23;
inline constexpr double kElementaryCharge_c = 1.602176634e-19;
inline constexpr double kZeroCelsius_k = 273.15;
inline constexpr double kDefaultTemperature_c = 27.0;
// Conductance SPICE puts across every junction so no node floats (GMIN).
inline constexpr double kJunctionGmin_s = 1e-12;

double thermal_voltage(double temperature_c = kDefaultTemperature_c);

// SPICE-unit parameters. polarity +1 for npn, -1 for pnp.
struct BjtParams {
    int polarity = 1;
    double is_a = 1e-14;   // IS
    double bf = 100.0;     // BF
    double br = 1.0;       // BR
    double nf = 1.0;       // NF
    double nr = 1.0;       // NR
    double vaf_v = 0.0;    // VAF, 0 = no Early effect
    double rb_ohm = 0.0;   // RB (between the base terminal and the internal base)
    double cje_f = 0.0, vje_v = 0.75, mje = 0.33;
    double cjc_f = 0.0, vjc_v = 0.75, mjc = 0.33;
    double fc = 0.5;       // forward-bias depletion coefficient
    double tf_s = 0.0;     // forward transit time
};

// Device state at one bias point, in npn sense: vbe = polarity·(V_B' − V_E) and
// vbc = polarity·(V_B' − V_C) with B' the internal base. Terminal currents in the circuit are
// polarity·ic (into the collector), polarity·ib (into B') and −polarity·(ic + ib) (into the
// emitter); conductances and capacitances need no polarity factor.
struct BjtEval {
    double ic = 0, ib = 0;                  // A, into collector and base (npn sense)
    double dic_dvbe = 0, dic_dvbc = 0;      // S
    double dib_dvbe = 0, dib_dvbc = 0;      // S
    // Stored charges (C) and their derivatives (F). qbe holds the BE depletion charge and the
    // diffusion charge TF·I_F/q_b; qbc the BC depletion charge (TR = 0).
    double qbe = 0, qbc = 0;
    double dqbe_dvbe = 0;  // C_pi: depletion + TF·g_m
    double dqbe_dvbc = 0;  // transcapacitance: the diffusion charge moves with V_BC via q_b
    double dqbc_dvbc = 0;  // C_mu
    double qb = 1;         // base charge factor q_b = 1/(1 − V_BC/V_A)
};

// Currents, conductances, charges and capacitances at (vbe, vbc) in npn sense; gmin is placed
// across each junction as SPICE does.
BjtEval evaluate_bjt(const BjtParams& p, double vbe, double vbc, double vt,
                     double gmin = kJunctionGmin_s);

// Depletion charge and capacitance C = Cj0/(1 − V/VJ)^M, continued linearly above FC·VJ.
struct JunctionCharge {
    double q = 0, c = 0;
};
JunctionCharge depletion_charge(double v, double cj0, double vj, double m, double fc);

// SPICE's junction-voltage limiting for Newton steps (pnjlim): keeps exp() in range.
double limit_junction(double v_new, double v_old, double n_vt, double v_crit, bool* limited);
// The critical voltage where the diode current's curvature is largest: n·V_T·ln(n·V_T/(√2·IS)).
double critical_voltage(double is_a, double n_vt);

// Operating region names used in reports: "active", "saturation", "cutoff", "reverse".
const char* bjt_region(double vbe, double vbc, double ic_a);

}  // namespace ampbench::circuit
