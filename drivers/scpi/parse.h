// Parsers for SCPI replies: IEEE 488.2 *IDN? identity, numeric replies (NR1/NR2/NR3 and the
// SCPI-1999 special values), SYSTem:ERRor? entries and the error classes of SCPI-1999.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace ampbench::drivers {

struct Identity {
    std::string manufacturer, model, serial, firmware;
};

// IEEE 488.2 §10.14: four comma-separated fields. nullopt for anything else (wrong field count,
// empty manufacturer or model, control characters).
std::optional<Identity> parse_identity(std::string_view reply);

// A numeric reply: optional sign, digits with an optional point, optional exponent, optional
// surrounding spaces; SCPI-1999 9.9E37 reads as +inf, -9.9E37 as -inf, 9.91E37 as NaN.
// "INF"/"NINF"/"NAN" are accepted as well. nullopt for anything else.
std::optional<double> parse_scpi_number(std::string_view reply);

// A boolean reply: 1/0/ON/OFF (IEEE 488.2 <Boolean>, SCPI-1999 §7.3).
std::optional<bool> parse_scpi_bool(std::string_view reply);

// Comma-separated numbers (an ASCII waveform); nullopt if any item is not a number.
std::optional<std::vector<double>> parse_number_list(std::string_view reply);

struct ScpiError {
    int code = 0;
    std::string message;
    bool is_none() const { return code == 0; }
};

// `-113,"Undefined header"`; nullopt if the reply is not of that form.
std::optional<ScpiError> parse_error_entry(std::string_view reply);

// "command error" (-100..-199), "execution error" (-200..-299), "device-specific error"
// (-300..-399), "query error" (-400..-499), "power-on event" (-500), "user request" (-600),
// "request control" (-700), "operation complete" (-800), "instrument-specific error" (> 0).
std::string scpi_error_class(int code);

// True when a reply names `token` in SCPI long form ("SINusoid"), short form ("SIN") or in
// upper case, ignoring case and surrounding quotes.
bool scpi_token_matches(std::string_view reply, std::string_view token);

// Removes a trailing "\n" or "\r\n" and surrounding spaces.
std::string_view trim_reply(std::string_view reply);

}  // namespace ampbench::drivers
