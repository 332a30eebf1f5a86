// Acceptance sampling by attributes: the probability that an (n, c) plan accepts a lot, by the
// binomial law (an endless stream of parts) and the hypergeometric law (a finite lot of N).
#pragma once

#include <optional>
#include <vector>

namespace ampbench::lot {

// A single-sampling plan: test n devices, accept the lot with at most c defectives.
struct SamplingPlan {
    long n = 0;
    long c = 0;
};

// P(X <= c) for X ~ Binomial(n, p): the plan's acceptance probability when each part is
// defective with probability p. Accurate for large n (no factorials are formed).
double accept_binomial(long n, long c, double p);

// P(X <= c) for X ~ Hypergeometric: a sample of n drawn without replacement from a lot of
// lot_size parts of which `defectives` are defective.
double accept_hypergeometric(long lot_size, long defectives, long n, long c);

// Point probabilities the sums above are made of (exposed for the tests).
double binomial_pmf(long k, long n, double p);
double hypergeometric_pmf(long k, long lot_size, long defectives, long n);

// The number of defectives a lot of lot_size holds at defective fraction p: round(p * N).
long lot_defectives(long lot_size, double p);

struct OcPoint {
    double p = 0.0;  // defective fraction
    double accept_binomial = 0.0;
    std::optional<long> lot_defectives;  // with a lot size only
    std::optional<double> accept_hypergeometric;
};

// The defective fractions an OC curve is tabulated at by default (0.5 % .. 30 %).
std::vector<double> default_oc_grid();

// The operating-characteristic curve of the plan over `grid`; hypergeometric values only when a
// lot size is given. Throws FitInputError for an invalid plan (n < 1, c < 0, c >= n, N < n).
std::vector<OcPoint> oc_curve(SamplingPlan plan, const std::vector<double>& grid,
                              std::optional<long> lot_size = std::nullopt);

// The defective fraction at which the plan accepts with probability `accept` (binomial law),
// by bisection; e.g. 0.95 gives the producer's-risk point, 0.10 the consumer's-risk point.
double fraction_at_acceptance(SamplingPlan plan, double accept);

}  // namespace ampbench::lot
