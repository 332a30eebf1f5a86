// Candidate faults scored by the circuit engine's response at the measured frequencies.
#include "fit/extract/diagnosis.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <numbers>

#include <fmt/format.h>

#include "core/errors.h"
#include "core/value.h"
#include "fit/circuit/ac.h"
#include "fit/circuit/dc.h"

namespace ampbench::extract {
namespace {

constexpr double kOpenOhms = 1e9, kShortOhms = 1e-3;  // as the virtual bench models them

double wrap_deg(double d) {
    d = std::fmod(d + 180.0, 360.0);
    if (d <= 0) d += 360.0;
    return d - 180.0;
}

const char* unit_of(circuit::PartKind k) {
    switch (k) {
        case circuit::PartKind::resistor: return "Ω";
        case circuit::PartKind::capacitor: return "F";
        case circuit::PartKind::inductor: return "H";
        default: return "";
    }
}

bool is_passive(circuit::PartKind k) {
    return k == circuit::PartKind::resistor || k == circuit::PartKind::capacitor || k == circuit::PartKind::inductor;
}

}  // namespace

double response_score(const circuit::Design& design, const circuit::BenchLoading& bench,
                      const std::vector<ResponseSample>& points, const DiagnosisOptions& o) {
    try {
        const circuit::Netlist nl = circuit::build_netlist(design, bench);
        const circuit::OperatingPoint op = circuit::solve_operating_point(nl);
        circuit::AcAnalysis ac(nl, op);
        double chi2 = 0;
        int n = 0;
        for (const ResponseSample& p : points) {
            const std::complex<double> h = ac.gain(p.freq_hz);
            const double mag = std::abs(h);
            if (!(mag > 0) || !std::isfinite(mag)) return std::numeric_limits<double>::infinity();
            const double sd_db = std::max(p.gain_db_sd, o.gain_sd_floor_db);
            const double r_db = (20 * std::log10(mag) - p.gain_db) / sd_db;
            chi2 += r_db * r_db;
            ++n;
            if (p.has_phase) {
                const double sd_deg = std::max(p.phase_deg_sd, o.phase_sd_floor_deg);
                const double r_deg = wrap_deg(std::arg(h) * 180 / std::numbers::pi - p.phase_deg) / sd_deg;
                chi2 += r_deg * r_deg;
                ++n;
            }
        }
        return n > 0 ? chi2 / n : std::numeric_limits<double>::infinity();
    } catch (const Error&) {
        return std::numeric_limits<double>::infinity();
    }
}

std::vector<FaultCandidate> diagnose(const circuit::Design& design, const circuit::BenchLoading& bench,
                                     const std::vector<ResponseSample>& points, const DiagnosisOptions& o) {
    std::vector<FaultCandidate> all;
    for (size_t i = 0; i < design.parts.size(); ++i) {
        const circuit::Part& part = design.parts[i];
        if (!is_passive(part.kind)) continue;
        for (const char* fault : {"open", "short"}) {
            circuit::Design d = design;
            d.parts[i].kind = circuit::PartKind::resistor;
            d.parts[i].value = std::string(fault) == "open" ? kOpenOhms : kShortOhms;
            FaultCandidate c{part.ref, fault, d.parts[i].value, part.value, fmt::format("{} {}", part.ref, fault), 0};
            c.score = response_score(d, bench, points, o);
            if (std::isfinite(c.score)) all.push_back(c);
        }
        // Value change: a coarse log grid, then golden-section refinement around the best.
        auto score_at = [&](double log_scale) {
            circuit::Design d = design;
            d.parts[i].value = part.value * std::exp(log_scale);
            return response_score(d, bench, points, o);
        };
        const double lo = std::log(o.min_scale), hi = std::log(o.max_scale);
        const int grid = 24;
        double best_x = 0, best = score_at(0);
        for (int g = 0; g <= grid; ++g) {
            const double x = lo + (hi - lo) * g / grid;
            const double s = score_at(x);
            if (s < best) best = s, best_x = x;
        }
        const double step = (hi - lo) / grid;
        double a = best_x - step, b = best_x + step;
        const double phi = (std::sqrt(5.0) - 1) / 2;
        double x1 = b - phi * (b - a), x2 = a + phi * (b - a), s1 = score_at(x1), s2 = score_at(x2);
        for (int it = 0; it < 18; ++it) {
            if (s1 < s2) {
                b = x2, x2 = x1, s2 = s1, x1 = b - phi * (b - a), s1 = score_at(x1);
            } else {
                a = x1, x1 = x2, s1 = s2, x2 = a + phi * (b - a), s2 = score_at(x2);
            }
        }
        const double x = s1 < s2 ? x1 : x2, s = std::min(s1, s2);
        if (s < best) best = s, best_x = x;
        if (!std::isfinite(best)) continue;
        const double v = part.value * std::exp(best_x);
        all.push_back({part.ref, "value", v, part.value,
                       fmt::format("{} = {} (design {})", part.ref, format_eng(v, unit_of(part.kind), 3),
                                   format_eng(part.value, unit_of(part.kind), 3)),
                       best});
    }
    std::sort(all.begin(), all.end(), [](const FaultCandidate& l, const FaultCandidate& r) { return l.score < r.score; });
    // Keep only the best candidate per part, so the two named are two different explanations.
    std::vector<FaultCandidate> out;
    for (const FaultCandidate& c : all) {
        if (static_cast<int>(out.size()) >= o.keep) break;
        if (std::none_of(out.begin(), out.end(), [&](const FaultCandidate& k) { return k.ref == c.ref; })) out.push_back(c);
    }
    return out;
}

}  // namespace ampbench::extract
