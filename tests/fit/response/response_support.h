// Synthetic gain data from a known rational model, shared by the response-fit tests.
#pragma once

#include <vector>

#include "core/random.h"
#include "fit/response/gain_points.h"
#include "fit/response/rational_model.h"

namespace ampbench::fit::testing {

// Points log-spaced from f_lo to f_hi, optionally with Gaussian noise of sd_db and sd_deg
// (then the sds are recorded in the data) and phase wrapped into (−180°, 180°].
GainData synthetic_gain(const RationalOrder& order, double sign, const std::vector<double>& p, double f_lo,
                        double f_hi, int points, Random* rng, double sd_db, double sd_deg, bool wrap_phase,
                        bool with_phase = true);

}  // namespace ampbench::fit::testing
