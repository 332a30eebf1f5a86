// The instrument side of SCPI for the virtual bench: splitting program messages, matching
// headers in long or short form with numeric suffixes (SCPI-1999 Vol. 1 §6), parsing
// parameters, IEEE 488.2 common commands and the error queue (SCPI-1999 Vol. 2 §21.8).
#pragma once

#include <deque>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace ampbench::sim {

// An SCPI error to put on the queue: −113 undefined header, −224 illegal parameter value, ...
struct ScpiFault {
    int code = 0;
    std::string message;
};

// One program message unit: "SOUR1:FREQ 1000" or "TRAC:DATA? (@1)".
struct ScpiUnit {
    std::string header;  // as sent, without the '?'
    bool query = false;
    std::vector<std::string> params;  // trimmed, split at top-level commas
    std::vector<int> suffixes;        // numeric suffixes of the matched pattern's '#' nodes
};

// Splits a line at top-level ';' (not inside quotes or parentheses).
std::vector<std::string> split_message(std::string_view line);
// Parses a unit; nullopt for an empty one.
std::optional<ScpiUnit> parse_unit(std::string_view text);
// True when `header` matches `pattern` ("SOURce#:VOLTage:OFFSet", '#' = optional numeric
// suffix, default 1); fills `suffixes`.
bool header_matches(std::string_view header, std::string_view pattern, std::vector<int>* suffixes);

// Parameter helpers; each throws ScpiFault (−109 missing, −224 / −104 bad value).
double number_param(const ScpiUnit& u, size_t index = 0, double min_value = -1e300, double max_value = 1e300,
                    double default_value = 0.0);
bool bool_param(const ScpiUnit& u, size_t index = 0);
std::string word_param(const ScpiUnit& u, size_t index = 0);
// "(@1)" or "(@101,102)" -> the channel numbers as written.
std::vector<std::string> channel_list_param(const ScpiUnit& u, size_t index = 0);
// True when the word matches a mnemonic in long/short form ("MAX" / "MAXimum").
bool mnemonic_is(std::string_view word, std::string_view mnemonic);

// Reply formatting: numbers in NR3-compatible %.12g, booleans as 1/0.
std::string format_reply_number(double v);

// What a command did: a reply (without terminator; empty = none) and how long the instrument
// is busy with it, in virtual seconds.
struct Outcome {
    std::string reply;
    bool has_reply = false;
    double busy_s = 0.0;
};

// A command table plus the common commands and the error queue: the whole SCPI personality of
// one simulated instrument.
class ScpiResponder {
public:
    using Handler = std::function<Outcome(const ScpiUnit&, double now_s)>;

    explicit ScpiResponder(std::string identity);
    // Registers `pattern` for the command form, the query form ("…?") or both.
    void on(std::string pattern, Handler command, Handler query = {});
    // *OPC? waits for this (virtual time at which pending operations finish).
    void set_pending_until(double t_s) { pending_until_s_ = t_s; }
    // *RST hook.
    void on_reset(std::function<void()> f) { reset_ = std::move(f); }

    // Executes one line (a program message) at virtual time now_s. Replies of several queries
    // are joined by ';' as IEEE 488.2 §8.4 prescribes; the terminator is added by the caller.
    Outcome execute_line(std::string_view line, double now_s);

    void push_error(int code, std::string message);
    size_t error_count() const { return errors_.size(); }
    double default_latency_s = 0.5e-3;

private:
    Outcome execute_unit(ScpiUnit unit, double now_s);
    struct Entry {
        std::string pattern;
        Handler command, query;
    };
    std::string identity_;
    std::vector<Entry> entries_;
    std::deque<ScpiFault> errors_;
    double pending_until_s_ = 0.0;
    std::function<void()> reset_;
};

}  // namespace ampbench::sim
