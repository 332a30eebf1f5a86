// The sweep procedure (see sweep.h): what happens at each point, and how a session becomes a
// fit, a gap table and a diagnosis.
#include "cli/procedures/sweep.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <fstream>
#include <istream>
#include <map>
#include <numbers>
#include <ostream>
#include <sstream>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/procedures/power.h"
#include "core/bench_file.h"
#include "core/clock.h"
#include "core/errors.h"
#include "core/interrupt.h"
#include "core/value.h"
#include "drivers/bench_instruments.h"
#include "drivers/calibration.h"
#include "drivers/sim/virtual_bench.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/signal/sine_fit.h"

namespace ampbench::procedures {
namespace {

using nlohmann::json;
constexpr double kPi = std::numbers::pi;
constexpr double kDbPerNeper = 20.0 / std::numbers::ln10;
constexpr double kSkewBoundS = 1e-9;  // common practice: two channels of one scope agree to ~1 ns

std::string read_text(const std::string& path) {
    std::ifstream f(path, std::ios::binary);
    if (!f) throw InputError(path, "", "cannot read the file");
    std::ostringstream s;
    s << f.rdbuf();
    return s.str();
}

struct Reading {
    bool ok = false, clipped = false;
    double ratio = 0, ratio_sd = 0, phase_deg = 0, phase_sd_deg = 0;
    double in_amp = 0, in_amp_sd = 0, out_amp = 0, out_amp_sd = 0;
    double in_phase_deg = 0, out_phase_deg = 0;
    double thd = 0;
    double range_in = 0, range_out = 0, capture_s = 0;
};

// The generator setting that puts `stim_vpp` at the stimulus node, and back.
double setting_for(double stim_vpp, const GeneratorSpec& g, std::complex<double> z_in) {
    const double divider = std::abs(z_in / (z_in + g.output_ohms));
    const double emf = stim_vpp / std::max(divider, 1e-9);
    return g.load_setting == "50" ? emf / 2 : emf;
}
double stimulus_for(double setting_vpp, const GeneratorSpec& g, std::complex<double> z_in) {
    const double emf = g.load_setting == "50" ? 2 * setting_vpp : setting_vpp;
    return emf * std::abs(z_in / (z_in + g.output_ohms));
}

// Slowest time constant the frequency step excites: the lowest pole near f_low (5τ, §5).
double settle_time_s(const circuit::Response& r) {
    const double f = r.f_low_hz.value_or(1.0);
    return 5.0 / (2 * kPi * std::max(f, 0.05) * 0.5);
}

class Sweeper {
public:
    Sweeper(const SweepOptions& o, store::Archive& archive, std::ostream& out, std::ostream& progress, std::istream& in)
        : o_(o), archive_(archive), out_(out), progress_(progress), in_(in) {}

    SweepOutcome run();

private:
    void open_instruments();
    void configure_scope();
    Reading capture(double f_hz);
    Reading measure_point(double f_hz);
    store::Point to_point(const Reading& r, double f_hz, std::int64_t plan_index, const std::string& flags) const;
    void draw_progress(double f_hz, double gain_db, size_t done, size_t total);
    void measure_plan(const std::vector<store::PlanPoint>& todo, size_t total, size_t& done);

    const SweepOptions& o_;
    store::Archive& archive_;
    std::ostream& out_;
    std::ostream& progress_;
    std::istream& in_;

    BenchFile bench_;
    std::string bench_text_, design_text_, board_serial_;
    circuit::Design design_;
    circuit::BenchLoading loading_;
    circuit::Prediction pred_;
    std::unique_ptr<circuit::AcAnalysis> ac_;
    std::unique_ptr<VirtualClock> vclock_;
    std::unique_ptr<RealClock> rclock_;
    Clock* clock_ = nullptr;
    std::unique_ptr<sim::VirtualBench> vbench_;
    drivers::BenchInstruments inst_;
    std::string ch_in_, ch_out_;
    double range_in_ = 0, range_out_ = 0;
    double level_vpp_ = 0, stim_vpp_ = 0;
    double settle_s_ = 0;
    std::int64_t session_id_ = 0;
    std::map<std::int64_t, store::Point> current_;
    std::chrono::steady_clock::time_point wall_start_;
};

void Sweeper::open_instruments() {
    drivers::OpenOptions options;
    if (bench_.is_virtual()) {
        vclock_ = std::make_unique<VirtualClock>();
        clock_ = vclock_.get();
        const sim::BoardSpec spec = sim::parse_board_spec(bench_.generator.present ? bench_.generator.uri : bench_.scope.uri);
        vbench_ = std::make_unique<sim::VirtualBench>(design_, bench_, spec, *vclock_);
        options.virtual_transport = vbench_->transport_factory();
    } else {
        rclock_ = std::make_unique<RealClock>();
        clock_ = rclock_.get();
    }
    options.clock = clock_;
    inst_ = drivers::open_bench_instruments(bench_, options);
    if (!inst_.generator || !inst_.scope) throw InputError(bench_.path, "generator/scope", "a sweep needs a generator and a scope");
}

void Sweeper::configure_scope() {
    const ScopeChannelSpec* in = bench_.scope.channel_for_probe("in");
    const ScopeChannelSpec* outc = bench_.scope.channel_for_probe("out");
    if (!in || !outc) throw InputError(bench_.path, "scope.channels", "the scope needs channels probed on \"in\" and \"out\"");
    ch_in_ = in->name;
    ch_out_ = outc->name;
    for (const ScopeChannelSpec* c : {in, outc}) {
        drivers::ScopeChannelSetup s;
        s.channel = c->name;
        s.probe_ratio = c->ratio;
        s.coupling = c->coupling;
        s.bandwidth_hz = c->bandwidth_hz;
        s.range_vpp = 8.0;
        inst_.scope->configure_channel(s);
    }
    inst_.scope->set_trigger(ch_in_, 0.0);
}

Reading Sweeper::capture(double f_hz) {
    Reading r;
    const double cycles = 4.0;
    const size_t points = 2000;
    r.capture_s = inst_.scope->set_timebase(cycles / f_hz, points);
    inst_.scope->single_and_wait(r.capture_s * 4 + 5.0);
    const drivers::Waveform win = inst_.scope->fetch(ch_in_);
    const drivers::Waveform wout = inst_.scope->fetch(ch_out_);
    r.clipped = win.clipped() || wout.clipped();
    r.range_in = range_in_;
    r.range_out = range_out_;
    fit::SampleRecord a{win.volts, win.dt_s, win.t0_s, {}}, b{wout.volts, wout.dt_s, wout.t0_s, {}};
    if (a.samples.size() != b.samples.size()) b.samples.resize(std::min(a.samples.size(), b.samples.size())), a.samples.resize(b.samples.size());
    const fit::JointSineEstimate j = fit::fit_sine_joint({a, b}, f_hz);
    if (!j.usable() || j.channels.size() < 2) return r;
    r.ok = true;
    r.ratio = j.amplitude_ratio[1];
    r.ratio_sd = j.amplitude_ratio_sd[1];
    r.phase_deg = j.phase_diff_rad[1] * 180 / kPi;
    r.phase_sd_deg = j.phase_diff_rad_sd[1] * 180 / kPi;
    r.in_amp = j.channels[0].amplitude;
    r.in_amp_sd = j.channels[0].amplitude_sd;
    r.out_amp = j.channels[1].amplitude;
    r.out_amp_sd = j.channels[1].amplitude_sd;
    r.in_phase_deg = j.channels[0].phase_rad * 180 / kPi;
    r.out_phase_deg = j.channels[1].phase_rad * 180 / kPi;
    const fit::HarmonicEstimate h = fit::fit_harmonics(b, 5, j.freq_hz);
    r.thd = h.usable() ? h.thd_ratio : 0.0;
    return r;
}

// Autoranges both channels and returns one usable reading at f_hz.
Reading Sweeper::measure_point(double f_hz) {
    const double expected_gain = std::abs(ac_->gain(f_hz));
    // Start from the prediction: the signal at about 60 % of the screen.
    if (range_in_ <= 0) range_in_ = inst_.scope->set_range(ch_in_, stim_vpp_ / 0.6, 0.0);
    const double want_out = std::max(stim_vpp_ * expected_gain / 0.6, 1e-3);
    if (range_out_ <= 0 || range_out_ < want_out * 0.5 || range_out_ > want_out * 4)
        range_out_ = inst_.scope->set_range(ch_out_, want_out, 0.0);
    Reading r;
    for (int attempt = 0; attempt < 8; ++attempt) {
        throw_if_interrupted();
        r = capture(f_hz);
        bool again = false;
        if (r.clipped || !r.ok) {
            // Which channel clipped is not told apart: open both a step (cheap, and rare).
            range_in_ = inst_.scope->set_range(ch_in_, range_in_ * 2.5, 0.0);
            range_out_ = inst_.scope->set_range(ch_out_, range_out_ * 2.5, 0.0);
            again = true;
        } else {
            const double pp_in = 2 * r.in_amp, pp_out = 2 * r.out_amp;
            if (pp_in < 0.2 * range_in_) {
                const double nr = inst_.scope->set_range(ch_in_, pp_in / 0.6, 0.0);
                again = again || nr < range_in_ * 0.9;
                range_in_ = nr;
            }
            if (pp_out < 0.2 * range_out_) {
                const double nr = inst_.scope->set_range(ch_out_, pp_out / 0.6, 0.0);
                again = again || nr < range_out_ * 0.9;
                range_out_ = nr;
            }
        }
        if (!again) return r;
    }
    return r;
}

store::Point Sweeper::to_point(const Reading& r, double f_hz, std::int64_t plan_index, const std::string& flags) const {
    store::Point p;
    p.plan_index = plan_index;
    p.freq_hz = f_hz;
    p.in_amplitude_v = r.in_amp;
    p.in_amplitude_sd_v = r.in_amp_sd;
    p.in_phase_deg = r.in_phase_deg;
    p.out_amplitude_v = r.out_amp;
    p.out_amplitude_sd_v = r.out_amp_sd;
    p.out_phase_deg = r.out_phase_deg;
    p.gain_db = 20 * std::log10(std::max(r.ratio, 1e-300));
    // GUM: statistical part from the joint fit plus the bench's systematic terms, each channel's
    // gain accuracy and the inter-channel skew taken as rectangular bounds.
    const double stat_db = kDbPerNeper * r.ratio_sd / std::max(r.ratio, 1e-300);
    const double sys_db = kDbPerNeper * bench_.scope.gain_accuracy * std::sqrt(2.0 / 3.0);
    p.gain_db_sd = std::hypot(stat_db, sys_db);
    p.phase_deg = r.phase_deg;
    p.phase_deg_sd = std::hypot(r.phase_sd_deg, 360 * f_hz * kSkewBoundS / std::sqrt(3.0));
    p.thd_pct = 100 * r.thd;
    p.flags = flags;
    json s = {{"generator_vpp", level_vpp_}, {"stimulus_vpp", stim_vpp_}, {"range_in_vpp", r.range_in},
              {"range_out_vpp", r.range_out}, {"capture_s", r.capture_s}, {"gain_db_sd_statistical", stat_db},
              {"gain_db_sd_systematic", sys_db}};
    p.settings_json = s.dump();
    return p;
}

void Sweeper::draw_progress(double f_hz, double gain_db, size_t done, size_t total) {
    if (!o_.progress) return;
    const int width = 24;
    const int filled = total ? static_cast<int>(width * done / total) : 0;
    const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - wall_start_).count();
    const double left = done ? wall / static_cast<double>(done) * static_cast<double>(total - done) : 0.0;
    progress_ << fmt::format("\r[{}{}] {:>3}/{:<3} {:>10}  gain {:6.2f} dB  about {:.0f} s left ",
                             std::string(static_cast<size_t>(filled), '#'), std::string(static_cast<size_t>(width - filled), '.'),
                             done, total, format_eng(f_hz, "Hz", 4), gain_db, left)
              << std::flush;
}

void Sweeper::measure_plan(const std::vector<store::PlanPoint>& todo, size_t total, size_t& done) {
    for (const store::PlanPoint& pp : todo) {
        throw_if_interrupted();
        const double f = pp.freq_hz;
        inst_.generator->set_frequency(f);
        clock_->sleep_s(settle_s_);
        std::string flags;
        Reading first = measure_point(f);
        // Settled (§5): two successive readings agree within their uncertainty.
        Reading r = first;
        const int wanted = std::max(o_.captures, 2);
        std::vector<Reading> taken{first};
        for (int k = 1; k < wanted + 2 && static_cast<int>(taken.size()) < wanted + 2; ++k) {
            Reading next = capture(f);
            if (!next.ok) continue;
            const Reading& prev = taken.back();
            const double u_ratio = 3 * std::hypot(prev.ratio_sd, next.ratio_sd) + 1e-6 * next.ratio;
            const double u_phase = 3 * std::hypot(prev.phase_sd_deg, next.phase_sd_deg) + 1e-3;
            const bool agree = std::abs(prev.ratio - next.ratio) <= u_ratio &&
                               std::abs(std::remainder(prev.phase_deg - next.phase_deg, 360.0)) <= u_phase;
            taken.push_back(next);
            if (agree && static_cast<int>(taken.size()) >= wanted) break;
            if (static_cast<int>(taken.size()) >= wanted + 2) flags = "unsettled";
        }
        // The last `captures` readings, averaged.
        const size_t n = std::min(taken.size(), static_cast<size_t>(std::max(1, o_.captures)));
        r = taken.back();
        if (n > 1) {
            double ratio = 0, phase = 0, in_amp = 0, out_amp = 0, thd = 0;
            for (size_t i = taken.size() - n; i < taken.size(); ++i)
                ratio += taken[i].ratio, phase += taken[i].phase_deg, in_amp += taken[i].in_amp,
                    out_amp += taken[i].out_amp, thd += taken[i].thd;
            const double dn = static_cast<double>(n);
            r.ratio = ratio / dn, r.phase_deg = phase / dn, r.in_amp = in_amp / dn, r.out_amp = out_amp / dn, r.thd = thd / dn;
            r.ratio_sd /= std::sqrt(dn), r.phase_sd_deg /= std::sqrt(dn);
        }
        // THD of an output buried in noise measures the noise: lowering the level cannot help.
        const bool resolved = r.out_amp > 30 * r.out_amp_sd;
        if (r.thd > o_.thd_limit && !resolved) flags = flags.empty() ? "low signal" : flags + ",low signal";
        if (r.thd > o_.thd_limit && resolved) {
            // Distorted: keep the reading (it is superseded by the retake), lower the level, retake.
            for (int retake = 0; retake < 3 && r.thd > o_.thd_limit; ++retake) {
                current_[pp.index] = archive_.append_point(session_id_, to_point(r, f, pp.index, "distorted"));
                level_vpp_ = inst_.generator->set_amplitude_vpp(level_vpp_ / 2);
                stim_vpp_ /= 2;
                clock_->sleep_s(settle_s_);
                r = measure_point(f);
            }
            if (r.thd > o_.thd_limit) flags = flags.empty() ? "distorted" : flags + ",distorted";
        }
        current_[pp.index] = archive_.append_point(session_id_, to_point(r, f, pp.index, flags));
        ++done;
        draw_progress(f, 20 * std::log10(std::max(r.ratio, 1e-300)), done, total);
    }
}

SweepOutcome Sweeper::run() {
    wall_start_ = std::chrono::steady_clock::now();
    bench_text_ = read_text(o_.bench_path);
    bench_ = load_bench_file(o_.bench_path);
    board_serial_ = o_.board_serial;
    if (o_.resume_session) {
        // A resumed session measures the design it was started with, stored in the archive.
        const auto session = archive_.session(*o_.resume_session);
        const std::string where = fmt::format("session {}", *o_.resume_session);
        if (!session) throw InputError("--resume", "SESSION", fmt::format("no session {} in the archive", *o_.resume_session));
        if (session->kind != store::SessionKind::sweep)
            throw InputError("--resume", "SESSION", fmt::format("session {} is a {} session, not a sweep", session->id, store::to_string(session->kind)));
        const store::SessionDetail detail = archive_.session_detail(*o_.resume_session);
        if (!detail.board || detail.board->design_address.empty())
            throw InputError(where, "design", "the session's board has no stored design");
        const auto dr = archive_.design(detail.board->design_address);
        if (!dr) throw StoreError(fmt::format("{}: design {} is missing from the archive", where, detail.board->design_address));
        design_text_ = dr->canonical_json;
        design_ = circuit::parse_design(design_text_, where + " design");
        board_serial_ = detail.session.board_serial;
    } else {
        design_text_ = read_text(o_.design_path);
        design_ = circuit::load_design(o_.design_path);
    }
    loading_ = circuit::bench_loading(bench_);
    const circuit::Netlist nl = circuit::build_netlist(design_, loading_);
    pred_ = circuit::predict(nl);
    ac_ = std::make_unique<circuit::AcAnalysis>(nl, pred_.op);
    settle_s_ = settle_time_s(pred_.response);

    // Calibration pre-flight.
    const std::string today = drivers::today_utc();
    for (const InstrumentSpec* spec : bench_.instruments()) {
        const drivers::CalibrationState c = drivers::calibration_state(*spec, today);
        if (c.status == drivers::CalibrationStatus::past_due) {
            if (bench_.limits.calibration == "refuse")
                throw SafetyStop(fmt::format("{}: calibration past due since {} (limits.calibration is refuse)", spec->role, spec->cal_due));
            out_ << fmt::format("warning: {} calibration past due since {}\n", spec->role, spec->cal_due);
        }
    }
    open_instruments();
    // Every instrument answers (as `check`).
    std::vector<store::InstrumentRecord> records;
    auto identify = [&](drivers::Instrument* i, const InstrumentSpec& spec) {
        if (!i) return;
        const drivers::Identity id = i->identify();
        records.push_back({spec.role, fmt::format("{},{},{},{}", id.manufacturer, id.model, id.serial, id.firmware),
                           spec.asset, spec.uri, spec.cal_due, spec.certificate, "{}"});
    };
    identify(inst_.generator.get(), bench_.generator);
    identify(inst_.scope.get(), bench_.scope);
    identify(inst_.meter.get(), bench_.meter);
    identify(inst_.supply.get(), bench_.supply);

    // Session: new or resumed.
    std::vector<store::PlanPoint> plan;
    if (o_.resume_session) {
        store::ResumeState rs = archive_.resume_session(*o_.resume_session);
        session_id_ = rs.session.id;
        plan = rs.plan;
        for (const store::Point& p : rs.points)
            if (p.plan_index) current_[*p.plan_index] = p;
    } else {
        const store::DesignRecord dr = archive_.put_design(design_text_, o_.design_path);
        store::NewSession ns;
        ns.board_serial = o_.board_serial;
        ns.design_address = dr.address;
        ns.kind = store::SessionKind::sweep;
        ns.operator_name = o_.operator_name;
        ns.bench_file = o_.bench_path;
        ns.instruments = records;
        for (const ScopeChannelSpec& c : bench_.scope.channels)
            ns.probes.push_back({c.probe, c.name, c.asset, c.ratio, c.cal_due, c.certificate});
        session_id_ = archive_.begin_session(ns).id;
        // Planned points are stored before they are measured.
        const auto freqs = base_plan(o_.plan, pred_.response.f_low_hz, pred_.response.f_high_hz);
        for (size_t i = 0; i < freqs.size(); ++i) plan.push_back({static_cast<std::int64_t>(i), freqs[i], false});
        archive_.add_plan_points(session_id_, plan);
    }

    // Drive level at the stimulus node (§ drive level): limits there, auto = 30 % of the swing.
    const std::complex<double> z_in = pred_.response.input_impedance;
    std::vector<double> limits_stim;
    if (bench_.limits.max_generator_vpp) limits_stim.push_back(stimulus_for(*bench_.limits.max_generator_vpp, bench_.generator, z_in));
    if (design_.max_input_vpp) limits_stim.push_back(*design_.max_input_vpp);
    const double limit = limits_stim.empty() ? 1e9 : *std::min_element(limits_stim.begin(), limits_stim.end());
    if (o_.level_vpp) {
        stim_vpp_ = stimulus_for(*o_.level_vpp, bench_.generator, z_in);
        if (stim_vpp_ > limit * 1.0001)
            throw InputError("--level", "level", fmt::format("{} Vpp gives {} at the stimulus node, above its limit {}", *o_.level_vpp,
                                                             format_eng(stim_vpp_, "Vpp"), format_eng(limit, "Vpp")));
    } else {
        stim_vpp_ = std::min(limit, 0.3 * pred_.response.max_output_vpp / std::max(pred_.response.midband_gain, 1e-9));
    }
    level_vpp_ = setting_for(stim_vpp_, bench_.generator, z_in);

    // Safety notice, then power in order; the PowerSequence undoes it on every way out.
    PowerPlan pp;
    pp.supply_volts = design_.supply_volts;
    pp.current_limit_a = design_.supply_current_limit_a > 0 ? design_.supply_current_limit_a : 0.05;
    pp.predicted_quiescent_a = pred_.op.supply_current_a;
    confirm_safety(out_, in_, pp.current_limit_a, o_.assume_yes);
    PowerSequence power(inst_.generator.get(), inst_.supply.get(), *clock_, pp);
    SweepOutcome result;
    try {
        inst_.generator->select_sine();
        inst_.generator->set_load(bench_.generator.load_setting);
        inst_.generator->set_offset(0.0);
        level_vpp_ = inst_.generator->set_amplitude_vpp(level_vpp_);
        inst_.generator->set_frequency(plan.empty() ? 1e3 : plan.front().freq_hz);
        power.power_up();
        result.quiescent_a = power.quiescent_a();

        // DC step: the bias nodes the meter routes.
        if (inst_.meter) {
            inst_.meter->select_dc_volts();
            inst_.meter->set_range(std::nullopt);
            for (const auto& [channel, node] : bench_.meter.channels) {
                const double v = inst_.meter->measure_dc_volts(channel);
                const int idx = nl.node_index(circuit::canonical_node(node));
                result.dc.push_back({channel, node, v, std::abs(v) * bench_.meter.accuracy / std::sqrt(3.0) + 1e-4,
                                     idx >= 0 ? pred_.op.node_volts[static_cast<size_t>(idx)] : 0.0});
            }
        }
        configure_scope();
        power.generator_on();

        json setup = {{"bench_text", bench_text_}, {"quiescent_a", result.quiescent_a}, {"settle_s", settle_s_}};
        json dc = json::array();
        for (const DcReading& d : result.dc) dc.push_back({{"channel", d.channel}, {"node", d.node}, {"volts", d.volts}, {"u_v", d.u_v}});
        setup["dc"] = dc;
        store::FitRecord fr;
        fr.session_id = session_id_;
        fr.kind = "setup";
        fr.model = "sweep";
        fr.params_json = setup.dump();
        archive_.add_fit(fr);

        std::vector<store::PlanPoint> todo;
        for (const store::PlanPoint& p : plan)
            if (!current_.count(p.index)) todo.push_back(p);
        size_t done = plan.size() - todo.size(), total = plan.size();
        measure_plan(todo, total, done);
        // Adaptive points until each corner is located to 2 %.
        std::int64_t next_index = 0;
        for (const auto& p : plan) next_index = std::max(next_index, p.index + 1);
        for (int round = 0; round < 8; ++round) {
            std::vector<MeasuredGain> m;
            for (const auto& [idx, p] : current_) m.push_back({p.freq_hz, p.gain_db});
            const auto more = adaptive_points(m, o_.plan);
            if (more.empty()) break;
            std::vector<store::PlanPoint> added;
            for (double f : more) added.push_back({next_index++, f, true});
            archive_.add_plan_points(session_id_, added);
            total += added.size();
            measure_plan(added, total, done);
        }
        if (o_.progress) progress_ << "\n";
        power.power_down();
    } catch (...) {
        if (o_.progress) progress_ << "\n";
        power.power_down();
        // The session stays resumable after an interruption; an error aborts it.
        try {
            archive_.finish_session(session_id_, store::SessionStatus::interrupted);
        } catch (const Error&) {
        }
        throw;
    }
    archive_.finish_session(session_id_, store::SessionStatus::complete);

    SessionAnalysis a = analyse_session(archive_, session_id_, o_.tolerance_runs);
    {
        store::FitRecord fr;
        fr.session_id = session_id_;
        fr.kind = "response";
        fr.model = a.fit.model_name();
        json params = json::object();
        for (const fit::FitParameter& p : a.fit.report.params) params[p.name] = std::isfinite(p.value) ? json(p.value) : json(nullptr);
        fr.params_json = params.dump();
        fr.report_json = json{{"brief", a.fit.brief()}, {"sign", a.fit.sign}}.dump();
        if (a.fit.midband_gain_db.present) fr.midband_gain_db = a.fit.midband_gain_db.value;
        if (a.fit.f_low_hz.present) fr.f_low_hz = a.fit.f_low_hz.value;
        if (a.fit.f_high_hz.present) fr.f_high_hz = a.fit.f_high_hz.value;
        archive_.add_fit(fr);
    }
    result.session_id = session_id_;
    result.board = board_serial_;
    result.points = static_cast<int>(current_.size());
    if (vclock_) result.virtual_s = vclock_->now_s();
    result.level_vpp = level_vpp_;
    result.stimulus_vpp = stim_vpp_;
    result.fit = a.fit;
    result.prediction = a.prediction;
    result.band = a.band;
    result.gap = a.gap;
    result.diagnosis = a.diagnosis;
    result.analysis = std::move(a);
    return result;
}

}  // namespace

std::string SweepOptions::validate() const {
    if (bench_path.empty()) return "--bench is required";
    if (design_path.empty() && !resume_session) return "--design is required";
    if (board_serial.empty() && !resume_session) return "--board is required";
    if (captures < 1 || captures > 100) return "--captures must lie in 1..100";
    if (method != "capture" && method != "amplitude") return "--method must be capture or amplitude";
    if (level_vpp && !(*level_vpp > 0)) return "--level must be auto or a positive Vpp";
    return plan.validate();
}

bool SweepOutcome::out_of_band() const {
    return std::any_of(gap.begin(), gap.end(), [](const extract::GapRow& r) { return r.verdict == extract::kOutOfBand; });
}

SweepOutcome run_sweep(const SweepOptions& options, store::Archive& archive, std::ostream& out, std::ostream& progress,
                       std::istream& in) {
    if (std::string why = options.validate(); !why.empty()) throw UsageError(why);
    if (options.method == "amplitude")
        throw UsageError("--method amplitude is not available in this build; use --method capture");
    Sweeper s(options, archive, out, progress, in);
    return s.run();
}

}  // namespace ampbench::procedures
