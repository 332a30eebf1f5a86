// Generator operations over the profile.
#include "drivers/roles/generator.h"

#include <cmath>

#include "core/errors.h"

namespace ampbench::drivers {

void Generator::select_sine() {
    send("function_sine");
    const Operation& f = op("function_sine");
    if (!f.query.empty() && !f.expect.empty()) {
        const std::string reply = read_text("function_sine");
        if (!scpi_token_matches(reply, f.expect))
            throw InstrumentError(role(), f.query, reply_excerpt(reply), "the function is not a sine");
    }
    if (has("amplitude_unit")) send("amplitude_unit");
}

double Generator::set_frequency(double freq_hz) { return set_number("frequency", freq_hz); }

double Generator::set_amplitude_vpp(double vpp) { return set_number("amplitude_vpp", vpp); }

double Generator::set_offset(double volts) { return set_number("offset", volts); }

void Generator::set_load(const std::string& load_setting) {
    if (load_setting != "high-z" && load_setting != "50")
        throw InputError("", "generator.load_setting", "'" + load_setting + "' is not high-z or 50");
    send("load", op("load").token(load_setting));
    if (op("load").query.empty()) return;
    const double ohms = read_number("load");
    // High-Z reads back as a huge number (SCPI-1999: INFinity is 9.9E37) or anything above 1 MΩ.
    const bool ok = load_setting == "50" ? std::fabs(ohms - 50.0) < 0.5 : (ohms > 1e6);
    if (!ok)
        throw InstrumentError(role(), op("load").query, format_number(ohms),
                              "the load setting did not read back as " + load_setting);
}

void Generator::set_output(bool on) {
    send("output", op("output").token(on ? "on" : "off"));
    if (op("output").query.empty()) return;
    if (output_on() != on)
        throw InstrumentError(role(), op("output").query, on ? "off" : "on",
                              std::string("the output did not switch ") + (on ? "on" : "off"));
}

bool Generator::output_on() { return read_bool("output"); }

}  // namespace ampbench::drivers
