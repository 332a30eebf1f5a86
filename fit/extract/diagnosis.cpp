// Candidate faults scored by the circuit engine's response at the measured frequencies and its
// operating point at the metered nodes.
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
#include "fit/circuit/tolerance.h"

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

std::vector<double> dc_spread(const circuit::Design& design, const circuit::BenchLoading& bench, const DcEvidence& dc,
                              const DiagnosisOptions& o) {
    const size_t n = dc.nodes.size() + (dc.supply_current_a > 0 ? 1 : 0);
    std::vector<double> sum(n, 0.0), sum2(n, 0.0);
    int runs = 0;
    if (n == 0 || o.dc_spread_runs < 2) return std::vector<double>(n, 0.0);
    try {
        circuit::Netlist nl = circuit::build_netlist(design, bench);
        const circuit::OperatingPoint nominal = circuit::solve_operating_point(nl);
        std::vector<int> index;
        for (const auto& d : dc.nodes) index.push_back(nl.node_index(circuit::canonical_node(d.node)));
        for (const circuit::PartValues& v : circuit::draw_part_values(design, 1, o.dc_spread_runs)) {
            try {
                circuit::apply_values(v, nl);
                const circuit::OperatingPoint op = circuit::solve_operating_point(nl, {}, &nominal.x);
                for (size_t k = 0; k < n; ++k) {
                    const double x = k < index.size() ? (index[k] >= 0 ? op.node_volts[static_cast<size_t>(index[k])] : 0.0)
                                                      : op.supply_current_a;
                    sum[k] += x;
                    sum2[k] += x * x;
                }
                ++runs;
            } catch (const Error&) {
            }
        }
    } catch (const Error&) {
    }
    std::vector<double> sd(n, 0.0);
    if (runs < 2) return sd;
    const double nr = static_cast<double>(runs);
    for (size_t k = 0; k < n; ++k) {
        const double mean = sum[k] / nr;
        sd[k] = std::sqrt(std::max(0.0, (sum2[k] - nr * mean * mean) / (nr - 1)));
    }
    return sd;
}

double response_score(const circuit::Design& design, const circuit::BenchLoading& bench,
                      const std::vector<ResponseSample>& points, const DcEvidence& dc, const std::vector<double>& spread,
                      const DiagnosisOptions& o) {
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
        auto spread_of = [&](size_t k) { return k < spread.size() ? spread[k] : 0.0; };
        for (size_t k = 0; k < dc.nodes.size(); ++k) {
            const int idx = nl.node_index(circuit::canonical_node(dc.nodes[k].node));
            if (idx < 0) continue;
            // 1 mV floor: the meter's resolution is never the limit on a board's bias.
            const double sd = std::max(std::hypot(dc.nodes[k].u_v, spread_of(k)), 1e-3);
            const double r = (op.node_volts[static_cast<size_t>(idx)] - dc.nodes[k].volts) / sd;
            chi2 += r * r;
            ++n;
        }
        if (dc.supply_current_a > 0) {
            const double sd = std::max(std::hypot(dc.supply_current_u_a, spread_of(dc.nodes.size())), 1e-6);
            const double r = (op.supply_current_a - dc.supply_current_a) / sd;
            chi2 += r * r;
            ++n;
        }
        return n > 0 ? chi2 / n : std::numeric_limits<double>::infinity();
    } catch (const Error&) {
        return std::numeric_limits<double>::infinity();
    }
}

std::vector<FaultCandidate> diagnose(const circuit::Design& design, const circuit::BenchLoading& bench,
                                     const std::vector<ResponseSample>& points, const DcEvidence& dc,
                                     const DiagnosisOptions& o) {
    const std::vector<double> spread = dc_spread(design, bench, dc, o);
    std::vector<FaultCandidate> all;
    for (size_t i = 0; i < design.parts.size(); ++i) {
        const circuit::Part& part = design.parts[i];
        if (!is_passive(part.kind)) continue;
        for (const char* fault : {"open", "short"}) {
            circuit::Design d = design;
            d.parts[i].kind = circuit::PartKind::resistor;
            d.parts[i].value = std::string(fault) == "open" ? kOpenOhms : kShortOhms;
            FaultCandidate c{part.ref, fault, d.parts[i].value, part.value, fmt::format("{} {}", part.ref, fault), 0};
            c.score = response_score(d, bench, points, dc, spread, o);
            if (std::isfinite(c.score)) all.push_back(c);
        }
        // Value change: a coarse log grid, then golden-section refinement around the best.
        auto score_at = [&](double log_scale) {
            circuit::Design d = design;
            d.parts[i].value = part.value * std::exp(log_scale);
            return response_score(d, bench, points, dc, spread, o);
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
