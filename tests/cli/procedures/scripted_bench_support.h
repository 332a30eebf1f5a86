// A scripted bench for procedure tests: in-memory transports that answer the scpi-generic
// commands from a settings map, record every command in order, and fail on request.
#pragma once
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "drivers/roles/generator.h"
#include "drivers/roles/meter.h"
#include "drivers/roles/supply.h"

namespace ampbench::testing {

struct ScriptedBenchState {
    std::vector<std::string> log;                 // "supply: OUTPut:STATe ON", in order
    std::map<std::string, std::string> settings;  // "supply:SOURce:CURRent" -> "0.02"
    double quiescent_a = 0.002;                   // MEASure:CURRent:DC? answer
    std::string fail_on;                          // "role: COMMAND" that puts an error in the queue
    std::string drop_on;                          // "role: COMMAND" after which the peer drops the link
    std::vector<std::string> pending_errors;
    // READ? answers of the meter by the channel last closed ("101" -> volts); text answers
    // ("9.9E37" for an overload) override a number.
    std::map<std::string, double> meter_volts;
    std::map<std::string, std::string> meter_text;
    // The recorded commands that change an output, e.g. "generator off", "supply on".
    std::vector<std::string> output_events() const;
};

std::unique_ptr<drivers::Generator> scripted_generator(std::shared_ptr<ScriptedBenchState> state);
std::unique_ptr<drivers::Supply> scripted_supply(std::shared_ptr<ScriptedBenchState> state);
std::unique_ptr<drivers::Meter> scripted_meter(std::shared_ptr<ScriptedBenchState> state);

}  // namespace ampbench::testing
