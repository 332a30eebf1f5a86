// Monte Carlo tolerance band: one netlist, one AC workspace and one operating-point guess reused
// across runs; percentiles by sorting; sensitivities by least squares on the drawn deviations.
#include "fit/circuit/tolerance.h"

#include <algorithm>
#include <cmath>
#include <optional>

#include <Eigen/Dense>
#include <fmt/format.h>

#include "core/errors.h"
#include "core/random.h"

namespace ampbench::circuit {
namespace {

// Which design parts vary, and how.
struct Varied {
    size_t part;
    bool beta;  // uniform over beta_range instead of a normal tolerance
    double nominal, tol, lo, hi;
};

std::vector<Varied> varied_parts(const Design& d) {
    std::vector<Varied> out;
    for (size_t i = 0; i < d.parts.size(); ++i) {
        const Part& p = d.parts[i];
        if (is_transistor(p.kind)) {
            const TransistorModel& m = d.model_of(p);
            if (m.beta_low && m.beta_high && *m.beta_high > *m.beta_low)
                out.push_back({i, true, m.beta, 0, *m.beta_low, *m.beta_high});
        } else if (p.tolerance > 0) {
            out.push_back({i, false, p.value, p.tolerance, 0, 0});
        }
    }
    return out;
}

// Linear-interpolated percentile of sorted data (q in [0, 1]).
double percentile(const std::vector<double>& sorted, double q) {
    if (sorted.empty()) return NAN;
    const double pos = q * static_cast<double>(sorted.size() - 1);
    const size_t i = static_cast<size_t>(std::floor(pos));
    const size_t j = std::min(i + 1, sorted.size() - 1);
    return sorted[i] + (pos - static_cast<double>(i)) * (sorted[j] - sorted[i]);
}

// The nodes whose DC voltage gets a band: every named node (internal base nodes excluded).
std::vector<int> banded_nodes(const Netlist& nl) {
    std::vector<int> nodes;
    for (int i = 1; i < nl.node_count(); ++i)
        if (nl.node_names[static_cast<size_t>(i)].find('#') == std::string::npos) nodes.push_back(i);
    return nodes;
}

std::vector<std::optional<double>> quantities_of(const Response& r, const OperatingPoint& op,
                                                 double nominal_phase, const std::vector<int>& nodes) {
    // Phase unwrapped to within ±180° of the nominal so an inverting stage does not split
    // between +179° and −179°.
    double phase = r.midband_phase_deg;
    while (phase - nominal_phase > 180) phase -= 360;
    while (phase - nominal_phase < -180) phase += 360;
    std::vector<std::optional<double>> q{r.midband_gain,
                                         r.midband_gain_db,
                                         phase,
                                         r.midband_freq_hz,
                                         r.peaking_db,
                                         r.f_low_hz,
                                         r.f_high_hz,
                                         r.input_impedance_ohm,
                                         r.output_impedance_ohm,
                                         r.max_output_vpp,
                                         op.supply_current_a};
    for (const auto& t : op.transistors) q.emplace_back(t.ic_a);
    for (int n : nodes) q.emplace_back(op.node_volts[static_cast<size_t>(n)]);
    return q;
}

}  // namespace

const QuantityBand* ToleranceBand::find(const std::string& name) const {
    for (const auto& q : quantities)
        if (q.name == name) return &q;
    return nullptr;
}

std::vector<std::string> tolerance_quantities(const Design& design) {
    std::vector<std::string> names{"midband_gain",     "midband_gain_db", "midband_phase_deg",
                                   "midband_freq_hz",  "peaking_db",      "f_low_hz",
                                   "f_high_hz",        "input_impedance_ohm",
                                   "output_impedance_ohm", "max_output_vpp", "supply_current_a"};
    for (const auto& p : design.parts)
        if (is_transistor(p.kind)) names.push_back(p.ref + ".ic_a");
    return names;
}

std::vector<PartValues> draw_part_values(const Design& design, std::uint64_t seed, int runs) {
    const std::vector<Varied> varied = varied_parts(design);
    const PartValues nominal = nominal_values(design);
    std::vector<PartValues> out(static_cast<size_t>(std::max(0, runs)), nominal);
    Random master(seed);
    for (auto& values : out) {
        // One sub-stream per run, so run r does not depend on how many draws earlier runs took.
        Random rng = master.split();
        for (const Varied& v : varied) {
            double x = 0;
            if (v.beta) {
                x = rng.uniform(v.lo, v.hi);
            } else {
                double z = 0;
                do z = rng.normal(); while (std::abs(z) > 3.0);
                x = v.nominal * (1 + z * v.tol / 3.0);
            }
            values.value[v.part] = x;
        }
    }
    return out;
}

ToleranceBand tolerance_band(const Design& design, const BenchLoading& bench,
                             const ToleranceOptions& opt) {
    if (opt.runs < 2) throw InputError("", "--monte-carlo", "needs at least 2 runs");
    if (!(opt.coverage > 0 && opt.coverage < 1))
        throw InputError("", "coverage", "must lie between 0 and 1");
    ToleranceBand band;
    band.runs = opt.runs;
    band.seed = opt.seed;
    band.coverage = opt.coverage;

    Netlist nl = build_netlist(design, bench);
    const Prediction nominal = predict(nl, opt.predict);
    std::vector<std::string> names = tolerance_quantities(design);
    const std::vector<int> nodes = banded_nodes(nl);
    for (int n : nodes) names.push_back("V(" + nl.node_names[static_cast<size_t>(n)] + ")");
    const auto nominal_q =
        quantities_of(nominal.response, nominal.op, nominal.response.midband_phase_deg, nodes);

    const std::vector<Varied> varied = varied_parts(design);
    const std::vector<PartValues> draws = draw_part_values(design, opt.seed, opt.runs);
    const size_t nq = names.size();
    std::vector<std::vector<double>> samples(nq);
    std::vector<std::vector<int>> sample_run(nq);
    for (auto& s : samples) s.reserve(draws.size());

    AcAnalysis ac(nl, nominal.op);
    for (size_t r = 0; r < draws.size(); ++r) {
        apply_values(draws[r], nl);
        OperatingPoint op;
        try {
            op = solve_operating_point(nl, opt.predict.dc, &nominal.op.x);
        } catch (const InputError&) {
            ++band.failed_runs;
            continue;
        }
        ac.update(nl, op);
        const Response resp = predict_response(ac, nl, op, opt.predict);
        const auto q = quantities_of(resp, op, nominal.response.midband_phase_deg, nodes);
        for (size_t k = 0; k < nq; ++k)
            if (q[k] && std::isfinite(*q[k])) {
                samples[k].push_back(*q[k]);
                sample_run[k].push_back(static_cast<int>(r));
            }
    }

    const double tail = (1 - opt.coverage) / 2;
    for (size_t k = 0; k < nq; ++k) {
        QuantityBand qb;
        qb.name = names[k];
        qb.nominal = nominal_q[k] ? *nominal_q[k] : NAN;
        qb.samples = static_cast<int>(samples[k].size());
        std::vector<double> sorted = samples[k];
        std::sort(sorted.begin(), sorted.end());
        qb.low = percentile(sorted, tail);
        qb.median = percentile(sorted, 0.5);
        qb.high = percentile(sorted, 1 - tail);
        band.quantities.push_back(qb);

        // Sensitivity: regress the quantity on every varied part's relative deviation.
        const int m = qb.samples;
        const int p = static_cast<int>(varied.size());
        if (p == 0 || m < p + 2) continue;
        Eigen::MatrixXd a(m, p + 1);
        Eigen::VectorXd y(m);
        for (int i = 0; i < m; ++i) {
            const PartValues& v = draws[static_cast<size_t>(sample_run[k][i])];
            a(i, 0) = 1.0;
            for (int j = 0; j < p; ++j)
                a(i, j + 1) = v.value[varied[j].part] / varied[j].nominal - 1.0;
            y[i] = samples[k][i];
        }
        const Eigen::VectorXd coef = a.colPivHouseholderQr().solve(y);
        std::vector<std::pair<double, int>> parts;
        double total = 0;
        for (int j = 0; j < p; ++j) {
            const Eigen::VectorXd col = a.col(j + 1);
            const double var = (col.array() - col.mean()).square().sum() / (m - 1);
            const double contribution = coef[j + 1] * coef[j + 1] * var;
            total += contribution;
            parts.emplace_back(contribution, j);
        }
        if (!(total > 0)) continue;
        std::sort(parts.begin(), parts.end(), [](auto& l, auto& r) { return l.first > r.first; });
        for (const auto& [contribution, j] : parts) {
            const double share = contribution / total;
            if (share < 0.01) break;
            band.sensitivity.push_back(
                {names[k], design.parts[varied[static_cast<size_t>(j)].part].ref, share});
        }
    }
    return band;
}

}  // namespace ampbench::circuit
