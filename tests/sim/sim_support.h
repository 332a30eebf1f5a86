// Shared fixtures of the virtual-bench tests: small common-emitter designs and helpers.
#pragma once

#include <string>
#include <vector>

#include "fit/circuit/design.h"

namespace ampbench::sim::test {

// The npn common-emitter stage of DESIGN.md §4.2 (emitter fully bypassed), with its coupling
// capacitors scaled by `cap_scale` (small values make brute-force integration short).
std::string ce_design_json(double cap_scale = 1.0);
circuit::Design ce_design(double cap_scale = 1.0);

// Amplitude, phase and offset of a least-squares sine of known frequency (IEEE 1057
// three-parameter fit, closed form for the normal equations).
struct SineFit {
    double amplitude = 0, phase_rad = 0, offset = 0;
};
SineFit fit_sine(const std::vector<double>& y, double dt_s, double t0_s, double freq_hz);

// Writes text to a fresh file under the build tree and returns its path.
std::string write_temp_file(const std::string& name, const std::string& text);
// Runs a shell command, returns its standard output; throws on a non-zero exit.
std::string run_command(const std::string& command);

}  // namespace ampbench::sim::test
