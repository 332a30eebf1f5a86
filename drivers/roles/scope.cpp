// Scope operations; waveform data become volts through the preamble.
#include "drivers/roles/scope.h"

#include <cmath>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {

ScopeChannelState Scope::configure_channel(const ScopeChannelSetup& s) {
    ScopeChannelState state;
    state.channel = s.channel;
    state.probe_ratio = set_number("probe_ratio", s.probe_ratio, s.channel);
    if (std::fabs(state.probe_ratio - s.probe_ratio) > 1e-6 * s.probe_ratio)
        throw InstrumentError(role(), expand_template(op("probe_ratio").query, "", s.channel),
                              format_number(state.probe_ratio),
                              fmt::format("channel {} probe ratio reads back differently from the bench file ({})",
                                          s.channel, format_number(s.probe_ratio)));
    const Operation& coupling = op("coupling");
    const std::string token = coupling.token(s.coupling);
    send("coupling", token, s.channel);
    state.coupling = s.coupling;
    if (!coupling.query.empty()) {
        const std::string reply = read_text("coupling", s.channel);
        if (!scpi_token_matches(reply, token))
            throw InstrumentError(role(), expand_template(coupling.query, "", s.channel), reply_excerpt(reply),
                                  fmt::format("channel {} coupling is not {}", s.channel, s.coupling));
    }
    if (has("bandwidth")) {
        const Operation& bw = op("bandwidth");
        if (s.bandwidth_hz > 0) {
            state.bandwidth_hz = set_number("bandwidth", s.bandwidth_hz, s.channel);
        } else {
            send("bandwidth", bw.token("full"), s.channel);
            state.bandwidth_hz = bw.query.empty() ? 0.0 : read_number("bandwidth", s.channel);
        }
    }
    state.range_vpp = set_range(s.channel, s.range_vpp, s.offset_v);
    state.offset_v = has("offset") && !op("offset").query.empty() ? read_number("offset", s.channel) : s.offset_v;
    return state;
}

double Scope::set_range(const std::string& channel, double range_vpp, double offset_v) {
    const double back = set_number("range_vpp", range_vpp, channel);
    if (has("offset")) set_number("offset", offset_v, channel);
    return back;
}

double Scope::set_timebase(double capture_s, size_t points) {
    const double back = set_number("timebase", capture_s);
    if (points > 0 && has("points")) set_number("points", static_cast<double>(points));
    return back;
}

void Scope::set_trigger(const std::string& channel, double level_v) {
    if (has("trigger_source")) send("trigger_source", {}, channel);
    if (has("trigger_level")) send("trigger_level", format_number(level_v));
    if (has("trigger_slope")) send("trigger_slope");
}

void Scope::single_and_wait(double timeout_s) {
    // No error check between INITiate and *OPC?: the query must follow the trigger at once.
    session().write(expand_template(op("single").send, "", ""));
    session().wait_complete(timeout_s);
    if (profile().check_errors_after_send) session().check_errors(op("single").send);
}

WaveformPreamble parse_preamble(const std::string& reply, const std::vector<std::string>& fields,
                                const std::string& command) {
    const auto values = parse_number_list(reply);
    if (!values || values->size() < fields.size())
        throw InstrumentError("scope", command, reply_excerpt(reply),
                              fmt::format("expected {} comma-separated numbers in the preamble", fields.size()));
    WaveformPreamble p;
    for (size_t i = 0; i < fields.size(); ++i) {
        const double v = (*values)[i];
        const std::string& f = fields[i];
        if (f == "points") p.points = v;
        else if (f == "x_increment") p.x_increment = v;
        else if (f == "x_origin") p.x_origin = v;
        else if (f == "y_increment") p.y_increment = v;
        else if (f == "y_origin") p.y_origin = v;
        else if (f == "code_min") p.code_min = v;
        else if (f == "code_max") p.code_max = v;
    }
    if (!(p.x_increment > 0) || !std::isfinite(p.x_increment) || !(p.y_increment > 0) || !std::isfinite(p.y_increment) ||
        !std::isfinite(p.y_origin) || !std::isfinite(p.x_origin) || !(p.code_max > p.code_min))
        throw InstrumentError("scope", command, reply_excerpt(reply),
                              "preamble needs positive x and y increments and code_min < code_max");
    return p;
}

std::vector<double> decode_codes(const std::string& data, const std::string& kind, const std::string& command) {
    std::vector<double> codes;
    const auto* bytes = reinterpret_cast<const unsigned char*>(data.data());
    if (kind == "block_uint8") {
        codes.assign(bytes, bytes + data.size());
        return codes;
    }
    if (kind != "block_int16_be" && kind != "block_int16_le")
        throw InstrumentError("scope", command, "", "unknown block encoding " + kind);
    if (data.size() % 2 != 0)
        throw InstrumentError("scope", command, "", fmt::format("16-bit block has an odd length {}", data.size()));
    codes.reserve(data.size() / 2);
    const bool big = kind == "block_int16_be";
    for (size_t i = 0; i < data.size(); i += 2) {
        const unsigned hi = big ? bytes[i] : bytes[i + 1];
        const unsigned lo = big ? bytes[i + 1] : bytes[i];
        const auto code = static_cast<int16_t>(static_cast<uint16_t>((hi << 8) | lo));
        codes.push_back(code);
    }
    return codes;
}

WaveformPreamble Scope::preamble(const std::string& channel) {
    const Operation& o = op("preamble");
    const std::string command = expand_template(o.query, "", channel);
    return parse_preamble(session().query(command), o.fields, command);
}

Waveform Scope::fetch(const std::string& channel, WaveformEncoding encoding) {
    if (has("data_format") && (!format_sent_ || format_ != encoding)) {
        send("data_format", op("data_format").token(encoding == WaveformEncoding::binary ? "binary" : "ascii"));
        if (encoding == WaveformEncoding::binary && has("byte_order")) send("byte_order");
        format_ = encoding;
        format_sent_ = true;
    }
    const WaveformPreamble p = preamble(channel);
    Waveform w;
    w.dt_s = p.x_increment;
    w.t0_s = p.x_origin;
    const double v_low = p.y_origin + p.y_increment * p.code_min;
    const double v_high = p.y_origin + p.y_increment * p.code_max;
    if (encoding == WaveformEncoding::binary) {
        const Operation& o = op("waveform_binary");
        const std::string command = expand_template(o.query, "", channel);
        const auto codes = decode_codes(session().query_block(command), o.reply, command);
        w.volts.reserve(codes.size());
        for (double c : codes) {
            if (c <= p.code_min) ++w.clipped_low;
            if (c >= p.code_max) ++w.clipped_high;
            w.volts.push_back(p.y_origin + p.y_increment * c);
        }
    } else {
        const Operation& o = op("waveform_ascii");
        const std::string command = expand_template(o.query, "", channel);
        const std::string reply = session().query(command);
        auto values = parse_number_list(reply);
        if (!values) throw InstrumentError(role(), command, reply_excerpt(reply), "expected comma-separated volts");
        const double half_step = 0.5 * p.y_increment;
        for (double v : *values) {
            if (!std::isfinite(v)) throw InstrumentError(role(), command, reply_excerpt(reply), "a sample is not finite");
            if (v <= v_low + half_step) ++w.clipped_low;
            if (v >= v_high - half_step) ++w.clipped_high;
        }
        w.volts = std::move(*values);
    }
    if (p.points > 0 && static_cast<double>(w.volts.size()) != p.points)
        throw InstrumentError(role(), op("preamble").query, "",
                              fmt::format("preamble announces {} points but the capture has {}", p.points, w.volts.size()));
    return w;
}

double Scope::amplitude_vpp(const std::string& channel) { return read_number("amplitude_vpp", channel); }

}  // namespace ampbench::drivers
