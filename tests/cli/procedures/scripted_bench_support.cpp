// In-memory scpi-generic peers for the generator and supply roles (see the header).
#include "scripted_bench_support.h"

#include <fmt/format.h>

#include "core/errors.h"
#include "drivers/profiles/profile.h"
#include "drivers/transport/transport.h"

namespace ampbench::testing {
namespace {

class ScriptedTransport final : public drivers::Transport {
public:
    ScriptedTransport(std::string role, std::shared_ptr<ScriptedBenchState> state)
        : role_(std::move(role)), state_(std::move(state)) {}

    void write(std::string_view bytes, drivers::Deadline) override {
        if (dropped_) throw ConnectionError(role_ + ": connection dropped");
        std::string line(bytes);
        while (!line.empty() && (line.back() == '\n' || line.back() == '\r')) line.pop_back();
        answer(line);
    }
    std::string read_until(std::string_view terminator, drivers::Deadline, size_t) override {
        if (replies_.empty()) throw TimeoutError(role_ + ": no reply");
        std::string r = replies_.front();
        replies_.erase(replies_.begin());
        return r + std::string(terminator);
    }
    std::string read_exact(size_t, drivers::Deadline) override { throw TimeoutError(role_ + ": no block"); }
    void clear() override { replies_.clear(); }
    void close() override {}
    std::string describe() const override { return "scripted://" + role_; }

private:
    void answer(const std::string& line) {
        const bool is_query = line.find('?') != std::string::npos;
        if (line.rfind("SYSTem:ERRor?", 0) == 0) {
            if (state_->pending_errors.empty()) {
                replies_.push_back("0,\"No error\"");
            } else {
                replies_.push_back(state_->pending_errors.front());
                state_->pending_errors.erase(state_->pending_errors.begin());
            }
            return;
        }
        const std::string entry = role_ + ": " + line;
        state_->log.push_back(entry);
        if (entry == state_->fail_on) state_->pending_errors.push_back("-222,\"Data out of range\"");
        if (entry == state_->drop_on) dropped_ = true;
        if (line == "*IDN?") {
            replies_.push_back("Scripted,Bench," + role_ + ",1.0");
        } else if (line == "*OPC?") {
            replies_.push_back("1");
        } else if (line == "READ?") {
            std::string channel = state_->settings[role_ + ":ROUTe:CLOSe"];
            if (channel.rfind("(@", 0) == 0 && channel.size() > 3) channel = channel.substr(2, channel.size() - 3);
            if (auto t = state_->meter_text.find(channel); t != state_->meter_text.end()) {
                replies_.push_back(t->second);
            } else {
                auto v = state_->meter_volts.find(channel);
                replies_.push_back(fmt::format("{:.9g}", v == state_->meter_volts.end() ? 0.0 : v->second));
            }
        } else if (line == "MEASure:CURRent:DC?") {
            replies_.push_back(fmt::format("{:.9g}", state_->quiescent_a));
        } else if (is_query) {
            std::string key = line.substr(0, line.find('?'));
            auto it = state_->settings.find(role_ + ":" + key);
            std::string v = it == state_->settings.end() ? "0" : it->second;
            if (v == "ON") v = "1";
            if (v == "OFF") v = "0";
            replies_.push_back(v);
        } else {
            const auto space = line.find(' ');
            if (space != std::string::npos) state_->settings[role_ + ":" + line.substr(0, space)] = line.substr(space + 1);
        }
    }

    std::string role_;
    std::shared_ptr<ScriptedBenchState> state_;
    std::vector<std::string> replies_;
    bool dropped_ = false;
};

drivers::Profile generic_profile() {
    return drivers::find_profile("scpi-generic", {}, "", "profile");
}

}  // namespace

std::vector<std::string> ScriptedBenchState::output_events() const {
    std::vector<std::string> events;
    for (const std::string& e : log) {
        if (e == "generator: OUTPut1:STATe ON") events.push_back("generator on");
        if (e == "generator: OUTPut1:STATe OFF") events.push_back("generator off");
        if (e == "supply: OUTPut:STATe ON") events.push_back("supply on");
        if (e == "supply: OUTPut:STATe OFF") events.push_back("supply off");
        if (e.rfind("supply: SOURce:CURRent ", 0) == 0) events.push_back("supply limit");
        if (e == "supply: SOURce:CURRent?") events.push_back("supply limit read back");
        if (e == "supply: MEASure:CURRent:DC?") events.push_back("supply current read");
    }
    return events;
}

std::unique_ptr<drivers::Generator> scripted_generator(std::shared_ptr<ScriptedBenchState> state) {
    drivers::Profile p = generic_profile();
    auto session = std::make_unique<drivers::ScpiSession>(std::make_unique<ScriptedTransport>("generator", state), p.session);
    return std::make_unique<drivers::Generator>(std::move(session), p);
}

std::unique_ptr<drivers::Supply> scripted_supply(std::shared_ptr<ScriptedBenchState> state) {
    drivers::Profile p = generic_profile();
    auto session = std::make_unique<drivers::ScpiSession>(std::make_unique<ScriptedTransport>("supply", state), p.session);
    return std::make_unique<drivers::Supply>(std::move(session), p);
}

}  // namespace ampbench::testing

namespace ampbench::testing {

std::unique_ptr<drivers::Meter> scripted_meter(std::shared_ptr<ScriptedBenchState> state) {
    drivers::Profile p = generic_profile();
    auto session = std::make_unique<drivers::ScpiSession>(std::make_unique<ScriptedTransport>("meter", state), p.session);
    return std::make_unique<drivers::Meter>(std::move(session), p);
}

}  // namespace ampbench::testing
