// Circuit-model fit: the design's small-signal response (DC operating point + AC analysis by
// fit/circuit) fitted to measured gain points with named parameters free ("Q1.beta", "C3").
// Every other part's tolerance enters as a Gaussian prior on ln(value) — a nuisance parameter
// with an extra residual row (ln p − ln p0)/σ — so the intervals carry its effect.
#pragma once

#include <complex>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "fit/circuit/design.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/netlist.h"
#include "fit/lsq/least_squares.h"
#include "fit/response/gain_points.h"
#include "fit/response/response_fit.h"

namespace ampbench::fit {

// One circuit quantity the fit can move. Names: a part ref ("C3", "R1") for its value; for a
// transistor "Q1.beta" (BF), "Q1.is", "Q1.rb", "Q1.vaf", "Q1.tf", "Q1.cje", "Q1.cjc".
struct CircuitParameter {
    std::string name;
    double nominal = 0.0;
    bool free = false;          // named free: no prior
    double prior_sd_ln = 0.0;   // σ of ln(value) for a nuisance parameter
};

// The design's circuit as a function of its parameters (external values, in the order of
// parameters()). Not thread-safe: it keeps the last operating point as the next guess.
class CircuitModel {
public:
    // `free` names the free parameters; every part with a tolerance (and every transistor with a
    // beta_range) that is not free becomes a nuisance parameter. InputError naming the design
    // and the name for an unknown part or transistor parameter.
    CircuitModel(const circuit::Design& design, const circuit::BenchLoading& bench,
                 const std::vector<std::string>& free);
    CircuitModel(CircuitModel&&) noexcept;
    CircuitModel& operator=(CircuitModel&&) noexcept;
    ~CircuitModel();

    const std::vector<CircuitParameter>& parameters() const;
    std::vector<double> nominal() const;
    // Solves the operating point and linearises at `p`; false when the DC solve fails.
    bool set(std::span<const double> p);
    // After a successful set(): V(out)/V(in), and the operating point.
    std::complex<double> gain(double freq_hz);
    // gain() at every frequency, in one pass.
    void gains(std::span<const double> freq_hz, std::span<std::complex<double>> out);
    const circuit::OperatingPoint& operating_point() const;
    const circuit::Netlist& netlist() const;

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

// A DC meter reading of a node's voltage against ground, with its standard uncertainty.
struct DcReading {
    std::string node;  // a node of the design ("b", "e", "c")
    double volts = 0.0;
    double sd_volts = 0.0;
};

struct CircuitFitOptions {
    std::vector<std::string> free;  // empty: the first transistor's beta
    // Each reading adds a residual row (V_model − volts)/sd against the model's DC operating
    // point, so the bias network's readings constrain what the AC data cannot (beta).
    std::vector<DcReading> dc_readings;
    double confidence = 0.95;
    // LM's ftol and xtol: the relative reduction of the sum of squares and the relative step
    // below which it stops.
    double tolerance = 1e-10;
    // false: the fit alone, without the derived quantities and their delta-method intervals.
    bool derived = true;
};

struct CircuitFit {
    FitReport report;  // free parameters first, then the nuisance parameters
    std::vector<CircuitParameter> parameters;
    bool magnitude_only = false;
    double f_min_hz = 0.0, f_max_hz = 0.0;
    // Data sds when the points carry none: estimated from a first fit's residuals.
    std::optional<double> estimated_sd_db, estimated_sd_deg;
    DerivedValue midband_gain_db, f_low_hz, f_high_hz, midband_freq_hz, peaking_db;
    std::optional<bool> inverting;
    std::vector<DcReading> dc_readings;  // the readings used, as given
    std::vector<double> dc_model_volts;  // the fitted model's voltage at each reading's node
    std::vector<std::string> notes;

    bool usable() const { return report.usable(); }
    std::string model_name() const { return "circuit"; }
    std::string brief() const;
};

// FitInputError when the data cannot be fitted (fewer points than free parameters, ...);
// InputError for an unknown free name. Otherwise a CircuitFit; check usable().
CircuitFit fit_circuit(const circuit::Design& design, const circuit::BenchLoading& bench,
                       const GainData& data, const CircuitFitOptions& options = {});

// Splits "Q1.beta,C3" into names (blanks trimmed, empty items dropped).
std::vector<std::string> parse_free_list(const std::string& text);

}  // namespace ampbench::fit
