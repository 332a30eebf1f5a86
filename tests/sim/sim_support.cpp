// Fixtures of the virtual-bench tests.
#include "sim_support.h"

#include <array>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <numbers>
#include <stdexcept>

#include <fmt/format.h>

namespace ampbench::sim::test {

std::string ce_design_json(double s) {
    return fmt::format(R"({{ "format": "ampbench-design/1", "name": "HVE test stage",
  "supply": {{ "node": "vcc", "volts": "12", "current_limit": "50m" }},
  "stimulus": {{ "node": "in" }},
  "parts": [
    {{ "ref": "C1", "kind": "capacitor", "nodes": ["in", "b"], "value": {}, "tol": "20%" }},
    {{ "ref": "R1", "kind": "resistor", "nodes": ["vcc", "b"], "value": "47k", "tol": "5%" }},
    {{ "ref": "R2", "kind": "resistor", "nodes": ["b", "0"], "value": "10k", "tol": "5%" }},
    {{ "ref": "R3", "kind": "resistor", "nodes": ["vcc", "c"], "value": "2k7", "tol": "5%" }},
    {{ "ref": "R4", "kind": "resistor", "nodes": ["e", "0"], "value": "680", "tol": "5%" }},
    {{ "ref": "C2", "kind": "capacitor", "nodes": ["e", "0"], "value": {}, "tol": "20%" }},
    {{ "ref": "C3", "kind": "capacitor", "nodes": ["c", "out"], "value": {}, "tol": "20%" }},
    {{ "ref": "RL", "kind": "resistor", "nodes": ["out", "0"], "value": "10k", "tol": "1%" }},
    {{ "ref": "Q1", "kind": "npn", "nodes": {{"c": "c", "b": "b", "e": "e"}}, "model": "smallsig" }} ],
  "models": {{ "smallsig": {{ "saturation_current": "1e-14", "beta": "200",
      "beta_range": ["100", "300"], "early_voltage": "100", "base_resistance": "10",
      "cje": "4.5p", "cjc": "3.6p", "transit_time": "300p" }} }},
  "probes": {{ "in": "in", "out": "out" }},
  "limits": {{ "max_input_vpp": "0.1" }} }})",
                       1e-6 * s, 100e-6 * s, 10e-6 * s);
}

circuit::Design ce_design(double cap_scale) { return circuit::parse_design(ce_design_json(cap_scale), "ce-test"); }

SineFit fit_sine(const std::vector<double>& y, double dt_s, double t0_s, double freq_hz) {
    // Normal equations of y ≈ a·cos + b·sin + c.
    double m[3][3] = {}, r[3] = {};
    const double w = 2 * std::numbers::pi * freq_hz;
    for (size_t k = 0; k < y.size(); ++k) {
        const double t = t0_s + static_cast<double>(k) * dt_s;
        const double basis[3] = {std::cos(w * t), std::sin(w * t), 1.0};
        for (int i = 0; i < 3; ++i) {
            r[i] += basis[i] * y[k];
            for (int j = 0; j < 3; ++j) m[i][j] += basis[i] * basis[j];
        }
    }
    // Gaussian elimination, 3×3.
    for (int i = 0; i < 3; ++i) {
        for (int k = i + 1; k < 3; ++k) {
            const double f = m[k][i] / m[i][i];
            for (int j = i; j < 3; ++j) m[k][j] -= f * m[i][j];
            r[k] -= f * r[i];
        }
    }
    double x[3];
    for (int i = 2; i >= 0; --i) {
        double s = r[i];
        for (int j = i + 1; j < 3; ++j) s -= m[i][j] * x[j];
        x[i] = s / m[i][i];
    }
    SineFit out;
    out.amplitude = std::hypot(x[0], x[1]);
    out.phase_rad = std::atan2(x[0], x[1]);  // y = A·sin(wt + φ)
    out.offset = x[2];
    return out;
}

std::string write_temp_file(const std::string& name, const std::string& text) {
    const std::string path = std::string(AMPBENCH_BINARY_DIR) + "/tests/sim-" + name;
    std::ofstream(path) << text;
    return path;
}

std::string run_command(const std::string& command) {
    std::string out;
    FILE* pipe = popen(command.c_str(), "r");
    if (!pipe) throw std::runtime_error("cannot run " + command);
    std::array<char, 4096> buf{};
    size_t n;
    while ((n = fread(buf.data(), 1, buf.size(), pipe)) > 0) out.append(buf.data(), n);
    if (pclose(pipe) != 0) throw std::runtime_error("command failed: " + command + "\n" + out);
    return out;
}

}  // namespace ampbench::sim::test
