// The tolerance band (DESIGN.md §5): a seeded Monte Carlo over part tolerances and each
// transistor's beta_range, percentiles of every response quantity and collector current, and
// which parts move each quantity most.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/predict.h"

namespace ampbench::circuit {

struct ToleranceOptions {
    int runs = 2000;
    std::uint64_t seed = 1;
    double coverage = 0.99;  // the band is p0.5 … p99.5
    PredictOptions predict;
};

struct QuantityBand {
    std::string name;  // "midband_gain_db", "f_low_hz", "Q1.ic_a", "V(c)", …
    double nominal = 0, low = 0, median = 0, high = 0;
    int samples = 0;  // runs in which the quantity exists (a corner may be out of range)
};

// Share of a quantity's variance explained by one part (squared standardised regression
// coefficients, normalised over the parts; the shares of one quantity sum to 1).
struct Sensitivity {
    std::string quantity;
    std::string ref;
    double share = 0;
};

struct ToleranceBand {
    int runs = 0;
    int failed_runs = 0;  // runs whose operating point did not converge
    std::uint64_t seed = 0;
    double coverage = 0.99;
    std::vector<QuantityBand> quantities;
    std::vector<Sensitivity> sensitivity;  // per quantity, largest share first
    const QuantityBand* find(const std::string& name) const;
};

// Per-run part values: run r's values depend only on (seed, r), so a longer run extends a
// shorter one. A part varies normally with σ = tol/3 truncated at ±tol (common practice: a
// marked tolerance covers about ±3σ of production); BF varies uniformly over beta_range.
std::vector<PartValues> draw_part_values(const Design& design, std::uint64_t seed, int runs);

ToleranceBand tolerance_band(const Design& design, const BenchLoading& bench,
                             const ToleranceOptions& options = {});

// The quantity names in the order the band lists them first, for a design's transistors; the
// DC voltage of every named node follows them as "V(node)" (netlist node names).
std::vector<std::string> tolerance_quantities(const Design& design);

}  // namespace ampbench::circuit
