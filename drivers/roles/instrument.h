// What every role shares: a session, the profile's operations, and helpers that send a setting,
// check the error queue and read the setting back.
#pragma once

#include <memory>
#include <string>

#include "core/clock.h"
#include "drivers/profiles/profile.h"
#include "drivers/scpi/session.h"

namespace ampbench::drivers {

class Instrument {
public:
    // `clock` is used for any wait the role makes; nullptr means a real clock.
    Instrument(std::string role, std::unique_ptr<ScpiSession> session, Profile profile, Clock* clock = nullptr);
    virtual ~Instrument();
    Instrument(const Instrument&) = delete;
    Instrument& operator=(const Instrument&) = delete;

    const std::string& role() const { return role_; }
    ScpiSession& session() { return *session_; }
    const Profile& profile() const { return profile_; }
    Identity identify() { return session_->identify(); }
    bool has(const std::string& op) const { return profile_.has(role_, op); }

protected:
    // Sends the operation's send template and, if the profile says so, checks the error queue.
    std::string send(const std::string& op, const std::string& value = {}, const std::string& channel = {});
    double read_number(const std::string& op, const std::string& channel = {});
    bool read_bool(const std::string& op, const std::string& channel = {});
    std::string read_text(const std::string& op, const std::string& channel = {});
    // send() then read_number() when the profile has a query; returns the read-back (or `value`).
    double set_number(const std::string& op, double value, const std::string& channel = {});
    const Operation& op(const std::string& name) const { return profile_.require(role_, name); }
    Clock& clock() { return *clock_; }

private:
    std::string role_;
    std::unique_ptr<ScpiSession> session_;
    Profile profile_;
    std::unique_ptr<Clock> own_clock_;
    Clock* clock_;
};

}  // namespace ampbench::drivers
