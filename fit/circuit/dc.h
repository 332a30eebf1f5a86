// DC operating point: damped Newton with junction limiting, then gmin stepping and source
// stepping when plain Newton fails.
#pragma once

#include <string>
#include <vector>

#include "fit/circuit/bjt.h"
#include "fit/circuit/netlist.h"

namespace ampbench::circuit {

struct DcOptions {
    int max_iterations = 150;   // per Newton solve
    double reltol = 1e-9;
    double vntol_v = 1e-9;
    double abstol_a = 1e-15;
    double max_step_v = 5.0;    // damping: the largest node move of one Newton step
};

// One transistor at the operating point, terminal values as a meter sees them (external
// terminals; currents into the terminal, so a pnp's I_C is negative).
struct BjtOperatingPoint {
    std::string ref;
    double ic_a = 0, ib_a = 0, ie_a = 0;
    double vbe_v = 0, vbc_v = 0, vce_v = 0;
    std::string region;
    double hfe = 0;    // I_C / I_B
    double beta0 = 0;  // g_m·r_π
    double gm_s = 0;   // ∂I_C/∂V_BE at fixed V_BC
    double rpi_ohm = 0;
    double vbe_internal = 0, vbc_internal = 0;  // npn sense, at the internal base
    BjtEval eval;  // npn-sense device state at the internal base
};

struct OperatingPoint {
    std::vector<double> x;           // the MNA unknowns (Netlist::unknown_count())
    std::vector<double> node_volts;  // by node index, [0] = 0
    std::vector<BjtOperatingPoint> transistors;
    double supply_current_a = 0;     // delivered by the supply (positive when it sources)
    std::string method;              // "newton", "gmin stepping" or "source stepping"
    int iterations = 0;
};

// Solves the operating point; `guess` (an earlier solution's x of the same netlist) speeds up
// Monte Carlo runs. Throws InputError naming the design file when nothing converges.
OperatingPoint solve_operating_point(const Netlist& netlist, const DcOptions& options = {},
                                     const std::vector<double>* guess = nullptr);

// Device voltages (npn sense, internal base) from an MNA solution vector.
void transistor_voltages(const Netlist& netlist, const Transistor& t, const double* x,
                         double* vbe, double* vbc);

}  // namespace ampbench::circuit
