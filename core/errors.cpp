// Message composition for the errors that carry structured context.
#include "core/errors.h"

namespace ampbench {
namespace {

std::string input_message(const std::string& file, const std::string& field,
                          const std::string& text) {
    std::string out;
    if (!file.empty()) out += file + ": ";
    if (!field.empty()) out += field + ": ";
    out += text;
    return out;
}

std::string instrument_message(const std::string& instrument, const std::string& command,
                               const std::string& reply, const std::string& detail) {
    std::string out = instrument.empty() ? std::string("instrument") : instrument;
    if (!command.empty()) out += ": after '" + command + "'";
    if (!detail.empty()) out += ": " + detail;
    if (!reply.empty()) out += " (reply '" + reply + "')";
    return out;
}

}  // namespace

InputError::InputError(std::string file, std::string field, std::string text)
    : Error(input_message(file, field, text)),
      file_(std::move(file)),
      field_(std::move(field)),
      text_(std::move(text)) {}

InputError InputError::in_file(const std::string& file) const {
    return InputError(file, field_, text_);
}

InstrumentError::InstrumentError(std::string instrument, std::string command, std::string reply,
                                 std::string detail)
    : Error(instrument_message(instrument, command, reply, detail)),
      instrument_(std::move(instrument)),
      command_(std::move(command)),
      reply_(std::move(reply)) {}

}  // namespace ampbench
