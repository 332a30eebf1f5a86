// The signal generator role: a sine of given frequency, Vpp amplitude and offset, the load
// setting (high-Z or 50 Ω) and the output switch; settings are read back where the profile can.
#pragma once

#include "drivers/roles/instrument.h"

namespace ampbench::drivers {

class Generator : public Instrument {
public:
    Generator(std::unique_ptr<ScpiSession> session, Profile profile, Clock* clock = nullptr)
        : Instrument("generator", std::move(session), std::move(profile), clock) {}

    // Sine function and the Vpp amplitude unit.
    void select_sine();
    // Each returns the value the instrument reports back.
    double set_frequency(double freq_hz);
    double set_amplitude_vpp(double vpp);
    double set_offset(double volts);
    // "high-z" or "50" (bench file load_setting); InputError for anything else.
    void set_load(const std::string& load_setting);
    // Switches the output and confirms by reading it back (InstrumentError if it disagrees).
    void set_output(bool on);
    bool output_on();
};

}  // namespace ampbench::drivers
