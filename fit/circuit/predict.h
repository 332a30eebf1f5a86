// What a correct board measures on a given bench, by the definitions of DESIGN.md §5: the DC
// operating point and the small-signal response quantities.
#pragma once

#include <optional>
#include <vector>

#include "fit/circuit/ac.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/netlist.h"

namespace ampbench::circuit {

struct PredictOptions {
    double f_min_hz = 0.01;
    double f_max_hz = 1e9;
    int points_per_decade = 10;  // search grid; maxima and crossings are refined beyond it
    double vce_sat_v = 0.2;      // common practice: V_CE(sat) of a small-signal transistor
    DcOptions dc;
};

struct Response {
    double midband_gain = 0;  // max |H|
    double midband_gain_db = 0;
    double midband_phase_deg = 0;  // at the midband frequency, (−180, 180]
    bool inverting = false;
    double midband_freq_hz = 0;
    double max_gain_freq_hz = 0;  // where |H| peaks
    double peaking_db = 0;
    std::optional<double> f_low_hz, f_high_hz;
    double input_impedance_ohm = 0;   // |Z_in| at the midband frequency
    double output_impedance_ohm = 0;  // |Z_out| at the out probe, midband frequency
    std::complex<double> input_impedance, output_impedance;
    double max_output_vpp = 0;  // largest undistorted output swing, peak to peak
    std::string swing_limit;    // what limits it: "Q1 cutoff", "Q2 saturation"
};

struct Prediction {
    OperatingPoint op;
    Response response;
};

// Operating point plus response of a netlist.
Prediction predict(const Netlist& netlist, const PredictOptions& options = {});
// The response of an already linearised circuit (the Monte Carlo path reuses `ac`).
Response predict_response(AcAnalysis& ac, const Netlist& netlist, const OperatingPoint& op,
                          const PredictOptions& options = {});

// Frequencies spaced evenly on a log scale, both ends included.
std::vector<double> log_frequencies(double f_lo_hz, double f_hi_hz, int count);

}  // namespace ampbench::circuit
