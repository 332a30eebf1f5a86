// The bench supply role. It refuses to switch on until a current limit has been set and read
// back in this session (DESIGN.md §6); switching off is always allowed.
#pragma once

#include <optional>

#include "drivers/roles/instrument.h"

namespace ampbench::drivers {

class Supply : public Instrument {
public:
    Supply(std::unique_ptr<ScpiSession> session, Profile profile, Clock* clock = nullptr)
        : Instrument("supply", std::move(session), std::move(profile), clock) {}

    double set_voltage(double volts);
    // Sets the limit and reads it back; SafetyStop if the read-back is missing, not positive or
    // above the request by more than 5 % (an instrument may round, never loosen much).
    double set_current_limit(double amps);
    // SafetyStop unless set_current_limit() succeeded since the last limit change.
    void output_on();
    void output_off();
    bool output_is_on();
    double measure_current();
    double measure_voltage();
    std::optional<double> current_limit_read_back() const { return limit_read_back_a_; }

private:
    std::optional<double> limit_read_back_a_;
};

}  // namespace ampbench::drivers
