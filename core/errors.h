// The error hierarchy every layer throws and the exit codes the CLI maps them to (DESIGN.md §9).
#pragma once

#include <stdexcept>
#include <string>

namespace ampbench {

// Process exit codes, one per error family.
enum class ExitCode : int {
    ok = 0,
    usage = 1,
    input = 2,
    instrument = 3,
    store = 4,
    fit_input = 5,
    safety_stop = 6,
    out_of_band = 7,
    interrupted = 130,
};

// Base of every error ampbench raises on purpose. what() is the one line shown to the user.
class Error : public std::runtime_error {
public:
    explicit Error(const std::string& message) : std::runtime_error(message) {}
    virtual ExitCode exit_code() const = 0;
};

class UsageError : public Error {
public:
    explicit UsageError(const std::string& message) : Error(message) {}
    ExitCode exit_code() const override { return ExitCode::usage; }
};

// A bad file, field or value. file and field may be empty when not known.
class InputError : public Error {
public:
    InputError(std::string file, std::string field, std::string text);
    ExitCode exit_code() const override { return ExitCode::input; }
    const std::string& file() const { return file_; }
    const std::string& field() const { return field_; }
    const std::string& text() const { return text_; }
    // A copy of this error with the file set (used when a parser learns where its text came from).
    InputError in_file(const std::string& file) const;

private:
    std::string file_, field_, text_;
};

// An instrument answered, but wrongly: an error queue entry, an unparseable reply, ...
class InstrumentError : public Error {
public:
    InstrumentError(std::string instrument, std::string command, std::string reply,
                    std::string detail = {});
    ExitCode exit_code() const override { return ExitCode::instrument; }
    const std::string& instrument() const { return instrument_; }
    const std::string& command() const { return command_; }
    const std::string& reply() const { return reply_; }

private:
    std::string instrument_, command_, reply_;
};

class TimeoutError : public Error {
public:
    explicit TimeoutError(const std::string& message) : Error(message) {}
    ExitCode exit_code() const override { return ExitCode::instrument; }
};

class ConnectionError : public Error {
public:
    explicit ConnectionError(const std::string& message) : Error(message) {}
    ExitCode exit_code() const override { return ExitCode::instrument; }
};

class StoreError : public Error {
public:
    explicit StoreError(const std::string& message) : Error(message) {}
    ExitCode exit_code() const override { return ExitCode::store; }
};

class FitInputError : public Error {
public:
    explicit FitInputError(const std::string& message) : Error(message) {}
    ExitCode exit_code() const override { return ExitCode::fit_input; }
};

// A procedure stopped itself to keep the board or the user safe (quiescent current out of range,
// a supply that did not read back its current limit, ...).
class SafetyStop : public Error {
public:
    explicit SafetyStop(const std::string& message) : Error(message) {}
    ExitCode exit_code() const override { return ExitCode::safety_stop; }
};

// The user interrupted (Ctrl-C); thrown by procedures that poll the interrupt flag.
class Interrupted : public Error {
public:
    Interrupted() : Error("interrupted") {}
    ExitCode exit_code() const override { return ExitCode::interrupted; }
};

}  // namespace ampbench
