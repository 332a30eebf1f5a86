// The oscilloscope role: per-channel probe ratio, coupling, bandwidth limit, vertical range and
// offset (set from the bench file and read back), timebase, trigger, a single acquisition with
// *OPC? wait, and waveform fetch as volts with time step and clip flags.
#pragma once

#include <string>
#include <vector>

#include "drivers/roles/instrument.h"

namespace ampbench::drivers {

struct ScopeChannelSetup {
    std::string channel;  // as written in the bench file ("1")
    double probe_ratio = 10.0;
    std::string coupling = "dc";  // "dc" or "ac"
    double bandwidth_hz = 0.0;    // 0 = full bandwidth
    double range_vpp = 8.0;       // full-screen peak-to-peak at the probe tip
    double offset_v = 0.0;
};

// What the instrument reported back after configure_channel().
struct ScopeChannelState {
    std::string channel;
    double probe_ratio = 0.0;
    std::string coupling;
    double bandwidth_hz = 0.0;  // as reported (a full-bandwidth scope may report its maximum)
    double range_vpp = 0.0;
    double offset_v = 0.0;
};

struct Waveform {
    std::vector<double> volts;
    double dt_s = 0.0;  // time step
    double t0_s = 0.0;  // time of the first sample relative to the trigger
    size_t clipped_low = 0, clipped_high = 0;  // samples at the converter's limits
    bool clipped() const { return clipped_low + clipped_high > 0; }
};

// The preamble of a capture (profile scope.preamble): volts = y_origin + y_increment × code.
struct WaveformPreamble {
    double points = 0, x_increment = 0, x_origin = 0, y_increment = 0, y_origin = 0;
    double code_min = -32768, code_max = 32767;
};

enum class WaveformEncoding { binary, ascii };

class Scope : public Instrument {
public:
    Scope(std::unique_ptr<ScpiSession> session, Profile profile, Clock* clock = nullptr)
        : Instrument("scope", std::move(session), std::move(profile), clock) {}

    // Sets every field and reads it back; InstrumentError if the probe ratio or coupling read
    // back differently (they change what a volt means), range and bandwidth are reported as read.
    ScopeChannelState configure_channel(const ScopeChannelSetup& setup);
    // Returns the range read back.
    double set_range(const std::string& channel, double range_vpp, double offset_v);
    // Capture length in seconds and, if the profile has it, the record length; returns the time read back.
    double set_timebase(double capture_s, size_t points = 0);
    void set_trigger(const std::string& channel, double level_v);
    // INITiate, then *OPC? until the capture is complete or timeout_s passes (TimeoutError).
    void single_and_wait(double timeout_s);
    WaveformPreamble preamble(const std::string& channel);
    Waveform fetch(const std::string& channel, WaveformEncoding encoding = WaveformEncoding::binary);
    // The instrument's own peak-to-peak measurement, for when a capture cannot be used.
    double amplitude_vpp(const std::string& channel);

private:
    WaveformEncoding format_ = WaveformEncoding::binary;
    bool format_sent_ = false;
};

// Parses a preamble reply by the profile's field order; InstrumentError naming command and reply.
WaveformPreamble parse_preamble(const std::string& reply, const std::vector<std::string>& fields,
                                const std::string& command);
// Decodes block data of the given reply kind into codes.
std::vector<double> decode_codes(const std::string& data, const std::string& reply_kind, const std::string& command);

}  // namespace ampbench::drivers
