// Distribution transforms for Random; none of them uses <random>'s distributions, whose output
// differs between standard libraries.
#include "core/random.h"

#include <cmath>

namespace ampbench {

double Random::uniform01() {
    return static_cast<double>(engine_() >> 11) * (1.0 / 9007199254740992.0);  // 2^-53
}

double Random::normal() {
    if (have_spare_) {
        have_spare_ = false;
        return spare_;
    }
    double u = 0, v = 0, s = 0;
    do {
        u = 2.0 * uniform01() - 1.0;
        v = 2.0 * uniform01() - 1.0;
        s = u * u + v * v;
    } while (s >= 1.0 || s == 0.0);
    const double factor = std::sqrt(-2.0 * std::log(s) / s);
    spare_ = v * factor;
    have_spare_ = true;
    return u * factor;
}

std::int64_t Random::integer(std::int64_t lo, std::int64_t hi) {
    if (hi <= lo) return lo;
    const std::uint64_t span = static_cast<std::uint64_t>(hi - lo) + 1;
    if (span == 0) return static_cast<std::int64_t>(engine_());  // the full 64-bit range
    const std::uint64_t limit = UINT64_MAX - (UINT64_MAX % span);
    std::uint64_t x = 0;
    do {
        x = engine_();
    } while (x >= limit);
    return lo + static_cast<std::int64_t>(x % span);
}

}  // namespace ampbench
