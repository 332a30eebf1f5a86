// Role helpers over the profile's templates.
#include "drivers/roles/instrument.h"

#include "core/errors.h"

namespace ampbench::drivers {

Instrument::Instrument(std::string role, std::unique_ptr<ScpiSession> session, Profile profile, Clock* clock)
    : role_(std::move(role)), session_(std::move(session)), profile_(std::move(profile)), clock_(clock) {
    if (!clock_) {
        own_clock_ = std::make_unique<RealClock>();
        clock_ = own_clock_.get();
    }
}

Instrument::~Instrument() = default;

std::string Instrument::send(const std::string& name, const std::string& value, const std::string& channel) {
    const Operation& o = op(name);
    if (o.send.empty()) throw InputError(profile_.path, role_ + "." + name, "this operation has no 'send'");
    const std::string command = expand_template(o.send, value, channel);
    session_->write(command);
    if (profile_.check_errors_after_send) session_->check_errors(command);
    return command;
}

double Instrument::read_number(const std::string& name, const std::string& channel) {
    const Operation& o = op(name);
    if (o.query.empty()) throw InputError(profile_.path, role_ + "." + name, "this operation has no 'query'");
    return session_->query_number(expand_template(o.query, "", channel));
}

bool Instrument::read_bool(const std::string& name, const std::string& channel) {
    const Operation& o = op(name);
    if (o.query.empty()) throw InputError(profile_.path, role_ + "." + name, "this operation has no 'query'");
    return session_->query_bool(expand_template(o.query, "", channel));
}

std::string Instrument::read_text(const std::string& name, const std::string& channel) {
    const Operation& o = op(name);
    if (o.query.empty()) throw InputError(profile_.path, role_ + "." + name, "this operation has no 'query'");
    return session_->query(expand_template(o.query, "", channel));
}

double Instrument::set_number(const std::string& name, double value, const std::string& channel) {
    send(name, format_number(value), channel);
    if (op(name).query.empty()) return value;
    return read_number(name, channel);
}

}  // namespace ampbench::drivers
