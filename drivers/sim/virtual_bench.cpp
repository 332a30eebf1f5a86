// The four simulated instruments: their settings as SCPI state machines, what each reading
// costs in virtual time, and how the scope turns board waveforms into 8-bit codes.
#include "drivers/sim/virtual_bench.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <functional>
#include <numbers>

#include <fmt/format.h>

#include "core/errors.h"
#include "core/random.h"
#include "core/version.h"

namespace ampbench::sim {
namespace {

constexpr double kTwoPi = 2.0 * std::numbers::pi;
constexpr int kCodeMin = -128, kCodeMax = 127;
constexpr double kCodesPerScreen = 250.0;  // 25 codes per division over 10 divisions

Outcome reply(std::string text, double busy_s = 1e-3) {
    Outcome o;
    o.reply = std::move(text);
    o.has_reply = true;
    o.busy_s = busy_s;
    return o;
}
Outcome done(double busy_s) {
    Outcome o;
    o.busy_s = busy_s;
    return o;
}
Outcome number(double v, double busy_s = 1e-3) { return reply(format_reply_number(v), busy_s); }

// The smallest 1-2-5 step at or above v (v > 0), from 1 mV/div to 10 V/div at the scope input.
double quantise_125(double v) {
    const double lo = 1e-3, hi = 10.0;
    if (!(v > lo)) return lo;
    if (v >= hi) return hi;
    const double decade = std::pow(10.0, std::floor(std::log10(v)));
    for (double m : {1.0, 2.0, 5.0, 10.0})
        if (m * decade >= v * (1 - 1e-9)) return m * decade;
    return hi;
}

struct GeneratorState {
    double freq_hz = 1e3, vpp = 0.1, offset_v = 0;
    bool load_high_z = true;
    double load_ohms = 50;
    bool on = false;
};

struct ScopeChannel {
    std::string name;
    int node = 0;               // 0: nothing connected
    double physical_ratio = 10;  // the probe actually fitted
    double gain_error = 0;       // the channel's own vertical gain error (fraction)
    double ratio = 1;            // what the scope has been told
    bool ac = false;
    double bandwidth_hz = 0;     // 0 = full
    double volts_per_div_input = 0.1;
    double offset_v = 0;
    double range_vpp() const { return 10.0 * volts_per_div_input * ratio; }
    // Captured data.
    std::vector<int16_t> codes;
    double y_increment = 0, y_origin = 0;
};

struct ScopeState {
    std::vector<ScopeChannel> channels;
    double time_s = 1e-3, points = 1000;
    int trigger_channel = 0;
    double trigger_level_v = 0;
    bool binary = true;
    bool captured = false;
    double x_increment = 0;
};

struct MeterState {
    double range_v = 10;
    bool auto_range = true;
    std::string channel;
    int node = 0;
    double gain_error = 0;
};

struct SupplyState {
    double volts = 0, limit_a = 0.1;
    bool on = false;
};

// One-pole filter on a uniform grid, started in its periodic steady state when the record
// spans at least one period of the stimulus.
void one_pole(std::vector<double>& u, double h_s, double corner_hz, bool high_pass, size_t period_samples) {
    if (u.empty()) return;
    const double a = std::exp(-kTwoPi * corner_hz * h_s);
    auto run = [&](double y0, const std::vector<double>& in, std::vector<double>* out, size_t count) {
        double y = y0;
        for (size_t k = 0; k < count; ++k) {
            y = a * y + (1 - a) * in[k];
            if (out) (*out)[k] = y;
        }
        return y;
    };
    double y0 = 0;
    if (period_samples > 1 && period_samples <= u.size()) {
        // Periodic start: y(T) = a^N·y0 + b, so y0 = b / (1 − a^N).
        const double b = run(0.0, u, nullptr, period_samples);
        const double aN = std::pow(a, static_cast<double>(period_samples));
        y0 = aN < 1 ? b / (1 - aN) : u.front();
    } else {
        double mean = 0;
        for (double v : u) mean += v;
        y0 = high_pass ? mean / static_cast<double>(u.size()) : u.front();
    }
    std::vector<double> low(u.size());
    run(y0, u, &low, u.size());
    for (size_t k = 0; k < u.size(); ++k) u[k] = high_pass ? u[k] - low[k] : low[k];
}

}  // namespace

struct VirtualBench::Impl {
    BenchFile bench;
    Clock& clock;
    BoardSpec spec;
    SimLimits limits;
    SimulatedBoard board;
    ScpiResponder gen_scpi, scope_scpi, meter_scpi, supply_scpi;
    GeneratorState gen;
    ScopeState scope;
    MeterState meter;
    SupplyState supply;
    Random scope_noise, meter_noise, supply_noise;

    static std::string identity(const char* model, const BoardSpec& spec, const char* tag) {
        return fmt::format("ampbench,{},SIM-{}-{},{}", model, tag, spec.seed, software_version());
    }

    Impl(const circuit::Design& nominal, const BenchFile& b, const BoardSpec& s, Clock& c)
        : bench(b),
          clock(c),
          spec(s),
          board(draw_board(nominal, s), b),
          gen_scpi(identity("virtual signal generator", s, "GEN")),
          scope_scpi(identity("virtual oscilloscope", s, "SCOPE")),
          meter_scpi(identity("virtual DC meter", s, "METER")),
          supply_scpi(identity("virtual bench supply", s, "SUPPLY")),
          scope_noise(s.seed ^ 0x5C0BEULL),
          meter_noise(s.seed ^ 0x3E7E2ULL),
          supply_noise(s.seed ^ 0x5A991ULL) {
        const size_t wanted = bench.scope.present ? bench.scope.channels.size() : 2;
        const size_t count = wanted > 2 ? 4 : 2;
        for (size_t i = 0; i < count; ++i) {
            ScopeChannel ch;
            ch.name = std::to_string(i + 1);
            scope.channels.push_back(ch);
        }
        if (bench.scope.present)
            for (const auto& spec_ch : bench.scope.channels) {
                const int index = std::atoi(spec_ch.name.c_str()) - 1;
                if (index < 0 || index >= static_cast<int>(count))
                    throw InputError(bench.path, "scope.channels." + spec_ch.name,
                                     fmt::format("the virtual scope has channels 1 to {}", count));
                ScopeChannel& ch = scope.channels[static_cast<size_t>(index)];
                ch.node = board.node_of_probe(spec_ch.probe);
                ch.physical_ratio = spec_ch.ratio;
            }
        for (size_t i = 0; i < scope.channels.size(); ++i) scope.channels[i].gain_error = virtual_scope_gain_error(s.seed, i, limits);
        Random gain(s.seed ^ 0x6A1EULL);
        const double accuracy = bench.meter.present ? bench.meter.accuracy : 0.0005;
        meter.gain_error = gain.uniform(-accuracy / 2, accuracy / 2);
        add_generator();
        add_scope();
        add_meter();
        add_supply();
    }

    double now() const { return clock.now_s(); }

    // ---- generator ----------------------------------------------------------------------
    void apply_generator(double t) {
        // The displayed level is across the load setting; the EMF behind 50 Ω makes it so.
        const double scale = gen.load_high_z ? 1.0 : (gen.load_ohms + 50.0) / gen.load_ohms;
        board.set_generator(t, gen.on ? 0.5 * gen.vpp * scale : 0.0, gen.freq_hz, gen.on ? gen.offset_v * scale : 0.0);
    }

    void add_generator() {
        ScpiResponder& r = gen_scpi;
        r.on("SOURce#:FUNCtion",
             [this](const ScpiUnit& u, double) {
                 if (!mnemonic_is(word_param(u), "SINusoid")) throw ScpiFault{-224, "Illegal parameter value"};
                 return done(2e-3);
             },
             [](const ScpiUnit&, double) { return reply("SIN"); });
        r.on("SOURce#:VOLTage:UNIT",
             [](const ScpiUnit& u, double) {
                 if (!mnemonic_is(word_param(u), "VPP")) throw ScpiFault{-224, "Illegal parameter value"};
                 return done(1e-3);
             },
             [](const ScpiUnit&, double) { return reply("VPP"); });
        r.on("SOURce#:FREQuency",
             [this](const ScpiUnit& u, double t) {
                 gen.freq_hz = number_param(u, 0, limits.generator_min_freq_hz, limits.generator_max_freq_hz, 1e3);
                 apply_generator(t);
                 return done(5e-3);
             },
             [this](const ScpiUnit&, double) { return number(gen.freq_hz); });
        r.on("SOURce#:VOLTage",
             [this](const ScpiUnit& u, double t) {
                 const double max_vpp = gen.load_high_z ? limits.generator_max_vpp : limits.generator_max_vpp / 2;
                 const double v = number_param(u, 0, 1e-3, max_vpp, 0.1);
                 if (std::abs(gen.offset_v) + v / 2 > max_vpp / 2) throw ScpiFault{-221, "Settings conflict"};
                 gen.vpp = v;
                 apply_generator(t);
                 return done(5e-3);
             },
             [this](const ScpiUnit&, double) { return number(gen.vpp); });
        r.on("SOURce#:VOLTage:OFFSet",
             [this](const ScpiUnit& u, double t) {
                 const double max_v = (gen.load_high_z ? limits.generator_max_vpp : limits.generator_max_vpp / 2) / 2;
                 const double v = number_param(u, 0, -max_v, max_v, 0.0);
                 if (std::abs(v) + gen.vpp / 2 > max_v) throw ScpiFault{-221, "Settings conflict"};
                 gen.offset_v = v;
                 apply_generator(t);
                 return done(5e-3);
             },
             [this](const ScpiUnit&, double) { return number(gen.offset_v); });
        r.on("OUTPut#:LOAD",
             [this](const ScpiUnit& u, double t) {
                 const double v = number_param(u, 0, 1, 10e3, 50);
                 gen.load_high_z = std::isinf(v);
                 if (!gen.load_high_z) gen.load_ohms = v;
                 apply_generator(t);
                 return done(2e-3);
             },
             [this](const ScpiUnit&, double) { return number(gen.load_high_z ? INFINITY : gen.load_ohms); });
        r.on("OUTPut#:STATe",
             [this](const ScpiUnit& u, double t) {
                 gen.on = bool_param(u);
                 apply_generator(t);
                 return done(10e-3);
             },
             [this](const ScpiUnit&, double) { return reply(gen.on ? "1" : "0"); });
        r.on_reset([this] {
            gen = GeneratorState{};
            apply_generator(now());
        });
    }

    // ---- scope --------------------------------------------------------------------------
    ScopeChannel& channel_by_suffix(const ScpiUnit& u) {
        const int k = u.suffixes.empty() ? 1 : u.suffixes[0];
        if (k < 1 || k > static_cast<int>(scope.channels.size())) throw ScpiFault{-114, "Header suffix out of range"};
        return scope.channels[static_cast<size_t>(k - 1)];
    }
    ScopeChannel& channel_by_list(const ScpiUnit& u) {
        const auto list = channel_list_param(u);
        const int k = std::atoi(list[0].c_str());
        if (list.size() != 1 || k < 1 || k > static_cast<int>(scope.channels.size()))
            throw ScpiFault{-224, "Illegal parameter value"};
        return scope.channels[static_cast<size_t>(k - 1)];
    }

    void limit_record() {
        const double max_points = std::min(limits.scope_max_points, limits.scope_max_sample_rate_hz * scope.time_s);
        scope.points = std::clamp(std::round(scope.points), limits.scope_min_points, std::max(limits.scope_min_points, std::floor(max_points)));
    }

    // Acquires every channel: trigger, record, probe ratio, coupling, bandwidth, skew, noise, ADC.
    double acquire(double t) {
        std::vector<int> nodes;
        for (const auto& ch : scope.channels) nodes.push_back(ch.node);
        const ScopeChannel& trig = scope.channels[static_cast<size_t>(scope.trigger_channel)];
        double level_node = scope.trigger_level_v * trig.physical_ratio / trig.ratio;
        if (trig.ac && trig.node > 0) level_node += board.dc_volts(t, trig.node);
        const double skew_max = limits.scope_skew_s * static_cast<double>(scope.channels.size());
        const BoardRecord rec = board.capture(t, nodes, trig.node, level_node, scope.time_s, skew_max + 1e-9);
        const auto n_points = static_cast<size_t>(scope.points);
        scope.x_increment = scope.time_s / scope.points;
        const double f = board.generator_freq_hz();
        const auto period_samples = static_cast<size_t>(std::llround(1.0 / (f * rec.h_s)));
        for (size_t c = 0; c < scope.channels.size(); ++c) {
            ScopeChannel& ch = scope.channels[c];
            std::vector<double> u = rec.volts[c];
            const double gain = ch.ratio / ch.physical_ratio * (1 + ch.gain_error);
            for (double& v : u) v *= gain;
            if (ch.ac) one_pole(u, rec.h_s, limits.scope_ac_corner_hz, true, period_samples);
            const double bw = ch.bandwidth_hz > 0 ? ch.bandwidth_hz : limits.scope_full_bandwidth_hz;
            one_pole(u, rec.h_s, bw, false, period_samples);
            const double range = ch.range_vpp();
            ch.y_increment = range / kCodesPerScreen;
            ch.y_origin = ch.offset_v;
            const double noise_v = limits.scope_noise_fraction * range;
            ch.codes.assign(n_points, 0);
            const double skew = limits.scope_skew_s * static_cast<double>(c);
            for (size_t k = 0; k < n_points; ++k) {
                const double when = rec.trigger_s + static_cast<double>(k) * scope.x_increment + skew;
                const double pos = std::clamp((when - rec.t0_s) / rec.h_s, 0.0, static_cast<double>(u.size() - 1));
                const auto i = std::min(static_cast<size_t>(pos), u.size() - 2);
                const double frac = pos - static_cast<double>(i);
                double v = u[i] + frac * (u[i + 1] - u[i]);
                v += noise_v * scope_noise.normal();
                const double code = std::round((v - ch.y_origin) / ch.y_increment);
                ch.codes[k] = static_cast<int16_t>(std::clamp(code, static_cast<double>(kCodeMin), static_cast<double>(kCodeMax)));
            }
        }
        scope.captured = true;
        return board.time_s();
    }

    void add_scope() {
        ScpiResponder& r = scope_scpi;
        r.on("INPut#:PROBe:RATio",
             [this](const ScpiUnit& u, double) {
                 ScopeChannel& ch = channel_by_suffix(u);
                 const double range = ch.range_vpp();
                 ch.ratio = number_param(u, 0, 1e-3, 1e4, 1);
                 ch.volts_per_div_input = quantise_125(range / 10 / ch.ratio);
                 return done(2e-3);
             },
             [this](const ScpiUnit& u, double) { return number(channel_by_suffix(u).ratio); });
        r.on("INPut#:COUPling",
             [this](const ScpiUnit& u, double) {
                 ScopeChannel& ch = channel_by_suffix(u);
                 const std::string w = word_param(u);
                 if (mnemonic_is(w, "AC")) ch.ac = true;
                 else if (mnemonic_is(w, "DC")) ch.ac = false;
                 else throw ScpiFault{-224, "Illegal parameter value"};
                 return done(2e-3);
             },
             [this](const ScpiUnit& u, double) { return reply(channel_by_suffix(u).ac ? "AC" : "DC"); });
        r.on("INPut#:FILTer:LPASs:FREQuency",
             [this](const ScpiUnit& u, double) {
                 ScopeChannel& ch = channel_by_suffix(u);
                 const double full = limits.scope_full_bandwidth_hz;
                 const double v = number_param(u, 0, 20e6, full, full);
                 // Two settings, as on most bench scopes: the 20 MHz limit or full bandwidth.
                 ch.bandwidth_hz = v <= 20e6 * (1 + 1e-9) ? 20e6 : 0.0;
                 return done(2e-3);
             },
             [this](const ScpiUnit& u, double) {
                 const ScopeChannel& ch = channel_by_suffix(u);
                 return number(ch.bandwidth_hz > 0 ? ch.bandwidth_hz : limits.scope_full_bandwidth_hz);
             });
        r.on("SENSe#:VOLTage:RANGe:PTPeak",
             [this](const ScpiUnit& u, double) {
                 ScopeChannel& ch = channel_by_suffix(u);
                 const double v = number_param(u, 0, 1e-6, 1e6, 8.0);
                 ch.volts_per_div_input = quantise_125(v / 10 / ch.ratio);
                 return done(2e-3);
             },
             [this](const ScpiUnit& u, double) { return number(channel_by_suffix(u).range_vpp()); });
        r.on("SENSe#:VOLTage:RANGe:OFFSet",
             [this](const ScpiUnit& u, double) {
                 ScopeChannel& ch = channel_by_suffix(u);
                 ch.offset_v = number_param(u, 0, -1e3, 1e3, 0.0);
                 return done(2e-3);
             },
             [this](const ScpiUnit& u, double) { return number(channel_by_suffix(u).offset_v); });
        r.on("SENSe:SWEep:TIME",
             [this](const ScpiUnit& u, double) {
                 scope.time_s = number_param(u, 0, 1e-8, 100, 1e-3);
                 limit_record();
                 return done(2e-3);
             },
             [this](const ScpiUnit&, double) { return number(scope.time_s); });
        r.on("SENSe:SWEep:POINts",
             [this](const ScpiUnit& u, double) {
                 scope.points = number_param(u, 0, 1, 1e9, 1000);
                 limit_record();
                 return done(2e-3);
             },
             [this](const ScpiUnit&, double) { return number(scope.points); });
        r.on("TRIGger:SEQuence:SOURce", [this](const ScpiUnit& u, double) {
            const std::string w = word_param(u);
            std::string digits;
            size_t i = w.size();
            while (i > 0 && std::isdigit(static_cast<unsigned char>(w[i - 1]))) --i;
            const int k = i < w.size() ? std::atoi(w.c_str() + i) : 1;
            if (!mnemonic_is(w.substr(0, i), "INTernal") || k < 1 || k > static_cast<int>(scope.channels.size()))
                throw ScpiFault{-224, "Illegal parameter value"};
            scope.trigger_channel = k - 1;
            return done(1e-3);
        });
        r.on("TRIGger:SEQuence:LEVel", [this](const ScpiUnit& u, double) {
            scope.trigger_level_v = number_param(u, 0, -1e3, 1e3, 0.0);
            return done(1e-3);
        });
        r.on("TRIGger:SEQuence:SLOPe", [](const ScpiUnit& u, double) {
            if (!mnemonic_is(word_param(u), "POSitive")) throw ScpiFault{-224, "Illegal parameter value"};
            return done(1e-3);
        });
        r.on("INITiate:IMMediate", [this](const ScpiUnit&, double t) {
            const double end = acquire(t);
            scope_scpi.set_pending_until(end + 2e-3);
            return done(1e-3);
        });
        r.on("FORMat:DATA", [this](const ScpiUnit& u, double) {
            const std::string w = word_param(u);
            if (mnemonic_is(w, "ASCii")) scope.binary = false;
            else if (mnemonic_is(w, "INTeger") && (u.params.size() < 2 || u.params[1] == "16")) scope.binary = true;
            else throw ScpiFault{-224, "Illegal parameter value"};
            return done(1e-3);
        });
        r.on("FORMat:BORDer", [](const ScpiUnit& u, double) {
            if (!mnemonic_is(word_param(u), "NORMal")) throw ScpiFault{-224, "Illegal parameter value"};
            return done(1e-3);
        });
        r.on("TRACe:PREamble", {}, [this](const ScpiUnit& u, double) {
            const ScopeChannel& ch = channel_by_list(u);
            if (!scope.captured) throw ScpiFault{-230, "Data corrupt or stale"};
            return reply(fmt::format("{},{},{},{},{},{},{}", ch.codes.size(), format_reply_number(scope.x_increment), 0,
                                     format_reply_number(ch.y_increment), format_reply_number(ch.y_origin), kCodeMin,
                                     kCodeMax));
        });
        r.on("TRACe:DATA", {}, [this](const ScpiUnit& u, double) {
            const ScopeChannel& ch = channel_by_list(u);
            if (!scope.captured) throw ScpiFault{-230, "Data corrupt or stale"};
            std::string body;
            if (scope.binary) {
                std::string data;
                data.reserve(ch.codes.size() * 2);
                for (int16_t c : ch.codes) {
                    const auto w = static_cast<uint16_t>(c);
                    data.push_back(static_cast<char>(w >> 8));
                    data.push_back(static_cast<char>(w & 0xFF));
                }
                const std::string len = std::to_string(data.size());
                body = "#" + std::to_string(len.size()) + len + data;
            } else {
                for (size_t k = 0; k < ch.codes.size(); ++k) {
                    if (k) body += ',';
                    body += fmt::format("{:.6g}", ch.y_origin + ch.y_increment * ch.codes[k]);
                }
            }
            // common practice: a few MB/s over a LAN instrument link.
            const double busy = 2e-3 + static_cast<double>(body.size()) * 2e-7;
            return reply(std::move(body), busy);
        });
        r.on("MEASure:VOLTage:PTPeak", {}, [this](const ScpiUnit& u, double) {
            const ScopeChannel& ch = channel_by_list(u);
            if (!scope.captured || ch.codes.empty()) throw ScpiFault{-230, "Data corrupt or stale"};
            const auto [lo, hi] = std::minmax_element(ch.codes.begin(), ch.codes.end());
            return number((*hi - *lo) * ch.y_increment, 5e-3);
        });
    }

    // ---- meter --------------------------------------------------------------------------
    void add_meter() {
        ScpiResponder& r = meter_scpi;
        r.on("CONFigure:VOLTage:DC", [](const ScpiUnit&, double) { return done(5e-3); });
        r.on("SENSe:VOLTage:DC:RANGe",
             [this](const ScpiUnit& u, double) {
                 const double v = number_param(u, 0, 0, 1000, 10);
                 meter.auto_range = false;
                 meter.range_v = 1000;
                 for (double step : {0.1, 1.0, 10.0, 100.0, 1000.0})
                     if (step >= v * (1 - 1e-9)) {
                         meter.range_v = step;
                         break;
                     }
                 return done(5e-3);
             },
             [this](const ScpiUnit&, double) { return number(meter.range_v); });
        r.on("SENSe:VOLTage:DC:RANGe:AUTO", [this](const ScpiUnit& u, double) {
            meter.auto_range = bool_param(u);
            return done(2e-3);
        });
        r.on("ROUTe:CLOSe", [this](const ScpiUnit& u, double t) {
            const auto list = channel_list_param(u);
            if (list.size() != 1) throw ScpiFault{-224, "Illegal parameter value"};
            int node = -1;
            for (const auto& [name, design_node] : bench.meter.channels)
                if (name == list[0]) node = board.node_of(design_node);
            if (node < 0) throw ScpiFault{-224, "Illegal parameter value"};
            meter.channel = list[0];
            meter.node = node;
            board.route_meter(t, node, bench.meter.present ? bench.meter.input_ohms : 10e6);
            return done(10e-3);  // a relay settles
        });
        r.on("READ", {}, [this](const ScpiUnit&, double t) {
            // One power-line cycle of integration plus overhead.
            const double busy = 1.0 / bench.mains_hz + 5e-3;
            const double v = meter.node > 0 ? board.dc_volts(t, meter.node) : 0.0;
            double range = meter.range_v;
            if (meter.auto_range) {
                range = 1000;
                for (double step : {0.1, 1.0, 10.0, 100.0})
                    if (std::abs(v) <= 1.05 * step) {
                        range = step;
                        break;
                    }
                meter.range_v = range;
            }
            if (std::abs(v) > 1.2 * range) return number(INFINITY, busy);
            // from memory: a 6½-digit meter's 1-PLC noise is about 1 ppm of range.
            return number(v * (1 + meter.gain_error) + (1e-6 * range + 1e-6) * meter_noise.normal(), busy);
        });
    }

    // ---- supply -------------------------------------------------------------------------
    void add_supply() {
        ScpiResponder& r = supply_scpi;
        r.on("SOURce:VOLTage",
             [this](const ScpiUnit& u, double t) {
                 supply.volts = number_param(u, 0, 0, limits.supply_max_v, 0);
                 board.set_supply(t, supply.on, supply.volts, supply.limit_a);
                 return done(5e-3);
             },
             [this](const ScpiUnit&, double) { return number(supply.volts); });
        r.on("SOURce:CURRent",
             [this](const ScpiUnit& u, double t) {
                 // The limit is kept to the 0.1 mA resolution of the setting, rounding down.
                 const double v = number_param(u, 0, 1e-3, limits.supply_max_a, 0.1);
                 supply.limit_a = std::floor(v * 1e4 + 1e-6) / 1e4;
                 board.set_supply(t, supply.on, supply.volts, supply.limit_a);
                 return done(5e-3);
             },
             [this](const ScpiUnit&, double) { return number(supply.limit_a); });
        r.on("OUTPut:STATe",
             [this](const ScpiUnit& u, double t) {
                 supply.on = bool_param(u);
                 board.set_supply(t, supply.on, supply.volts, supply.limit_a);
                 return done(50e-3);
             },
             [this](const ScpiUnit&, double) { return reply(supply.on ? "1" : "0"); });
        r.on("MEASure:CURRent:DC", {}, [this](const ScpiUnit&, double t) {
            return number(board.supply_current_a(t) + 1e-6 * supply_noise.normal(), 20e-3);
        });
        r.on("MEASure:VOLTage:DC", {}, [this](const ScpiUnit&, double t) {
            return number(board.supply_volts(t) + 0.5e-3 * supply_noise.normal(), 20e-3);
        });
        r.on_reset([this] {
            supply = SupplyState{};
            board.set_supply(now(), false, 0, supply.limit_a);
        });
    }

    ScpiResponder& responder(const std::string& role) {
        if (role == "generator") return gen_scpi;
        if (role == "scope") return scope_scpi;
        if (role == "meter") return meter_scpi;
        if (role == "supply") return supply_scpi;
        throw UsageError(fmt::format("the virtual bench has no instrument '{}'", role));
    }
};

VirtualBench::VirtualBench(const circuit::Design& nominal, const BenchFile& bench, const BoardSpec& spec, Clock& clock)
    : impl_(std::make_unique<Impl>(nominal, bench, spec, clock)) {}
VirtualBench::~VirtualBench() = default;

Outcome VirtualBench::execute(const std::string& role, std::string_view line) {
    return impl_->responder(role).execute_line(line, impl_->clock.now_s());
}

SimulatedBoard& VirtualBench::board() { return impl_->board; }
Clock& VirtualBench::clock() { return impl_->clock; }
const BenchFile& VirtualBench::bench() const { return impl_->bench; }
const circuit::Design& VirtualBench::drawn_design() const { return impl_->board.design(); }
std::string VirtualBench::reveal() const { return reveal_design_json(impl_->board.design(), impl_->bench); }

// ---------------------------------------------------------------------------------------------

namespace {

class InProcessTransport final : public drivers::Transport {
public:
    InProcessTransport(std::function<VirtualBench&()> bench, std::string role, std::string name)
        : bench_(std::move(bench)), role_(std::move(role)), name_(std::move(name)) {}

    void write(std::string_view bytes, drivers::Deadline) override {
        if (closed_) throw ConnectionError(describe() + ": closed");
        pending_.append(bytes);
        size_t nl;
        while ((nl = pending_.find('\n')) != std::string::npos) {
            std::string line = pending_.substr(0, nl);
            pending_.erase(0, nl + 1);
            if (!line.empty() && line.back() == '\r') line.pop_back();
            VirtualBench& b = bench_();
            const Outcome o = b.execute(role_, line);
            b.clock().sleep_s(o.busy_s);
            if (o.has_reply) {
                output_ += o.reply;
                output_ += '\n';
            }
        }
    }

    std::string read_until(std::string_view terminator, drivers::Deadline deadline, size_t max_bytes) override {
        const size_t at = output_.find(terminator);
        if (at == std::string::npos) return timeout(deadline);
        const size_t n = at + terminator.size();
        if (n > max_bytes) throw ConnectionError(describe() + ": reply longer than the limit");
        std::string out = output_.substr(0, n);
        output_.erase(0, n);
        return out;
    }

    std::string read_exact(size_t n, drivers::Deadline deadline) override {
        if (output_.size() < n) return timeout(deadline);
        std::string out = output_.substr(0, n);
        output_.erase(0, n);
        return out;
    }

    void clear() override {
        output_.clear();
        pending_.clear();
    }
    void close() override { closed_ = true; }
    void reopen(drivers::Deadline) override { closed_ = false; }
    std::string describe() const override { return name_; }

private:
    [[noreturn]] std::string timeout(drivers::Deadline deadline) {
        // Nothing will ever arrive in-process; the wait still costs the instrument's timeout.
        bench_().clock().sleep_s(drivers::ms_left(deadline) / 1000.0);
        throw TimeoutError(describe() + ": no reply (the instrument answers only queries it knows)");
    }

    std::function<VirtualBench&()> bench_;
    std::string role_, name_;
    std::string pending_, output_;
    bool closed_ = false;
};

}  // namespace

double virtual_scope_gain_error(std::uint64_t seed, size_t channel, const SimLimits& limits) {
    Random r(seed ^ 0x5C6A1EULL);
    double g = 0;
    for (size_t i = 0; i <= channel; ++i) g = r.uniform(-limits.scope_gain_error, limits.scope_gain_error);
    return g;
}

std::unique_ptr<drivers::Transport> make_in_process_transport(std::function<VirtualBench&()> bench, const std::string& role,
                                                              std::string name) {
    return std::make_unique<InProcessTransport>(std::move(bench), role, std::move(name));
}

std::unique_ptr<drivers::Transport> make_in_process_transport(VirtualBench& bench, const std::string& role) {
    return make_in_process_transport([&bench]() -> VirtualBench& { return bench; }, role, "sim://" + role);
}

drivers::VirtualTransportFactory VirtualBench::transport_factory() {
    return [this](const std::string& role, const drivers::InstrumentUri&) { return make_in_process_transport(*this, role); };
}

}  // namespace ampbench::sim
