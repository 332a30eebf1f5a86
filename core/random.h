// The seeded random source of DESIGN.md §5: std::mt19937_64 (whose output sequence the C++
// standard fixes) with the distribution transforms written here, so a seed replays the same
// numbers on any compiler and standard library.
#pragma once

#include <cstdint>
#include <random>

namespace ampbench {

class Random {
public:
    explicit Random(std::uint64_t seed) : engine_(seed) {}

    std::uint64_t next_u64() { return engine_(); }
    // Uniform on [0, 1) with 53 random bits.
    double uniform01();
    // Uniform on [lo, hi).
    double uniform(double lo, double hi) { return lo + (hi - lo) * uniform01(); }
    // Standard normal by the Marsaglia polar method (pairs; the second value is kept).
    double normal();
    double normal(double mean, double sd) { return mean + sd * normal(); }
    // Uniform integer on [lo, hi] without modulo bias (rejection sampling).
    std::int64_t integer(std::int64_t lo, std::int64_t hi);
    // True with probability p.
    bool bernoulli(double p) { return uniform01() < p; }
    // A new independent-looking stream derived from this one (for per-run sub-streams).
    Random split() { return Random(next_u64() ^ 0x9E3779B97F4A7C15ULL); }

private:
    std::mt19937_64 engine_;
    bool have_spare_ = false;
    double spare_ = 0.0;
};

}  // namespace ampbench
