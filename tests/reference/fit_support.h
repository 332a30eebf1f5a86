// ngspice and scipy helpers for the response-fit reference checks: a small-signal
// common-emitter board deck, one batch run for many boards, and the scipy fitting script.
#pragma once

#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "fit/response/gain_points.h"

namespace ampbench::fit::testing {

// A linearised RC-coupled common-emitter stage (hybrid-pi with gm, r_pi, C_pi; no C_mu) between
// a source resistance and a loaded output. rpar > 0 puts a resistor across the input coupling
// capacitor, which makes a low-frequency shelf (a finite zero).
struct CeBoard {
    double rs = 600, cin = 1e-6, rpar = 0, rb = 8.2e3, rpi = 5e3, cpi = 200e-12, gm = 0.04;
    double rc = 4.7e3, cout = 2.2e-6, rl = 10e3, cl = 470e-12;
};

struct SpiceResponse {
    std::vector<double> freq_hz, gain_db, phase_deg;  // phase continuous (ngspice cph)
};

// Simulates every board in one `ngspice -b` run (boards side by side in one netlist, one AC
// sweep from f_lo to f_hi at points_per_decade). `tag` names the scratch directory.
std::vector<SpiceResponse> simulate_boards(const std::vector<CeBoard>& boards, int points_per_decade, double f_lo,
                                           double f_hi, const std::string& tag);

// Runs tests/data/fit/rational_lsq.py on `problem` with /usr/bin/python3 and returns its JSON.
nlohmann::json run_scipy_fit(const nlohmann::json& problem, const std::string& tag);

// −3 dB crossings and maximum of a densely sampled response, by log interpolation.
struct TrueCorners {
    double peak_db = 0, f_low = 0, f_high = 0;
    bool has_low = false, has_high = false;
};
TrueCorners true_corners(const SpiceResponse& r);

}  // namespace ampbench::fit::testing
