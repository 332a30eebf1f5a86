// SCPI session: every read bounded by a deadline, every failure rethrown with instrument and
// command, and the transport cleared after a timeout so a late reply is not taken for the next.
#include "drivers/scpi/session.h"

#include <cmath>
#include <stdexcept>

#include <fmt/format.h>

#include "core/errors.h"
#include "drivers/transport/trace.h"

namespace ampbench::drivers {

std::string reply_excerpt(std::string_view reply) {
    std::string text = escape_bytes(reply.substr(0, 80));
    if (reply.size() > 80) text += "...";
    return text;
}

ScpiSession::ScpiSession(std::unique_ptr<Transport> transport, SessionOptions options)
    : transport_(std::move(transport)), options_(std::move(options)) {}

ScpiSession::~ScpiSession() = default;

template <class F>
auto ScpiSession::guarded(const std::string& command, double timeout_s, F&& f) {
    const double t = timeout_s > 0 ? timeout_s : options_.timeout_s;
    try {
        return f(deadline_after_s(t));
    } catch (const TimeoutError&) {
        transport_->clear();
        throw TimeoutError(fmt::format("{}: no reply to '{}' within {:.0f} ms ({})", options_.instrument,
                                       command, t * 1000.0, transport_->describe()));
    } catch (const ConnectionError& e) {
        throw ConnectionError(fmt::format("{}: '{}': {}", options_.instrument, command, e.what()));
    }
}

void ScpiSession::write(const std::string& command) {
    guarded(command, 0.0, [&](Deadline d) {
        transport_->write(command + options_.write_terminator, d);
        return 0;
    });
}

std::string ScpiSession::read_line(const std::string&, Deadline deadline) {
    std::string line = transport_->read_until("\n", deadline);
    line.pop_back();
    if (!line.empty() && line.back() == '\r') line.pop_back();
    return line;
}

std::string ScpiSession::query(const std::string& command, double timeout_s) {
    return guarded(command, timeout_s, [&](Deadline d) {
        transport_->write(command + options_.write_terminator, d);
        return read_line(command, d);
    });
}

double ScpiSession::query_number(const std::string& command) {
    const std::string reply = query(command);
    const auto value = parse_scpi_number(reply);
    if (!value) throw InstrumentError(options_.instrument, command, reply_excerpt(reply), "expected a number");
    return *value;
}

bool ScpiSession::query_bool(const std::string& command) {
    const std::string reply = query(command);
    const auto value = parse_scpi_bool(reply);
    if (!value) throw InstrumentError(options_.instrument, command, reply_excerpt(reply), "expected 1/0/ON/OFF");
    return *value;
}

std::string ScpiSession::read_block(const std::string& command, Deadline deadline) {
    const auto bad = [&](const std::string& why, std::string_view seen) {
        transport_->clear();
        return InstrumentError(options_.instrument, command, reply_excerpt(seen),
                               "IEEE 488.2 block: " + why);
    };
    if (transport_->has_end_of_message()) {
        // The message is bounded by the device's end-of-message, so the cap bounds the read.
        const std::string message = transport_->read_to_end_of_message(deadline, options_.max_block_bytes + 16);
        try {
            const auto header = parse_block_header(message, options_.max_block_bytes);
            if (header && header->indefinite) {
                std::string data = message.substr(2);
                if (!data.empty() && data.back() == '\n') data.pop_back();
                return data;
            }
            return decode_block(message, options_.max_block_bytes);
        } catch (const std::invalid_argument& e) {
            throw bad(e.what(), message);
        }
    }
    std::string head = transport_->read_exact(2, deadline);
    std::optional<BlockHeader> header;
    try {
        header = parse_block_header(head, options_.max_block_bytes);
        if (!header) {
            head += transport_->read_exact(static_cast<size_t>(head[1] - '0'), deadline);
            header = parse_block_header(head, options_.max_block_bytes);
        }
    } catch (const std::invalid_argument& e) {
        throw bad(e.what(), head);
    }
    if (header->indefinite) {
        std::string data = transport_->read_until("\n", deadline, options_.max_block_bytes + 2);
        data.pop_back();
        if (!data.empty() && data.back() == '\r') data.pop_back();
        return data;
    }
    // Read in slices so memory grows only with bytes actually received.
    std::string data;
    constexpr size_t kSlice = 1 << 20;
    while (data.size() < header->length)
        data += transport_->read_exact(std::min(kSlice, header->length - data.size()), deadline);
    std::string tail = transport_->read_exact(1, deadline);
    if (tail == "\r") tail += transport_->read_exact(1, deadline);
    if (tail != "\n" && tail != "\r\n") throw bad("unexpected bytes after the block", tail);
    return data;
}

std::string ScpiSession::query_block(const std::string& command, double timeout_s) {
    return guarded(command, timeout_s, [&](Deadline d) {
        transport_->write(command + options_.write_terminator, d);
        return read_block(command, d);
    });
}

Identity ScpiSession::identify() {
    const std::string reply = query(options_.identify);
    const auto id = parse_identity(reply);
    if (!id)
        throw InstrumentError(options_.instrument, options_.identify, reply_excerpt(reply),
                              "garbage identity: IEEE 488.2 *IDN? gives manufacturer,model,serial,firmware");
    return *id;
}

void ScpiSession::wait_complete(double timeout_s) {
    const std::string reply = query(options_.operation_complete, timeout_s);
    const auto value = parse_scpi_number(reply);
    if (!value || *value != 1.0)
        throw InstrumentError(options_.instrument, options_.operation_complete, reply_excerpt(reply),
                              "IEEE 488.2 *OPC? must answer 1");
}

std::vector<ScpiError> ScpiSession::drain_errors() {
    std::vector<ScpiError> errors;
    for (int i = 0; i < options_.max_errors; ++i) {
        const std::string reply = query(options_.error_query);
        const auto entry = parse_error_entry(reply);
        if (!entry)
            throw InstrumentError(options_.instrument, options_.error_query, reply_excerpt(reply),
                                  "SCPI-1999 error entry must be <code>,\"<message>\"");
        if (entry->is_none()) return errors;
        errors.push_back(*entry);
    }
    throw InstrumentError(options_.instrument, options_.error_query, "",
                          fmt::format("error queue still not empty after {} reads", options_.max_errors));
}

void ScpiSession::check_errors(const std::string& after_command) {
    const auto errors = drain_errors();
    if (errors.empty()) return;
    std::string detail;
    for (const auto& e : errors) {
        if (!detail.empty()) detail += "; ";
        detail += fmt::format("{} {} \"{}\"", scpi_error_class(e.code), e.code, e.message);
    }
    throw InstrumentError(options_.instrument, after_command, "", detail);
}

void ScpiSession::reconnect() {
    transport_->reopen(deadline_after_s(options_.timeout_s));
    transport_->clear();
}

}  // namespace ampbench::drivers
