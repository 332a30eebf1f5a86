// Acceptance 6 of the lot-inspection issue, and the meter-range case of 7: against a scripted
// bench that records every command, the jig's supply is off (and read back off) whenever the
// operator is asked to change a device, the current limit is set and read back before each
// power-on, and every way out ends with the supply off.
#include <catch2/catch.hpp>

#include <fstream>
#include <sstream>

#include <nlohmann/json.hpp>

#include "cli/procedures/lot_inspection.h"
#include "cli_support.h"
#include "core/clock.h"
#include "core/errors.h"
#include "procedures/scripted_bench_support.h"
#include "store/archive.h"

using namespace ampbench;
using namespace ampbench::testing;
using Catch::Matchers::Contains;

namespace {

std::string read_all(const std::string& path) {
    std::ifstream in(path);
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
}

store::Lot add_test_lot(store::Archive& archive) {
    const std::string plan_path = AMPBENCH_TEST_DATA_DIR "/lot/tray.lot-plan.json";
    nlohmann::json stored = {{"file", plan_path}, {"plan", nlohmann::json::parse(read_all(plan_path))}};
    store::Lot l;
    l.lot_code = "LOT-2611-BC1";
    l.plan_json = stored.dump();
    l.quantity = 500;
    return archive.add_lot(l);
}

// The last switching event of the supply in the log so far ("supply on"/"supply off"/"").
std::string supply_state(const ScriptedBenchState& s) {
    std::string last;
    for (const auto& e : s.output_events())
        if (e == "supply on" || e == "supply off") last = e;
    return last;
}

// Asks are answered from a list; each ask records what the supply was doing at that moment.
class RecordingOperator final : public procedures::LotOperator {
public:
    RecordingOperator(std::shared_ptr<ScriptedBenchState> s, std::vector<procedures::OperatorAnswer> answers)
        : state_(std::move(s)), answers_(std::move(answers)) {}
    procedures::OperatorReply insert_device(long, long, bool) override {
        states_at_ask.push_back(supply_state(*state_));
        // The last supply command before the ask is the read-back of the output state.
        last_command_at_ask.push_back(last_supply_command());
        const auto a = asked_ < answers_.size() ? answers_[asked_] : procedures::OperatorAnswer::stop;
        ++asked_;
        return {a, a == procedures::OperatorAnswer::skip ? "cracked body" : ""};
    }
    void move_probe(const std::string&) override {}
    double type_reading(const std::string&) override { return 0; }
    std::vector<std::string> states_at_ask, last_command_at_ask;

private:
    std::string last_supply_command() const {
        for (auto it = state_->log.rbegin(); it != state_->log.rend(); ++it)
            if (it->rfind("supply: ", 0) == 0) return *it;
        return {};
    }
    std::shared_ptr<ScriptedBenchState> state_;
    std::vector<procedures::OperatorAnswer> answers_;
    size_t asked_ = 0;
};

struct Station {
    std::shared_ptr<ScriptedBenchState> state = std::make_shared<ScriptedBenchState>();
    std::unique_ptr<drivers::Meter> meter = scripted_meter(state);
    std::unique_ptr<drivers::Supply> supply = scripted_supply(state);
    VirtualClock clock;
    procedures::LotStation st;
    Station() {
        // A healthy device: hFE about 217 in the BC1 jig.
        state->meter_volts = {{"101", 10.0}, {"102", 1.19}, {"103", 6.67}, {"104", 0.49}};
        st.meter = meter.get();
        st.supply = supply.get();
        st.clock = &clock;
        st.channel_of_node = {{"vcc", "101"}, {"b", "102"}, {"c", "103"}, {"e", "104"}};
    }
};

// Every "supply on" follows a limit set and read back since the previous "supply off".
void check_limit_before_every_power_on(const ScriptedBenchState& s) {
    bool limit = false, read_back = false;
    int ons = 0;
    for (const auto& e : s.output_events()) {
        if (e == "supply limit") limit = true;
        if (e == "supply limit read back" && limit) read_back = true;
        if (e == "supply off") limit = read_back = false;
        if (e == "supply on") {
            ++ons;
            CHECK(limit);
            CHECK(read_back);
        }
    }
    CHECK(ons > 0);
}

}  // namespace

TEST_CASE("lot measure: the supply is off whenever the operator changes a device", "[cli][lot][power]") {
    cli::testing::CliTempDir dir;
    auto archive = store::open_archive(dir.db());
    const store::Lot lot = add_test_lot(*archive);
    Station s;
    using A = procedures::OperatorAnswer;
    RecordingOperator op(s.state, {A::measure, A::measure, A::skip, A::measure, A::measure, A::stop});
    std::ostringstream out;
    const auto r = procedures::measure_lot(*archive, lot.lot_code, s.st, op, out);
    CHECK(r.measured_now == 4);
    CHECK(r.skipped_now == 1);
    CHECK(r.stopped);
    REQUIRE(op.states_at_ask.size() == 6);
    for (size_t i = 0; i < op.states_at_ask.size(); ++i) {
        INFO("ask " << i);
        CHECK(op.states_at_ask[i] == "supply off");
        CHECK(op.last_command_at_ask[i] == "supply: OUTPut:STATe?");  // and read back as off
    }
    check_limit_before_every_power_on(*s.state);
    CHECK(supply_state(*s.state) == "supply off");
    CHECK_THAT(out.str(), Contains("Safety notice") && Contains("electrostatic discharge"));
    // The limit sent is the jig's, 20 mA.
    CHECK(s.state->settings["supply:SOURce:CURRent"] == "0.02");
    const auto devices = archive->devices(lot.id);
    REQUIRE(devices.size() == 5);
    CHECK(devices[0].hfe.value() == Approx((10.0 - 6.67) / 680.0 / ((10.0 - 1.19) / 390e3)).epsilon(0.01));
}

TEST_CASE("lot measure: a reading out of the meter's range powers down and keeps the reading", "[cli][lot][power]") {
    cli::testing::CliTempDir dir;
    auto archive = store::open_archive(dir.db());
    const store::Lot lot = add_test_lot(*archive);
    Station s;
    s.state->meter_text["103"] = "9.9E37";  // the overload answer (SCPI +9.9E37)
    using A = procedures::OperatorAnswer;
    RecordingOperator op(s.state, {A::measure});
    std::ostringstream out;
    try {
        procedures::measure_lot(*archive, lot.lot_code, s.st, op, out);
        FAIL("no error");
    } catch (const InstrumentError& e) {
        const std::string what = e.what();
        CHECK_THAT(what, Contains("node 'c'") && Contains("out of the meter's range"));
        CHECK(what.find('\n') == std::string::npos);
    }
    CHECK(supply_state(*s.state) == "supply off");
    const auto devices = archive->devices(lot.id);
    REQUIRE(devices.size() == 1);
    CHECK_THAT(devices[0].skipped_reason, Contains("out of the meter's range"));
    const auto readings = nlohmann::json::parse(devices[0].readings_json);
    CHECK(readings["volts"]["b"].get<double>() == 1.19);  // the readings already taken stay
    CHECK(readings["volts"]["c"].is_null());
    // The session is closed as aborted.
    const auto history = archive->history("LOT-2611-BC1");
    REQUIRE(history.size() == 1);
    CHECK(history[0].session.status == store::SessionStatus::aborted);
}

TEST_CASE("lot measure: an instrument error mid-device still ends with the supply off", "[cli][lot][power]") {
    cli::testing::CliTempDir dir;
    auto archive = store::open_archive(dir.db());
    const store::Lot lot = add_test_lot(*archive);
    Station s;
    s.state->drop_on = "meter: ROUTe:CLOSe (@103)";  // the meter link drops while the jig is powered
    using A = procedures::OperatorAnswer;
    RecordingOperator op(s.state, {A::measure});
    std::ostringstream out;
    CHECK_THROWS_AS(procedures::measure_lot(*archive, lot.lot_code, s.st, op, out), Error);
    CHECK(supply_state(*s.state) == "supply off");
    const auto devices = archive->devices(lot.id);
    REQUIRE(devices.size() == 1);  // kept with the readings taken, to be replaced
    CHECK_THAT(devices[0].skipped_reason, Contains("measurement failed"));
    CHECK(nlohmann::json::parse(devices[0].readings_json)["volts"]["b"].get<double>() == 1.19);
}
