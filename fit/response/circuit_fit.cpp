// Circuit-model fit: parameters mapped onto the netlist, residuals on dB and wrapped phase plus
// one prior row per nuisance parameter, LM in ln(value), and the derived quantities of
// DESIGN.md §5 with delta-method intervals over every fitted parameter (nuisance included).
#include "fit/response/circuit_fit.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <numbers>

#include <fmt/format.h>
#include <fmt/ranges.h>

#include "core/errors.h"
#include "fit/circuit/ac.h"
#include "fit/circuit/predict.h"
#include "fit/response/rational_model.h"

namespace ampbench::fit {
namespace {

constexpr double db_per_neper = 20.0 / std::numbers::ln10;
constexpr double deg_per_rad = 180.0 / std::numbers::pi;

// What a parameter moves in the netlist.
enum class Target { part_value, bf, is, rb, vaf, tf, cje, cjc };

struct Slot {
    Target target = Target::part_value;
    int part = -1;        // Design::parts index
    int transistor = -1;  // Netlist::transistors index
};

std::string trim(const std::string& s) {
    const auto b = s.find_first_not_of(" \t");
    if (b == std::string::npos) return {};
    const auto e = s.find_last_not_of(" \t");
    return s.substr(b, e - b + 1);
}

}  // namespace

std::vector<std::string> parse_free_list(const std::string& text) {
    std::vector<std::string> out;
    std::size_t start = 0;
    while (start <= text.size()) {
        const std::size_t comma = std::min(text.find(',', start), text.size());
        std::string item = trim(text.substr(start, comma - start));
        if (!item.empty()) out.push_back(item);
        start = comma + 1;
    }
    return out;
}

struct CircuitModel::Impl {
    circuit::Design design;
    circuit::Netlist nl;
    circuit::PartValues values;
    std::vector<CircuitParameter> params;
    std::vector<Slot> slots;
    circuit::OperatingPoint op;
    std::vector<double> guess;
    std::optional<circuit::AcAnalysis> ac;
    circuit::DcOptions dc;
    std::vector<double> key;  // the DC inputs of the netlist now
    struct Cached {
        bool valid = false;
        std::vector<double> key;
        circuit::OperatingPoint op;
    };
    std::array<Cached, 2> cache;
    std::size_t next_slot = 0;

    int transistor_of(int part) const {
        for (std::size_t k = 0; k < nl.transistors.size(); ++k)
            if (nl.transistors[k].part == part) return static_cast<int>(k);
        return -1;
    }

    // The slot a name stands for, or an InputError naming the design and the name.
    std::pair<Slot, double> resolve(const std::string& name) const {
        const std::size_t dot = name.find('.');
        const std::string ref = name.substr(0, dot);
        const circuit::Part* part = design.find_part(ref);
        if (!part) throw InputError(design.path, "--free", fmt::format("no part '{}' in the design", ref));
        const int index = static_cast<int>(part - design.parts.data());
        Slot s;
        s.part = index;
        if (!circuit::is_transistor(part->kind)) {
            if (dot != std::string::npos)
                throw InputError(design.path, "--free",
                                 fmt::format("'{}': only a transistor has named parameters; give the part ref alone", name));
            if (!(part->value > 0))
                throw InputError(design.path, "--free", fmt::format("'{}' has no positive value to fit", ref));
            return {s, part->value};
        }
        s.transistor = transistor_of(index);
        const std::string what = dot == std::string::npos ? "beta" : name.substr(dot + 1);
        const circuit::BjtParams& bp = nl.transistors[static_cast<std::size_t>(s.transistor)].params;
        double v = 0;
        if (what == "beta" || what == "bf") s.target = Target::bf, v = bp.bf;
        else if (what == "is") s.target = Target::is, v = bp.is_a;
        else if (what == "rb") s.target = Target::rb, v = bp.rb_ohm;
        else if (what == "vaf") s.target = Target::vaf, v = bp.vaf_v;
        else if (what == "tf") s.target = Target::tf, v = bp.tf_s;
        else if (what == "cje") s.target = Target::cje, v = bp.cje_f;
        else if (what == "cjc") s.target = Target::cjc, v = bp.cjc_f;
        else
            throw InputError(design.path, "--free",
                             fmt::format("'{}': unknown transistor parameter '{}' (beta, is, rb, vaf, tf, cje, cjc)", name, what));
        if (!(v > 0))
            throw InputError(design.path, "--free",
                             fmt::format("'{}' is 0 in the model; only a positive value can be fitted (in log)", name));
        return {s, v};
    }

    void add(const std::string& name, bool is_free, double sd_ln) {
        for (const CircuitParameter& p : params)
            if (p.name == name) {
                if (is_free) throw InputError(design.path, "--free", fmt::format("'{}' named twice", name));
                return;
            }
        const auto [slot, value] = resolve(name);
        for (const Slot& other : slots)
            if (other.part == slot.part && other.target == slot.target)
                throw InputError(design.path, "--free", fmt::format("'{}' names a parameter already free", name));
        params.push_back({name, value, is_free, is_free ? 0.0 : sd_ln});
        slots.push_back(slot);
    }
};

CircuitModel::CircuitModel(const circuit::Design& design, const circuit::BenchLoading& bench,
                           const std::vector<std::string>& free)
    : impl_(std::make_unique<Impl>()) {
    Impl& m = *impl_;
    m.design = design;
    m.nl = circuit::build_netlist(design, bench);
    m.values = circuit::nominal_values(design);
    m.dc.reltol = 1e-12;
    for (const std::string& name : free) m.add(name, true, 0.0);
    // Nuisance parameters: σ = tol/3 (common practice: a marked tolerance covers about ±3σ of
    // production, the convention of the tolerance band); BF uniform over beta_range, whose
    // standard deviation in ln is (ln hi − ln lo)/√12.
    for (const circuit::Part& p : design.parts) {
        if (circuit::is_transistor(p.kind)) {
            const circuit::TransistorModel& tm = design.model_of(p);
            if (tm.beta_low && tm.beta_high && *tm.beta_high > *tm.beta_low && *tm.beta_low > 0)
                m.add(p.ref + ".beta", false, (std::log(*tm.beta_high) - std::log(*tm.beta_low)) / std::sqrt(12.0));
        } else if (p.tolerance > 0 && p.value > 0) {
            m.add(p.ref, false, std::log1p(p.tolerance) / 3.0);
        }
    }
}

CircuitModel::CircuitModel(CircuitModel&&) noexcept = default;
CircuitModel& CircuitModel::operator=(CircuitModel&&) noexcept = default;
CircuitModel::~CircuitModel() = default;

const std::vector<CircuitParameter>& CircuitModel::parameters() const { return impl_->params; }

std::vector<double> CircuitModel::nominal() const {
    std::vector<double> v;
    for (const CircuitParameter& p : impl_->params) v.push_back(p.nominal);
    return v;
}

bool CircuitModel::set(std::span<const double> p) {
    Impl& m = *impl_;
    circuit::PartValues values = m.values;
    for (std::size_t j = 0; j < m.slots.size(); ++j)
        if (m.slots[j].target == Target::part_value || m.slots[j].target == Target::bf)
            values.value[static_cast<std::size_t>(m.slots[j].part)] = p[j];
    circuit::apply_values(values, m.nl);
    for (std::size_t j = 0; j < m.slots.size(); ++j) {
        const Slot& s = m.slots[j];
        if (s.transistor < 0) continue;
        circuit::BjtParams& bp = m.nl.transistors[static_cast<std::size_t>(s.transistor)].params;
        switch (s.target) {
            case Target::is: bp.is_a = p[j]; break;
            case Target::rb: bp.rb_ohm = p[j]; break;
            case Target::vaf: bp.vaf_v = p[j]; break;
            case Target::tf: bp.tf_s = p[j]; break;
            case Target::cje: bp.cje_f = p[j]; break;
            case Target::cjc: bp.cjc_f = p[j]; break;
            default: break;
        }
    }
    // The operating point depends on the resistors, the sources and the transistors' DC
    // parameters only: when none of them moved since the last solve (a capacitor, TF or a
    // junction capacitance did), keep it and re-evaluate only the charges at the same bias.
    m.key.clear();
    for (const auto& r : m.nl.resistors) m.key.push_back(r.ohms);
    for (const auto& v : m.nl.vsources) m.key.push_back(v.volts);
    for (const auto& i : m.nl.isources) m.key.push_back(i.amps);
    for (const auto& t : m.nl.transistors)
        m.key.insert(m.key.end(), {t.params.bf, t.params.is_a, t.params.rb_ohm, t.params.vaf_v, t.params.br, t.params.nf});
    Impl::Cached* hit = nullptr;
    for (Impl::Cached& c : m.cache)
        if (c.valid && c.key == m.key) hit = &c;
    if (hit) {
        m.op = hit->op;
        for (std::size_t k = 0; k < m.nl.transistors.size(); ++k) {
            circuit::BjtOperatingPoint& t = m.op.transistors[k];
            t.eval = circuit::evaluate_bjt(m.nl.transistors[k].params, t.vbe_internal, t.vbc_internal, m.nl.vt);
        }
    } else {
        try {
            m.op = circuit::solve_operating_point(m.nl, m.dc, m.guess.empty() ? nullptr : &m.guess);
        } catch (const Error&) {
            try {
                m.op = circuit::solve_operating_point(m.nl, m.dc);
            } catch (const Error&) {
                return false;
            }
        }
        // Keep the two latest solutions: a finite-difference step of a capacitor then finds
        // the operating point of the base point even after a resistor's step moved it.
        Impl::Cached& slot = m.cache[m.next_slot];
        m.next_slot = 1 - m.next_slot;
        slot.valid = true;
        slot.key = m.key;
        slot.op = m.op;
    }
    m.guess = m.op.x;
    if (m.ac)
        m.ac->update(m.nl, m.op);
    else
        m.ac.emplace(m.nl, m.op, circuit::AcMethod::direct);
    return true;
}

std::complex<double> CircuitModel::gain(double freq_hz) { return impl_->ac->gain(freq_hz); }
void CircuitModel::gains(std::span<const double> freq_hz, std::span<std::complex<double>> out) {
    impl_->ac->gains(freq_hz, out);
}
const circuit::OperatingPoint& CircuitModel::operating_point() const { return impl_->op; }
const circuit::Netlist& CircuitModel::netlist() const { return impl_->nl; }

namespace {

// Data rows (dB, then wrapped phase), one prior row per nuisance parameter, then one row per
// DC reading.
class CircuitResiduals : public ResidualModel {
public:
    CircuitResiduals(CircuitModel& model, const GainData& data, double sd_db, double sd_deg, bool priors,
                     const std::vector<int>& dc_nodes, const std::vector<DcReading>& dc)
        : model_(model), data_(data), priors_(priors), dc_nodes_(dc_nodes), dc_(dc) {
        for (const GainPoint& pt : data.points) {
            freqs_.push_back(pt.freq_hz);
            sd_db_.push_back(data.has_sd ? pt.gain_db_sd : sd_db);
            sd_deg_.push_back(data.has_sd && data.has_phase ? pt.phase_deg_sd : sd_deg);
        }
        h_.resize(freqs_.size());
        for (const CircuitParameter& p : model.parameters())
            if (!p.free && priors_) ++prior_count_;
    }
    std::size_t data_rows() const { return data_.points.size() * (data_.has_phase ? 2 : 1); }
    std::size_t residual_count() const override { return data_rows() + prior_count_ + dc_.size(); }

    void residuals(std::span<const double> p, std::span<double> r) const override { evaluate(p, r); }

    // Central differences in ln p. The model is smooth to rounding (a Newton-converged DC
    // point, a direct complex solve per frequency), so h = 1e-5 leaves truncation and round-off
    // both near 1e-10 relative.
    bool jacobian(std::span<const double> p, std::span<double> jac) const override {
        const std::size_t m = residual_count(), n = p.size();
        up_.resize(m);
        down_.resize(m);
        std::vector<double> q(p.begin(), p.end());
        const double h = 1e-5;
        for (std::size_t j = 0; j < n; ++j) {
            q[j] = p[j] * std::exp(h);
            evaluate(q, up_);
            q[j] = p[j] * std::exp(-h);
            evaluate(q, down_);
            q[j] = p[j];
            for (std::size_t i = 0; i < m; ++i) jac[i * n + j] = (up_[i] - down_[i]) / (2 * h * p[j]);
        }
        // Leave the model at p (gain() and operating_point() answer for the last set()).
        model_.set(p);
        return true;
    }

private:
    void evaluate(std::span<const double> p, std::span<double> r) const {
        const std::size_t n = data_.points.size();
        if (!model_.set(p)) {
            std::fill(r.begin(), r.end(), std::numeric_limits<double>::quiet_NaN());
            return;
        }
        model_.gains(freqs_, h_);
        for (std::size_t i = 0; i < n; ++i) {
            const GainPoint& pt = data_.points[i];
            const std::complex<double> h = h_[i];
            const double mag = std::sqrt(h.real() * h.real() + h.imag() * h.imag());
            r[i] = (20.0 * std::log10(mag) - pt.gain_db) / sd_db_[i];
            if (data_.has_phase) r[n + i] = wrap_deg(std::atan2(h.imag(), h.real()) * deg_per_rad - pt.phase_deg) / sd_deg_[i];
        }
        std::size_t row = data_rows();
        for (std::size_t j = 0; j < model_.parameters().size() && priors_; ++j) {
            const CircuitParameter& par = model_.parameters()[j];
            if (par.free) continue;
            r[row++] = (std::log(p[j]) - std::log(par.nominal)) / par.prior_sd_ln;
        }
        const std::vector<double>& volts = model_.operating_point().node_volts;
        for (std::size_t k = 0; k < dc_.size(); ++k)
            r[row++] = (volts[static_cast<std::size_t>(dc_nodes_[k])] - dc_[k].volts) / dc_[k].sd_volts;
    }

    CircuitModel& model_;
    const GainData& data_;
    bool priors_;
    std::vector<int> dc_nodes_;
    std::vector<DcReading> dc_;
    std::vector<double> sd_db_, sd_deg_, freqs_;
    mutable std::vector<std::complex<double>> h_;
    std::size_t prior_count_ = 0;
    mutable std::vector<double> up_, down_;
};

struct Quantities {
    double peak_db = 0, ln_low = 0, ln_high = 0, ln_mid = 0, peaking_db = 0, mid_phase_deg = 0;
    bool has_low = false, has_high = false, ok = false;
};

Quantities quantities(CircuitModel& model, std::span<const double> p, double f_min, double f_max) {
    Quantities q;
    if (!model.set(p)) return q;
    circuit::PredictOptions opt;
    opt.f_min_hz = f_min;
    opt.f_max_hz = f_max;
    opt.points_per_decade = 40;
    circuit::AcAnalysis ac(model.netlist(), model.operating_point());
    const circuit::Response r = circuit::predict_response(ac, model.netlist(), model.operating_point(), opt);
    q.ok = true;
    q.peak_db = r.midband_gain_db;
    q.has_low = r.f_low_hz.has_value();
    q.has_high = r.f_high_hz.has_value();
    q.ln_low = q.has_low ? std::log(*r.f_low_hz) : 0.0;
    q.ln_high = q.has_high ? std::log(*r.f_high_hz) : 0.0;
    q.ln_mid = std::log(r.midband_freq_hz);
    q.peaking_db = r.peaking_db;
    q.mid_phase_deg = r.midband_phase_deg;
    return q;
}

void fill_derived(CircuitFit& fit, CircuitModel& model) {
    const std::vector<double> p = fit.report.values();
    const Quantities q0 = quantities(model, p, fit.f_min_hz, fit.f_max_hz);
    if (!q0.ok) return;
    // Delta method over every fitted parameter, in ln p (all circuit parameters are log-scale).
    const std::vector<double> variance = delta_method_variance(
        [&](std::span<const double> q, std::span<double> out) {
            const Quantities qq = quantities(model, q, fit.f_min_hz, fit.f_max_hz);
            const std::array<double, 5> v{qq.peak_db, qq.ln_low, qq.ln_high, qq.ln_mid, qq.peaking_db};
            std::copy(v.begin(), v.end(), out.begin());
            return qq.ok;
        },
        5, p, fit.report.free_index, fit.report.working_covariance,
        std::vector<bool>(fit.report.free_index.size(), true));
    model.set(p);
    auto sd_of = [&](std::size_t c) { return variance.empty() ? 0.0 : std::sqrt(variance[c]); };
    const double t = fit.report.coverage_factor;
    auto linear = [&](double value, std::size_t c) {
        const double sd = sd_of(c);
        return DerivedValue{true, value, sd, value - t * sd, value + t * sd};
    };
    auto logarithmic = [&](double ln_value, std::size_t c) {
        const double v = std::exp(ln_value), sd = sd_of(c);
        return DerivedValue{true, v, v * sd, v * std::exp(-t * sd), v * std::exp(t * sd)};
    };
    fit.midband_gain_db = linear(q0.peak_db, 0);
    fit.peaking_db = linear(q0.peaking_db, 4);
    fit.midband_freq_hz = logarithmic(q0.ln_mid, 3);
    if (q0.has_low)
        fit.f_low_hz = logarithmic(q0.ln_low, 1);
    else
        fit.notes.push_back("f_low not reached: the fitted model does not fall 3 dB below its maximum within the measured range");
    if (q0.has_high)
        fit.f_high_hz = logarithmic(q0.ln_high, 2);
    else
        fit.notes.push_back("f_high not reached: the fitted model does not fall 3 dB below its maximum within the measured range");
    if (!fit.magnitude_only) fit.inverting = std::abs(q0.mid_phase_deg) > 90.0;
}

std::vector<Parameter> lsq_parameters(const CircuitModel& model, const std::vector<double>& start, bool nuisance_free) {
    std::vector<Parameter> out;
    const auto& cp = model.parameters();
    for (std::size_t j = 0; j < cp.size(); ++j) {
        Parameter par{cp[j].name, start[j]};
        par.log_scale = true;
        par.fixed = !cp[j].free && !nuisance_free;
        out.push_back(par);
    }
    return out;
}

}  // namespace

CircuitFit fit_circuit(const circuit::Design& design, const circuit::BenchLoading& bench, const GainData& raw,
                       const CircuitFitOptions& options) {
    if (!(options.confidence > 0 && options.confidence < 1))
        throw FitInputError("circuit fit: confidence must lie in (0, 1)");
    if (!(options.tolerance >= 1e-15 && options.tolerance < 1))
        throw FitInputError("circuit fit: tolerance must lie in [1e-15, 1)");
    const GainData data = prepare_gain_data(raw);
    std::vector<std::string> free = options.free;
    if (free.empty()) {
        for (const circuit::Part& p : design.parts)
            if (circuit::is_transistor(p.kind)) {
                free.push_back(p.ref + ".beta");
                break;
            }
        if (free.empty())
            throw InputError(design.path, "--free", "the design has no transistor; name the parameters to fit");
    }
    CircuitModel model(design, bench, free);
    const std::string origin = data.origin.empty() ? "gain points" : data.origin;
    // DC readings: each names a node of the design and carries a positive uncertainty.
    std::vector<int> dc_nodes;
    for (const DcReading& d : options.dc_readings) {
        const int node = model.netlist().node_index(d.node);
        if (node < 0 || d.node.find('#') != std::string::npos)
            throw InputError(design.path, "dc_readings", fmt::format("no node '{}' in the design for a DC reading", d.node));
        if (!std::isfinite(d.volts) || !(d.sd_volts > 0) || !std::isfinite(d.sd_volts))
            throw InputError(design.path, "dc_readings",
                             fmt::format("the DC reading of node '{}' needs a finite value and a positive uncertainty", d.node));
        dc_nodes.push_back(node);
    }
    const std::size_t rows = data.points.size() * (data.has_phase ? 2 : 1) + options.dc_readings.size();
    if (rows <= free.size())
        throw FitInputError(fmt::format("{}: {} points cannot determine the {} free circuit parameters", origin,
                                        data.points.size(), free.size()));

    CircuitFit fit;
    fit.parameters = model.parameters();
    fit.magnitude_only = !data.has_phase;
    fit.f_min_hz = data.points.front().freq_hz;
    fit.f_max_hz = data.points.back().freq_hz;
    if (fit.magnitude_only) fit.notes.push_back("magnitude-only data: only |H| is fitted");

    std::vector<double> start = model.nominal();
    if (!model.set(start)) {
        fit.report.status = FitStatus::diverged;
        fit.report.message = fmt::format("{}: no DC operating point at the design values", design.path);
        return fit;
    }
    LsqOptions opt;
    opt.confidence = options.confidence;
    opt.scale_covariance = false;
    opt.max_evaluations = 400;
    opt.ftol = options.tolerance;
    opt.xtol = options.tolerance;
    double sd_db = 1.0, sd_deg = 1.0;
    if (!data.has_sd) {
        // Without sds: a first fit of the free parameters alone with unit weights; its residual
        // spread per kind (dB, degrees) becomes the data sd, so the priors weigh correctly.
        const CircuitResiduals first(model, data, 1.0, 1.0, false, {}, {});
        const FitReport r0 = least_squares(first, lsq_parameters(model, start, false), opt);
        if (r0.status != FitStatus::diverged) {
            const std::size_t n = data.points.size();
            const std::size_t ac_rows = rows - options.dc_readings.size();
            const double dof_share = static_cast<double>(ac_rows - std::min(ac_rows - 1, free.size())) / static_cast<double>(ac_rows);
            double s_db = 0, s_deg = 0;
            for (std::size_t i = 0; i < n; ++i) s_db += r0.residuals[i] * r0.residuals[i];
            if (data.has_phase)
                for (std::size_t i = 0; i < n; ++i) s_deg += r0.residuals[n + i] * r0.residuals[n + i];
            sd_db = std::max(std::sqrt(s_db / (static_cast<double>(n) * dof_share)), 1e-6);
            if (data.has_phase) sd_deg = std::max(std::sqrt(s_deg / (static_cast<double>(n) * dof_share)), 1e-5);
            start = r0.values();
            fit.estimated_sd_db = sd_db;
            if (data.has_phase) fit.estimated_sd_deg = sd_deg;
            fit.notes.push_back(data.has_phase
                                    ? fmt::format("no standard deviations given: {:.3g} dB and {:.3g}° estimated from the residuals", sd_db, sd_deg)
                                    : fmt::format("no standard deviations given: {:.3g} dB estimated from the residuals", sd_db));
        }
    }
    const CircuitResiduals residuals(model, data, sd_db, sd_deg, true, dc_nodes, options.dc_readings);
    fit.report = least_squares(residuals, lsq_parameters(model, start, true), opt);
    // χ² of the observations only (gain points and DC readings): the prior rows are not.
    fit.report.observations = rows;
    fit.report.dof = rows > free.size() ? rows - free.size() : 0;
    {
        const std::size_t ac_rows = rows - options.dc_readings.size();
        const std::size_t dc_first = residuals.residual_count() - options.dc_readings.size();
        double chi2 = 0;
        for (std::size_t i = 0; i < fit.report.residuals.size(); ++i)
            if (i < ac_rows || i >= dc_first) chi2 += fit.report.residuals[i] * fit.report.residuals[i];
        if (fit.report.dof > 0) fit.report.chi2_reduced = chi2 / static_cast<double>(fit.report.dof);
    }
    fit.dc_readings = options.dc_readings;
    if (fit.report.status != FitStatus::diverged && model.set(fit.report.values()))
        for (const int node : dc_nodes) fit.dc_model_volts.push_back(model.operating_point().node_volts[static_cast<std::size_t>(node)]);
    if (!options.dc_readings.empty())
        fit.notes.push_back(fmt::format("{} DC readings of node voltages enter as residual rows", options.dc_readings.size()));
    std::size_t nuisance = 0;
    for (const CircuitParameter& p : fit.parameters) nuisance += p.free ? 0 : 1;
    fit.notes.insert(fit.notes.begin(),
                     fmt::format("circuit model of {} with {} free ({}) and {} tolerance priors", design.name,
                                 free.size(), fmt::join(free, ", "), nuisance));
    if (fit.report.status != FitStatus::diverged && options.derived) fill_derived(fit, model);
    return fit;
}

std::string CircuitFit::brief() const {
    std::string s = fmt::format("circuit {}", to_string(report.status));
    if (report.status == FitStatus::diverged) return s + ": " + report.message;
    for (const FitParameter& p : report.params) {
        bool is_free = false;
        for (const CircuitParameter& c : parameters) is_free = is_free || (c.name == p.name && c.free);
        if (is_free) s += fmt::format(", {} {:.4g} [{:.4g}, {:.4g}]", p.name, p.value, p.ci_low, p.ci_high);
    }
    s += fmt::format(", midband {:.3f} dB [{:.3f}, {:.3f}]", midband_gain_db.value, midband_gain_db.ci_low,
                     midband_gain_db.ci_high);
    s += f_low_hz.present ? fmt::format(", f_low {:.4g} Hz", f_low_hz.value) : std::string(", f_low not reached");
    s += f_high_hz.present ? fmt::format(", f_high {:.4g} Hz", f_high_hz.value) : std::string(", f_high not reached");
    s += fmt::format(", reduced chi-square {:.3g}", report.chi2_reduced);
    return s;
}

}  // namespace ampbench::fit
