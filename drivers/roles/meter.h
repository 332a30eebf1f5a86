// The DC meter role: DC volts, a range (or auto range), and channel routing with
// ROUTe:CLOSe (@n) where the profile has it.
#pragma once

#include <optional>
#include <string>

#include "drivers/roles/instrument.h"

namespace ampbench::drivers {

class Meter : public Instrument {
public:
    Meter(std::unique_ptr<ScpiSession> session, Profile profile, Clock* clock = nullptr)
        : Instrument("meter", std::move(session), std::move(profile), clock) {}

    void select_dc_volts();
    // nullopt = auto range. Returns the range read back (or the request).
    std::optional<double> set_range(std::optional<double> range_v);
    // Closes the channel; InputError if the profile has no routing.
    void route(const std::string& channel);
    double read_dc_volts();
    // route() when a channel is given, then read.
    double measure_dc_volts(const std::string& channel = {});
};

}  // namespace ampbench::drivers
