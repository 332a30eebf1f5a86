// Effective beta (DESIGN.md §5): β0 = g_m·r_π of a transistor at the operating point of the
// fitted circuit model, with the BF that produces it, the hFE it implies and a 95 % interval by
// the delta method over every fitted parameter (tolerance priors included), and a verdict on
// whether the measurement pins it down.
#pragma once

#include <optional>
#include <string>

#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/response/circuit_fit.h"

namespace ampbench::extract {

inline constexpr const char* kBetaIdentified = "identified";
inline constexpr const char* kBetaNotIdentifiable = "not identifiable";

struct BetaOptions {
    std::string transistor;             // "" = the first transistor whose beta is free
    double max_relative_halfwidth = 0.20;  // wider than ±20 % → not identifiable
    double max_correlation = 0.95;         // |ρ| with another free parameter above → not identifiable
};

struct EffectiveBeta {
    std::string transistor;  // "Q1"
    double beta0 = 0, ci_low = 0, ci_high = 0;  // β0 and its 95 % interval
    double sd_ln = 0;                            // standard uncertainty of ln β0
    double bf = 0, bf_ci_low = 0, bf_ci_high = 0;  // the model BF producing it
    double hfe = 0, hfe_ci_low = 0, hfe_ci_high = 0;  // I_C/I_B it implies
    double ic_a = 0, vce_v = 0;                  // the operating point it holds at
    std::string verdict;                         // kBetaIdentified or kBetaNotIdentifiable
    std::string reason;                          // why not identifiable ("" when identified)
    std::string advice;                          // what would make it identifiable
    std::string correlated_with;                 // the free parameter most correlated with beta
    double correlation = 0;
    std::string brief() const;
};

// From a circuit fit of `design` on `bench` (the same ones fit_circuit was given). A fit that
// is not usable, or one without the transistor's beta free, gives `not identifiable` with the
// reason. InputError when the named transistor is not in the design.
EffectiveBeta effective_beta(const fit::CircuitFit& fit, const circuit::Design& design,
                             const circuit::BenchLoading& bench, const BetaOptions& options = {});

}  // namespace ampbench::extract
