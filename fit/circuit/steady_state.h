// The periodic steady state of a sine-driven circuit by shooting (Newton on the state after one
// period, with the monodromy matrix), and settling after a step by the linearised
// period-to-period state transition, so a wait of a million periods costs a few matrix squarings.
#pragma once

#include <complex>
#include <vector>

#include "fit/circuit/transient.h"

namespace ampbench::circuit {

struct ShootingOptions {
    int steps_per_period = 200;
    int max_iterations = 30;
    // Convergence on node voltages and branch currents. 1e-7 sits far below any scope's
    // resolution and above the rounding floor of one integrated period at 10 MHz.
    double vntol_v = 1e-7;
    double reltol = 1e-7;
};

// The periodic orbit at phase 0 of the stimulus (local time 0) and its monodromy matrix.
struct PeriodicSteadyState {
    SineStimulus stimulus;
    int steps_per_period = 0;
    TransientState start;
    std::vector<double> monodromy;  // row-major, state_size()², ∂state(T)/∂state(0)
    int iterations = 0;
    bool converged = false;
    double period_s() const { return stimulus.period_s(); }
    double step_s() const { return stimulus.period_s() / steps_per_period; }
};

// The small-signal guess x_dc + Im(A·X·e^{jφ}) with charge currents from its derivative, where
// X is the AC solution for 1 V of generator EMF (AcAnalysis::solution).
TransientState ac_initial_guess(TransientEngine& engine, const std::vector<double>& x_dc,
                                const std::vector<std::complex<double>>& ac_per_volt, const SineStimulus& g);

// Shooting from `guess` (a state at phase 0). A Newton step that does not reduce the residual is
// replaced by one integrated period, so strongly clipped orbits still converge.
PeriodicSteadyState shoot_periodic(TransientEngine& engine, const SineStimulus& g, const TransientState& guess,
                                   const ShootingOptions& options = {});

// The state `periods` whole periods after `at_phase0` (also at phase 0): s* + M^k·(s − s*).
TransientState settle_periods(const PeriodicSteadyState& pss, const TransientState& at_phase0, long long periods);

// M^k for a row-major d×d matrix, by repeated squaring.
std::vector<double> matrix_power(const std::vector<double>& m, int d, long long k);

}  // namespace ampbench::circuit
