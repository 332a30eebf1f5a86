// Meter operations over the profile.
#include "drivers/roles/meter.h"

#include "core/errors.h"

namespace ampbench::drivers {

void Meter::select_dc_volts() {
    if (has("function_dc")) send("function_dc");
}

std::optional<double> Meter::set_range(std::optional<double> range_v) {
    if (!range_v) {
        send("range_auto");
        return std::nullopt;
    }
    return set_number("range", *range_v);
}

void Meter::route(const std::string& channel) {
    if (!has("route_close"))
        throw InputError(profile().path, "meter.route_close",
                         "the bench names meter channels but the profile has no channel routing");
    send("route_close", {}, channel);
}

double Meter::read_dc_volts() { return read_number("read_dc"); }

double Meter::measure_dc_volts(const std::string& channel) {
    if (!channel.empty()) route(channel);
    return read_dc_volts();
}

}  // namespace ampbench::drivers
