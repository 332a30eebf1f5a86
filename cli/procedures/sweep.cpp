// The sweep procedure (see sweep.h): what happens at each point, and how a session becomes a
// fit, a gap table and a diagnosis.
#include "cli/procedures/sweep.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <ctime>
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
    bool clipped_in = false, clipped_out = false;
    bool has_phase = true;  // false for the scope's amplitude measurement
    double ratio = 0, ratio_sd = 0, phase_deg = 0, phase_sd_deg = 0;
    double in_amp = 0, in_amp_sd = 0, out_amp = 0, out_amp_sd = 0;
    double in_phase_deg = 0, out_phase_deg = 0;
    double thd = 0;
    double range_in = 0, range_out = 0, capture_s = 0;
    // The capture's first and second halves, fitted apart, agree (two successive readings).
    bool halves_agree = false;
};

// Two successive readings agree within their uncertainty (the settled test of DESIGN.md §5).
bool readings_agree(const Reading& a, const Reading& b) {
    const double u_ratio = 3 * std::hypot(a.ratio_sd, b.ratio_sd) + 1e-6 * b.ratio;
    const double u_phase = 3 * std::hypot(a.phase_sd_deg, b.phase_sd_deg) + 1e-3;
    return std::abs(a.ratio - b.ratio) <= u_ratio &&
           (!a.has_phase || !b.has_phase || std::abs(std::remainder(a.phase_deg - b.phase_deg, 360.0)) <= u_phase);
}

// Gain and phase of channel 1 against channel 0 from a joint sine fit.
Reading joint_reading(const std::vector<fit::SampleRecord>& records, double f_hz) {
    Reading r;
    const fit::JointSineEstimate j = fit::fit_sine_joint(records, f_hz);
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
    return r;
}

// The first or second half of a record.
fit::SampleRecord half_of(const fit::SampleRecord& r, bool second) {
    const size_t mid = r.samples.size() / 2;
    fit::SampleRecord h;
    h.dt_s = r.dt_s;
    h.t0_s = r.t0_s + (second ? static_cast<double>(mid) * r.dt_s : 0.0);
    h.samples.assign(r.samples.begin() + (second ? static_cast<std::ptrdiff_t>(mid) : 0),
                     second ? r.samples.end() : r.samples.begin() + static_cast<std::ptrdiff_t>(mid));
    return h;
}

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

// A bench's match run read back as a curve over frequency.
struct MatchCurve {
    MatchUse use;
    std::vector<MatchRow> rows;  // sorted by frequency
    // The mismatch at f_hz, interpolated linearly in log f; none outside the run's range.
    std::optional<MatchRow> at(double f_hz) const {
        if (rows.size() < 2 || f_hz < rows.front().freq_hz / 1.01 || f_hz > rows.back().freq_hz * 1.01) return std::nullopt;
        auto hi = std::lower_bound(rows.begin(), rows.end(), f_hz, [](const MatchRow& r, double f) { return r.freq_hz < f; });
        if (hi == rows.begin()) return rows.front();
        if (hi == rows.end()) return rows.back();
        const MatchRow& a = *(hi - 1);
        const MatchRow& b = *hi;
        const double w = std::log(f_hz / a.freq_hz) / std::log(b.freq_hz / a.freq_hz);
        auto mix = [w](double x, double y) { return x + w * (y - x); };
        return MatchRow{f_hz, mix(a.gain_db, b.gain_db), std::max(a.gain_db_sd, b.gain_db_sd), mix(a.phase_deg, b.phase_deg),
                        std::max(a.phase_deg_sd, b.phase_deg_sd)};
    }
};

double unix_of_iso(const std::string& text) {
    std::tm tm{};
    if (!strptime(text.c_str(), "%Y-%m-%dT%H:%M:%SZ", &tm)) return NAN;
    return static_cast<double>(timegm(&tm));
}

// What the virtual bench simulates for a match run: both probes clipped to the generator's
// node, loaded only by the probes themselves (the supply is never switched on).
constexpr const char* kVirtualMatchFixture = R"({
  "format": "ampbench-design/1",
  "name": "channel-match fixture (virtual bench): both probes on the generator output",
  "supply": { "node": "vcc", "volts": "12", "current_limit": "20m" },
  "stimulus": { "node": "in" },
  "parts": [
    { "ref": "RT", "kind": "resistor", "nodes": ["in", "0"], "value": "1M", "tol": "1%" },
    { "ref": "RS", "kind": "resistor", "nodes": ["vcc", "0"], "value": "10k", "tol": "1%" }
  ],
  "probes": { "in": "in", "out": "in" }
})";

// 5τ of the slowest time constant the frequency step excites (§5), taken from the predicted
// lower corner; the settled test on the readings catches a board that needs longer.
double settle_time_s(const circuit::Response& r) {
    const double f = r.f_low_hz.value_or(1.0);
    return 5.0 / (2 * kPi * std::max(f, 0.05));
}

class Sweeper {
public:
    Sweeper(const SweepOptions& o, store::Archive& archive, std::ostream& out, std::ostream& progress, std::istream& in)
        : o_(o), archive_(archive), out_(out), progress_(progress), in_(in), amplitude_(o.method == "amplitude") {}

    SweepOutcome run();
    MatchOutcome run_match(const MatchOptions& m);

private:
    void check_calibration();
    std::vector<store::InstrumentRecord> identify_all();
    std::vector<store::ProbeRecord> probe_records() const;
    void load_match(const std::string& scope_identity);
    void wind_down(PowerSequence& power, store::SessionStatus status);
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
    bool amplitude_ = false;  // --method amplitude: the scope's own peak-to-peak, no phase
    bool matching_ = false;   // a match run: both probes on one node, no board
    std::optional<MatchCurve> match_;
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
    r.range_in = range_in_;
    r.range_out = range_out_;
    if (amplitude_) {
        // The scope's own peak-to-peak reading: magnitude only. common practice: such a reading
        // is good to about 1 % of full screen (noise peaks and resolution), taken as a
        // rectangular bound on each channel.
        const double pp_in = inst_.scope->amplitude_vpp(ch_in_), pp_out = inst_.scope->amplitude_vpp(ch_out_);
        r.clipped_in = pp_in > 0.98 * range_in_;
        r.clipped_out = pp_out > 0.98 * range_out_;
        r.clipped = r.clipped_in || r.clipped_out;
        if (!(pp_in > 0) || !(pp_out > 0)) return r;
        r.ok = true;
        r.has_phase = false;
        r.in_amp = pp_in / 2;
        r.out_amp = pp_out / 2;
        r.in_amp_sd = 0.01 * range_in_ / 2 / std::sqrt(3.0);
        r.out_amp_sd = 0.01 * range_out_ / 2 / std::sqrt(3.0);
        r.ratio = r.out_amp / r.in_amp;
        r.ratio_sd = r.ratio * std::hypot(r.in_amp_sd / r.in_amp, r.out_amp_sd / r.out_amp);
        return r;
    }
    const drivers::Waveform win = inst_.scope->fetch(ch_in_);
    const drivers::Waveform wout = inst_.scope->fetch(ch_out_);
    r.clipped_in = win.clipped();
    r.clipped_out = wout.clipped();
    r.clipped = r.clipped_in || r.clipped_out;
    fit::SampleRecord a{win.volts, win.dt_s, win.t0_s, {}}, b{wout.volts, wout.dt_s, wout.t0_s, {}};
    if (a.samples.size() != b.samples.size()) b.samples.resize(std::min(a.samples.size(), b.samples.size())), a.samples.resize(b.samples.size());
    const Reading clip = r;
    r = joint_reading({a, b}, f_hz);
    r.clipped = clip.clipped;
    r.clipped_in = clip.clipped_in;
    r.clipped_out = clip.clipped_out;
    r.capture_s = clip.capture_s;
    r.range_in = range_in_;
    r.range_out = range_out_;
    if (!r.ok) return r;
    // Two cycles each: the halves are two successive readings of the same capture.
    const Reading first = joint_reading({half_of(a, false), half_of(b, false)}, f_hz);
    const Reading second = joint_reading({half_of(a, true), half_of(b, true)}, f_hz);
    r.halves_agree = first.ok && second.ok && readings_agree(first, second);
    const fit::HarmonicEstimate h = fit::fit_harmonics(b, 5, f_hz);
    r.thd = h.usable() ? h.thd_ratio : 0.0;
    return r;
}

// Autoranges both channels and returns one usable reading at f_hz.
Reading Sweeper::measure_point(double f_hz) {
    const double expected_gain = matching_ ? 1.0 : std::abs(ac_->gain(f_hz));
    // Start from the prediction: the signal at about 60 % of the screen.
    if (range_in_ <= 0) range_in_ = inst_.scope->set_range(ch_in_, stim_vpp_ / 0.6, 0.0);
    const double want_out = std::max(stim_vpp_ * expected_gain / 0.6, 1e-3);
    if (range_out_ <= 0 || range_out_ < want_out * 0.8 || range_out_ > want_out * 4)
        range_out_ = inst_.scope->set_range(ch_out_, want_out, 0.0);
    Reading r;
    for (int attempt = 0; attempt < 8; ++attempt) {
        throw_if_interrupted();
        r = capture(f_hz);
        bool again = false;
        if (r.clipped || !r.ok) {
            // Open the channel that clipped a step; both when the fit failed without a clip.
            const bool both = !r.clipped;
            if (both || r.clipped_in) range_in_ = inst_.scope->set_range(ch_in_, range_in_ * 2.5, 0.0);
            if (both || r.clipped_out) range_out_ = inst_.scope->set_range(ch_out_, range_out_ * 2.5, 0.0);
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
    p.out_amplitude_v = r.out_amp;
    p.out_amplitude_sd_v = r.out_amp_sd;
    p.gain_db = 20 * std::log10(std::max(r.ratio, 1e-300));
    // GUM: statistical part from the fit plus the bench's systematic terms, each channel's gain
    // accuracy and the inter-channel skew taken as rectangular bounds. A match run measures
    // exactly those, so it carries only its statistical part; a sweep covered by a match run
    // divides the mismatch out and carries the match run's uncertainty instead.
    const double stat_db = kDbPerNeper * r.ratio_sd / std::max(r.ratio, 1e-300);
    double sys_db = matching_ ? 0.0 : kDbPerNeper * bench_.scope.gain_accuracy * std::sqrt(2.0 / 3.0);
    double sys_deg = matching_ ? 0.0 : 360 * f_hz * kSkewBoundS / std::sqrt(3.0);
    double phase = r.phase_deg;
    std::string all_flags = flags;
    json s = {{"generator_vpp", level_vpp_}, {"stimulus_vpp", stim_vpp_}, {"range_in_vpp", r.range_in},
              {"range_out_vpp", r.range_out}, {"capture_s", r.capture_s}, {"method", amplitude_ ? "amplitude" : "capture"}};
    if (match_) {
        if (const auto m = match_->at(f_hz)) {
            p.gain_db -= m->gain_db;
            phase -= m->phase_deg;
            sys_db = m->gain_db_sd;
            sys_deg = m->phase_deg_sd;
            s["match_session"] = match_->use.session_id;
            s["match_gain_db"] = m->gain_db;
            s["match_phase_deg"] = m->phase_deg;
        } else {
            all_flags = all_flags.empty() ? "outside match" : all_flags + ",outside match";
        }
    }
    p.gain_db_sd = std::hypot(stat_db, sys_db);
    if (r.has_phase) {
        p.in_phase_deg = r.in_phase_deg;
        p.out_phase_deg = r.out_phase_deg;
        p.phase_deg = phase;
        p.phase_deg_sd = std::hypot(r.phase_sd_deg, sys_deg);
        p.thd_pct = 100 * r.thd;
    }
    p.flags = all_flags;
    s["gain_db_sd_statistical"] = stat_db;
    s["gain_db_sd_systematic"] = sys_db;
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
        // Settled (§5): two successive readings agree within their uncertainty; a waveform
        // capture holds two of them (its halves), the amplitude method needs two captures.
        const int wanted = std::max(o_.captures, 1);
        std::vector<Reading> taken{first};
        auto settled = [&] {
            const Reading& last = taken.back();
            if (last.halves_agree) return true;
            return taken.size() >= 2 && readings_agree(taken[taken.size() - 2], last);
        };
        for (int attempts = 1; !(settled() && static_cast<int>(taken.size()) >= wanted); ++attempts) {
            if (attempts >= wanted + 2) {
                flags = "unsettled";
                break;
            }
            throw_if_interrupted();
            Reading next = capture(f);
            if (next.ok) taken.push_back(next);
        }
        // The last `captures` readings, averaged.
        const size_t n = std::min(taken.size(), static_cast<size_t>(std::max(1, o_.captures)));
        Reading r = taken.back();
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

void Sweeper::check_calibration() {
    const std::string today = drivers::today_utc();
    for (const InstrumentSpec* spec : bench_.instruments()) {
        const drivers::CalibrationState c = drivers::calibration_state(*spec, today);
        if (c.status == drivers::CalibrationStatus::past_due) {
            if (bench_.limits.calibration == "refuse")
                throw SafetyStop(fmt::format("{}: calibration past due since {} (limits.calibration is refuse)", spec->role, spec->cal_due));
            out_ << fmt::format("warning: {} calibration past due since {}\n", spec->role, spec->cal_due);
        }
    }
}

// Every instrument answers (as `check`); their identities as the session records them.
std::vector<store::InstrumentRecord> Sweeper::identify_all() {
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
    return records;
}

std::vector<store::ProbeRecord> Sweeper::probe_records() const {
    std::vector<store::ProbeRecord> probes;
    for (const ScopeChannelSpec& c : bench_.scope.channels) probes.push_back({c.probe, c.name, c.asset, c.ratio, c.cal_due, c.certificate});
    return probes;
}

// The newest complete match run of this scope with the same channels on "in" and "out".
void Sweeper::load_match(const std::string& scope_identity) {
    const ScopeChannelSpec* in = bench_.scope.channel_for_probe("in");
    const ScopeChannelSpec* outc = bench_.scope.channel_for_probe("out");
    if (!in || !outc) return;
    for (const store::SessionSummary& s : archive_.history(match_serial(scope_identity))) {
        if (s.session.kind != store::SessionKind::match || s.session.status != store::SessionStatus::complete) continue;
        const store::SessionDetail d = archive_.session_detail(s.session.id);
        bool same_channels = true;
        for (const store::ProbeRecord& p : d.probes)
            if ((p.name == "in" && p.channel != in->name) || (p.name == "out" && p.channel != outc->name)) same_channels = false;
        if (!same_channels) continue;
        MatchCurve c;
        c.use.session_id = s.session.id;
        c.use.taken_utc = s.session.started_utc;
        for (const store::Point& p : d.points)
            if (!p.superseded_by && p.phase_deg)
                c.rows.push_back(match_row(p));
        std::sort(c.rows.begin(), c.rows.end(), [](const MatchRow& a, const MatchRow& b) { return a.freq_hz < b.freq_hz; });
        if (c.rows.size() < 2) continue;
        match_ = std::move(c);
        return;
    }
}

// The way out after an error or Ctrl-C: powered down in reverse order, the session marked.
void Sweeper::wind_down(PowerSequence& power, store::SessionStatus status) {
    if (o_.progress) progress_ << "\n";
    power.power_down();
    try {
        archive_.finish_session(session_id_, status);
    } catch (const Error&) {
    }
}

MatchOutcome Sweeper::run_match(const MatchOptions& m) {
    wall_start_ = std::chrono::steady_clock::now();
    matching_ = true;
    bench_text_ = read_text(m.bench_path);
    bench_ = load_bench_file(m.bench_path);
    if (bench_.is_virtual()) design_ = circuit::parse_design(kVirtualMatchFixture, "virtual match fixture");
    // The scope's AC coupling (if any) is the slowest thing a frequency step excites; otherwise
    // a few periods of the generator's switching transient.
    bool ac = false;
    for (const ScopeChannelSpec& c : bench_.scope.channels) ac = ac || c.coupling == "ac";
    settle_s_ = ac ? 5.0 / (2 * kPi * 10.0) : 1e-3;  // from memory: AC coupling corners sit near 10 Hz
    check_calibration();
    open_instruments();
    const std::vector<store::InstrumentRecord> records = identify_all();
    std::string scope_identity;
    for (const store::InstrumentRecord& r : records)
        if (r.role == "scope") scope_identity = r.identity;

    const double limit = bench_.limits.max_generator_vpp.value_or(1e9);
    level_vpp_ = m.level_vpp.value_or(std::min(1.0, limit));
    if (level_vpp_ > limit * 1.0001)
        throw InputError("--level", "level", fmt::format("{} Vpp is above the bench's max_generator_vpp {}", level_vpp_, format_eng(limit, "Vpp")));
    stim_vpp_ = stimulus_for(level_vpp_, bench_.generator, {1e6, 0.0});

    store::NewSession ns;
    ns.board_serial = match_serial(scope_identity);
    ns.kind = store::SessionKind::match;
    ns.operator_name = m.operator_name;
    ns.bench_file = m.bench_path;
    ns.instruments = records;
    ns.probes = probe_records();
    ns.notes = "both probes on one node";
    session_id_ = archive_.begin_session(ns).id;
    FrequencyPlanOptions po = m.plan;
    if (!po.from_hz) po.from_hz = 1.0;
    if (!po.to_hz) po.to_hz = 20e6;
    std::vector<store::PlanPoint> plan;
    const auto freqs = base_plan(po, std::nullopt, std::nullopt);
    for (size_t i = 0; i < freqs.size(); ++i) plan.push_back({static_cast<std::int64_t>(i), freqs[i], false});
    archive_.add_plan_points(session_id_, plan);

    confirm_or_stop(out_, in_, match_notice(level_vpp_), "Both probes on one node?",
                    "not confirmed: the generator was not switched on (pass --yes to skip the question)", m.assume_yes);
    PowerSequence power(inst_.generator.get(), nullptr, *clock_, PowerPlan{});
    try {
        inst_.generator->select_sine();
        inst_.generator->set_load(bench_.generator.load_setting);
        inst_.generator->set_offset(0.0);
        level_vpp_ = inst_.generator->set_amplitude_vpp(level_vpp_);
        inst_.generator->set_frequency(plan.front().freq_hz);
        power.power_up();
        configure_scope();
        power.generator_on();
        store::FitRecord fr;
        fr.session_id = session_id_;
        fr.kind = "setup";
        fr.model = "match";
        fr.params_json = json{{"bench_text", bench_text_}, {"settle_s", settle_s_}, {"method", "capture"}, {"dc", json::array()}}.dump();
        archive_.add_fit(fr);
        size_t done = 0;
        measure_plan(plan, plan.size(), done);
        if (o_.progress) progress_ << "\n";
        power.power_down();
    } catch (...) {
        wind_down(power, store::SessionStatus::aborted);
        throw;
    }
    archive_.finish_session(session_id_, store::SessionStatus::complete);
    MatchOutcome result;
    result.session_id = session_id_;
    result.scope_serial = ns.board_serial;
    for (const auto& [index, p] : current_)
        result.rows.push_back(match_row(p));
    if (vclock_) result.virtual_s = vclock_->now_s();
    return result;
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

    check_calibration();
    open_instruments();
    const std::vector<store::InstrumentRecord> records = identify_all();
    for (const store::InstrumentRecord& r : records)
        if (r.role == "scope") load_match(r.identity);

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
        ns.probes = probe_records();
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

        json setup = {{"bench_text", bench_text_}, {"quiescent_a", result.quiescent_a}, {"settle_s", settle_s_},
                      {"method", o_.method}};
        if (match_) {
            const double age_s = static_cast<double>(std::time(nullptr)) - unix_of_iso(match_->use.taken_utc);
            setup["match"] = {{"session", match_->use.session_id}, {"taken_utc", match_->use.taken_utc},
                              {"age_days", std::isfinite(age_s) ? std::max(0.0, age_s / 86400.0) : 0.0}};
        }
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
        // The session stays resumable.
        wind_down(power, store::SessionStatus::interrupted);
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
    Sweeper s(options, archive, out, progress, in);
    return s.run();
}

MatchRow match_row(const store::Point& p) {
    return {p.freq_hz, p.gain_db, p.gain_db_sd.value_or(0.0), p.phase_deg.value_or(0.0), p.phase_deg_sd.value_or(0.0)};
}

std::string match_serial(const std::string& scope_identity) {
    // Manufacturer, model and serial: a firmware update does not move the channels' gains.
    size_t cut = 0;
    for (int field = 0; field < 3 && cut != std::string::npos; ++field) cut = scope_identity.find(',', cut == 0 ? 0 : cut + 1);
    return "match:" + scope_identity.substr(0, cut);
}

MatchOutcome run_match(const MatchOptions& options, store::Archive& archive, std::ostream& out, std::ostream& progress,
                       std::istream& in) {
    if (options.bench_path.empty()) throw UsageError("--bench is required");
    if (options.captures < 1 || options.captures > 100) throw UsageError("--captures must lie in 1..100");
    if (options.level_vpp && !(*options.level_vpp > 0)) throw UsageError("--level must be a positive Vpp");
    if (std::string why = options.plan.validate(); !why.empty()) throw UsageError(why);
    SweepOptions so;
    so.bench_path = options.bench_path;
    so.captures = options.captures;
    so.progress = options.progress;
    Sweeper s(so, archive, out, progress, in);
    return s.run_match(options);
}

}  // namespace ampbench::procedures
