// Time-domain integration of a netlist: the trapezoidal rule with companion models for every
// charge (capacitors, junction and diffusion charges, inductor flux) and Newton per step, with
// optional propagation of the step's state-transition matrix for shooting and settling.
#pragma once

#include <functional>
#include <memory>
#include <vector>

#include "fit/circuit/netlist.h"

namespace ampbench::circuit {

// The generator's EMF behind its output resistance: offset + amplitude·sin(ω·t + phase).
struct SineStimulus {
    double amplitude_v = 0.0;  // peak
    double freq_hz = 1e3;
    double offset_v = 0.0;
    double phase_rad = 0.0;
    double at(double t_s) const;
    double period_s() const { return 1.0 / freq_hz; }
};

// The whole memory of the trapezoidal integrator: the MNA unknowns and the current through
// each charge element (its dq/dt), so two equal states continue identically.
struct TransientState {
    std::vector<double> x;        // Netlist::unknown_count() values
    std::vector<double> current;  // one per charge element
    // Flat view [x; current] for the shooting and settling algebra.
    std::vector<double> flat() const;
    void set_flat(const std::vector<double>& v);
};

struct TransientOptions {
    int max_newton = 60;
    // Newton stops when every unknown moved less than reltol·|x| + vntol (nodes) or + abstol
    // (branch currents); tighter than this only chases rounding.
    double reltol = 1e-8;
    double vntol_v = 1e-9;
    double abstol_a = 1e-12;
};

// Called after each step with the time and the new state's unknowns.
using StepObserver = std::function<void(double t_s, const double* x)>;

class TransientEngine {
public:
    explicit TransientEngine(const Netlist& netlist, TransientOptions options = {});
    TransientEngine(TransientEngine&&) noexcept;
    TransientEngine& operator=(TransientEngine&&) noexcept;
    ~TransientEngine();

    int unknown_count() const;
    int charge_count() const;
    int state_size() const { return unknown_count() + charge_count(); }
    const Netlist& netlist() const;

    // A state at rest at the unknowns x (charge currents zero).
    TransientState state_at_rest(const std::vector<double>& x) const;
    // The DC solution with the generator EMF held at `emf_v`, by Newton from `guess`.
    std::vector<double> dc_solution(double emf_v, const std::vector<double>& guess);
    // Charge currents of the solution moving at dx/dt = `dxdt` (for initial guesses).
    std::vector<double> charge_currents(const std::vector<double>& x, const std::vector<double>& dxdt);

    // Advances `state` by `steps` trapezoidal steps of `h_s` from local time t0_s. When
    // `transition` is given (row-major state_size()², usually the identity), it is multiplied on
    // the left by each step's state-transition matrix, giving ∂state_end/∂state_start.
    // Throws FitInputError when Newton fails to converge in a step.
    void integrate(TransientState& state, double t0_s, double h_s, long steps, const SineStimulus& g,
                   std::vector<double>* transition = nullptr, const StepObserver& observer = {});

    // The current the supply delivers in a state (positive when it sources), and a node voltage.
    double supply_current(const TransientState& state) const;
    static double node_voltage(const std::vector<double>& x, int node) { return node == 0 ? 0.0 : x[node - 1]; }

    // Newton iterations spent so far (for benchmarks).
    long newton_iterations() const;

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

}  // namespace ampbench::circuit
