// AC small-signal analysis: the circuit linearised at its operating point (hybrid-pi from the
// Gummel–Poon equations) and solved as complex MNA, (G + jωC)·x = b, at any frequency.
#pragma once

#include <complex>
#include <memory>
#include <span>
#include <vector>

#include "fit/circuit/dc.h"
#include "fit/circuit/netlist.h"

namespace ampbench::circuit {

// The excitation is the generator: 1 V AC behind its output resistance at the stimulus node.
struct AcPoint {
    double freq_hz = 0;
    std::complex<double> gain;      // V(probe out) / V(probe in)
    std::complex<double> v_in, v_out, v_stimulus;
    std::complex<double> input_impedance;  // seen by the generator at the stimulus node
};

// How gain() solves each frequency. `fast`: Laub's Hessenberg or modal form, O(n) to O(n²) per
// frequency after one O(n³) reduction of G⁻¹C per update. `direct`: a complex LU of the reduced
// G + jωC at every frequency, with no reduction per update; exact to rounding even for a stiff
// circuit whose time constants span ten decades, where the reduced forms keep only about seven
// digits at the highest frequencies (their rounding is relative to the largest time constant).
// A fit differentiating the response needs `direct`.
enum class AcMethod { fast, direct };

class AcAnalysis {
public:
    AcAnalysis(const Netlist& netlist, const OperatingPoint& op, AcMethod method = AcMethod::fast);
    AcAnalysis(AcAnalysis&&) noexcept;
    AcAnalysis& operator=(AcAnalysis&&) noexcept;
    ~AcAnalysis();

    // Re-linearises at a new operating point of a netlist with the same topology (new part
    // values); reuses every buffer, so a Monte Carlo run allocates nothing here.
    void update(const Netlist& netlist, const OperatingPoint& op);

    // Fast path: O(n²) per frequency after one O(n³) Hessenberg reduction per update.
    AcPoint point(double freq_hz);
    // The gain alone, the same as point(f).gain but cheaper.
    std::complex<double> gain(double freq_hz);
    // gain() at every frequency of `freq_hz` into `out` (same size); the direct method solves
    // four frequencies per pass.
    void gains(std::span<const double> freq_hz, std::span<std::complex<double>> out);
    // Thevenin impedance at the out probe (generator EMF zeroed, its resistance kept).
    std::complex<double> output_impedance(double freq_hz);
    // Every MNA unknown (node voltages 1..N−1, then branch currents) for the generator drive.
    std::vector<std::complex<double>> solution(double freq_hz);
    // The same by a dense complex LU of G + jωC: the reference the fast path is tested against.
    std::vector<std::complex<double>> solution_direct(double freq_hz) const;

    // The linearised matrices, row-major n×n (for other engines and for tests).
    const std::vector<double>& conductance_matrix() const;
    const std::vector<double>& capacitance_matrix() const;

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

// Stamps the small-signal conductances and capacitances of one transistor into row-major n×n
// matrices (node k at row k−1), the hybrid-pi of bjt.h's derivatives at `ev`.
void stamp_transistor_small_signal(const Transistor& t, const BjtEval& ev, int n, double* g,
                                   double* c);

}  // namespace ampbench::circuit
