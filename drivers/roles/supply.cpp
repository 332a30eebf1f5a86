// Supply operations, with the current-limit interlock.
#include "drivers/roles/supply.h"

#include <cmath>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {

double Supply::set_voltage(double volts) { return set_number("voltage", volts); }

double Supply::set_current_limit(double amps) {
    limit_read_back_a_.reset();
    if (!(amps > 0.0) || !std::isfinite(amps))
        throw SafetyStop(fmt::format("supply: current limit {} A is not a positive number", amps));
    const Operation& o = op("current_limit");
    if (o.query.empty())
        throw SafetyStop("supply: the profile cannot read the current limit back (supply.current_limit has no query)");
    send("current_limit", format_number(amps));
    const double back = read_number("current_limit");
    if (!(back > 0.0) || !std::isfinite(back) || back > amps * 1.05)
        throw SafetyStop(fmt::format("supply: current limit set to {} A but reads back {} A", format_number(amps),
                                     format_number(back)));
    limit_read_back_a_ = back;
    return back;
}

void Supply::output_on() {
    if (!limit_read_back_a_)
        throw SafetyStop("supply: refusing to switch on before a current limit has been set and read back");
    send("output", op("output").token("on"));
    if (!op("output").query.empty() && !output_is_on())
        throw InstrumentError(role(), op("output").query, "off", "the output did not switch on");
}

void Supply::output_off() {
    send("output", op("output").token("off"));
    if (!op("output").query.empty() && output_is_on())
        throw InstrumentError(role(), op("output").query, "on", "the output did not switch off");
}

bool Supply::output_is_on() { return read_bool("output"); }

double Supply::measure_current() { return read_number("measure_current"); }

double Supply::measure_voltage() { return read_number("measure_voltage"); }

}  // namespace ampbench::drivers
