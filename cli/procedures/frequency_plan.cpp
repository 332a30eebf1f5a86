// Frequency plan: log spacing, mains-harmonic clearance and corner refinement.
#include "cli/procedures/frequency_plan.h"

#include <algorithm>
#include <cmath>

#include "fit/circuit/predict.h"

namespace ampbench::procedures {

std::string FrequencyPlanOptions::validate() const {
    if (from_hz && !(*from_hz > 0)) return "from must be a positive frequency";
    if (to_hz && !(*to_hz > 0)) return "to must be a positive frequency";
    if (from_hz && to_hz && !(*to_hz > *from_hz)) return "to must be above from";
    if (per_decade < 1 || per_decade > 200) return "per-decade must lie in 1..200";
    if (!(mains_hz >= 0)) return "mains_hz must not be negative";
    if (!(corner_tolerance > 0 && corner_tolerance < 0.5)) return "corner tolerance must lie in (0, 0.5)";
    return {};
}

double clear_of_mains(double freq_hz, double mains_hz, int harmonics, double clearance) {
    if (!(mains_hz > 0)) return freq_hz;
    for (int h = 1; h <= harmonics; ++h) {
        const double m = mains_hz * h;
        if (std::abs(freq_hz - m) < clearance * m) {
            const double down = m * (1 - clearance * 1.05), up = m * (1 + clearance * 1.05);
            // Moving must not land on a neighbouring harmonic (only possible for tiny mains_hz).
            double moved = (freq_hz - down < up - freq_hz) ? down : up;
            for (int k = 1; k <= harmonics; ++k)
                if (k != h && std::abs(moved - mains_hz * k) < clearance * mains_hz * k) moved = (moved == down) ? up : down;
            return moved;
        }
    }
    return freq_hz;
}

std::vector<double> base_plan(const FrequencyPlanOptions& o, std::optional<double> f_low, std::optional<double> f_high) {
    const double lo = o.from_hz.value_or(f_low ? *f_low / 10 : 10.0);
    double hi = o.to_hz.value_or(f_high ? *f_high * 10 : 1e6);
    if (!(hi > lo)) hi = lo * 10;
    const int count = std::max(2, static_cast<int>(std::lround(std::log10(hi / lo) * o.per_decade)) + 1);
    std::vector<double> plan;
    for (double f : circuit::log_frequencies(lo, hi, count)) plan.push_back(clear_of_mains(f, o.mains_hz, o.mains_harmonics, o.mains_clearance));
    std::sort(plan.begin(), plan.end());
    plan.erase(std::unique(plan.begin(), plan.end(), [](double a, double b) { return std::abs(a / b - 1) < 1e-9; }), plan.end());
    return plan;
}

std::vector<double> adaptive_points(std::vector<MeasuredGain> m, const FrequencyPlanOptions& o) {
    std::vector<double> out;
    if (m.size() < 3) return out;
    std::sort(m.begin(), m.end(), [](const MeasuredGain& a, const MeasuredGain& b) { return a.freq_hz < b.freq_hz; });
    size_t peak = 0;
    for (size_t i = 1; i < m.size(); ++i)
        if (m[i].gain_db > m[peak].gain_db) peak = i;
    const double level = m[peak].gain_db - 20 * std::log10(std::sqrt(2.0));
    auto consider = [&](size_t a, size_t b) {
        const double ga = m[a].gain_db - level, gb = m[b].gain_db - level;
        if ((ga > 0) == (gb > 0)) return false;
        if (m[b].freq_hz / m[a].freq_hz - 1 <= o.corner_tolerance) return true;
        const double la = std::log(m[a].freq_hz), lb = std::log(m[b].freq_hz);
        const double x = la + (lb - la) * ga / (ga - gb);
        // Regula falsi alone keeps one end of the bracket fixed and shrinks it slowly; a pair of
        // points straddling the estimate, closer together than the tolerance, closes it at once
        // when the estimate is good and narrows the bracket for a better one when it is not.
        const double half = 0.4 * std::log1p(o.corner_tolerance);
        const double margin = (lb - la) * 0.05;
        for (double xi : {x - half, x + half}) {
            const double xc = std::clamp(xi, la + margin, lb - margin);
            double f = clear_of_mains(std::exp(xc), o.mains_hz, o.mains_harmonics, o.mains_clearance);
            if (f <= m[a].freq_hz || f >= m[b].freq_hz) f = std::sqrt(m[a].freq_hz * m[b].freq_hz);
            if (out.empty() || std::abs(out.back() / f - 1) > 1e-9) out.push_back(f);
        }
        return true;
    };
    for (size_t i = peak; i > 0; --i)
        if (consider(i - 1, i)) break;
    for (size_t i = peak; i + 1 < m.size(); ++i)
        if (consider(i, i + 1)) break;
    return out;
}

}  // namespace ampbench::procedures
